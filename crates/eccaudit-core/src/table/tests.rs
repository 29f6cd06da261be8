//! Unit tests of the velocity-table reader: delimiter detection, field splitting, line numbers, round trip.

use super::*;
use proptest::prelude::*;

fn options_m_s(name: &str) -> ReadOptions {
    ReadOptions {
        velocity_unit: Some(VelocityUnit::MetresPerSecond),
        ..ReadOptions::new(name)
    }
}

#[test]
fn delimiter_detection() {
    assert_eq!(detect_delimiter("# c\n1,2,3\n4,5,6\n"), Delimiter::Comma);
    assert_eq!(detect_delimiter("1\t2\t3\n4\t5\t6\n"), Delimiter::Tab);
    assert_eq!(detect_delimiter("1;2;3\n4;5;6\n"), Delimiter::Semicolon);
    assert_eq!(
        detect_delimiter("1  2 3\n4\t5   6\n"),
        Delimiter::Whitespace
    );
    // One line with a tab among space-separated lines is still whitespace.
    assert_eq!(detect_delimiter("1\t2\t3\n4 5 6\n"), Delimiter::Whitespace);
}

#[test]
fn whitespace_fields_keep_quotes_and_bracketed_units() {
    assert_eq!(
        split_whitespace_fields("  bjd   rv [km s^-1]\terr (m/s) inst"),
        vec!["bjd", "rv [km s^-1]", "err (m/s)", "inst"]
    );
    assert_eq!(
        split_whitespace_fields("1.5 -2 0.3 \"HARPS N\""),
        vec!["1.5", "-2", "0.3", "\"HARPS N\""]
    );
}

#[test]
fn records_carry_original_line_numbers() {
    let text = "# comment\n\ntime,rv [m/s],err\n  # indented comment\n1,2,3\n\n4,5,6\n";
    let records = read_records(text, Delimiter::Comma, "x").unwrap();
    let lines: Vec<usize> = records.iter().map(|record| record.line).collect();
    assert_eq!(lines, vec![3, 5, 7]);
    let text = "1  2   3\n\n# c\n4\t5 6 \"A B\"\n";
    let records = read_records(text, Delimiter::Whitespace, "x").unwrap();
    assert_eq!(records[1].line, 4);
    assert_eq!(records[1].fields, vec!["4", "5", "6", "A B"]);
}

#[test]
fn crlf_and_byte_order_mark() {
    let text = "\u{feff}time,rv [m/s],err\r\n1,2,3\r\n2,3,4\r\n3,4,5\r\n";
    let table = parse_table(text, &ReadOptions::new("crlf.csv")).unwrap();
    assert_eq!(table.times(), &[1.0, 2.0, 3.0]);
    assert_eq!(table.lines(), &[2, 3, 4]);
}

#[test]
fn explicit_time_convention_fills_in_the_unstated_scale() {
    let text = "time [offset:2450000],rv [m/s],err\n1,2,3\n2,3,4\n3,4,5\n";
    let options = ReadOptions {
        time: Some("BJD-2450000".parse().unwrap()),
        ..ReadOptions::new("t.csv")
    };
    let table = parse_table(text, &options).unwrap();
    assert_eq!(table.time_convention().scale, TimeScale::Bjd);
    assert_eq!(table.time_convention().offset_days, Some(2_450_000.0));
    assert_eq!(table.time_convention().stated_by, StatedBy::Explicit);
}

#[test]
fn labels_of_time_conventions() {
    let label =
        |text: &str| TimeConvention::stated(text.parse().unwrap(), StatedBy::Header).label();
    assert_eq!(label("bjd"), "BJD");
    assert_eq!(label("BJD-2450000"), "BJD - 2450000");
    assert_eq!(label("mjd"), "MJD (JD - 2400000.5)");
    assert_eq!(label("offset:2457000"), "JD - 2457000 (scale not stated)");
}

#[test]
fn from_columns_checks_like_the_reader() {
    let convention = TimeConvention::stated("jd".parse().unwrap(), StatedBy::Explicit);
    let names = vec![String::new(); 3];
    let err = VelocityTable::from_columns(
        "mem",
        &[1.0, 2.0, 3.0],
        &[0.0, f64::NAN, 0.0],
        &[1.0, 1.0, 1.0],
        &names,
        convention,
    )
    .unwrap_err();
    assert!(
        matches!(
            err,
            TableError::NotFinite {
                line: 2,
                column: 2,
                ..
            }
        ),
        "{err}"
    );
    let table = VelocityTable::from_columns(
        "mem",
        &[3.0, 1.0, 2.0],
        &[0.0, 1.0, 2.0],
        &[1.0, 1.0, 1.0],
        &names,
        convention,
    )
    .unwrap();
    assert_eq!(table.instrument_names(), &["default".to_string()]);
    assert_eq!(table.times(), &[1.0, 2.0, 3.0]);
    assert_eq!(table.velocities(), &[1.0, 2.0, 0.0]);
    assert_eq!(table.notices().len(), 2, "{:?}", table.notices());
}

/// A time convention among those the writer states in its header, with times
/// in the range that convention implies; or an unknown origin with small times.
fn convention_and_time_range() -> impl Strategy<Value = (TimeConvention, std::ops::Range<f64>)> {
    let stated = |text: &str| TimeConvention::stated(text.parse().unwrap(), StatedBy::Header);
    prop_oneof![
        Just((stated("bjd"), 2_400_000.0..2_470_000.0)),
        Just((stated("jd"), 2_400_000.0..2_470_000.0)),
        Just((stated("mjd"), 40_000.0..70_000.0)),
        Just((stated("bjd-2450000"), -5_000.0..20_000.0)),
        Just((stated("offset:2457000"), -1_000.0..5_000.0)),
        Just((
            TimeConvention {
                scale: TimeScale::Unstated,
                offset_days: None,
                stated_by: StatedBy::Inferred,
            },
            -1_000.0..100_000.0
        )),
    ]
}

fn arbitrary_table() -> impl Strategy<Value = VelocityTable> {
    (convention_and_time_range(), 3usize..40).prop_flat_map(|((convention, range), n_rows)| {
        let instrument_name = prop_oneof![
            Just(String::new()),
            "[A-Za-z][A-Za-z0-9_,\" -]{0,8}[A-Za-z0-9]",
        ];
        (
            proptest::collection::vec(range, n_rows),
            proptest::collection::vec(-1e5..1e5f64, n_rows),
            proptest::collection::vec(1e-3..1e3f64, n_rows),
            proptest::collection::vec(instrument_name, n_rows),
        )
            .prop_filter_map(
                "duplicate time and instrument",
                move |(mut t, v, s, names)| {
                    // Sorted times: instruments are then numbered in the order the written file shows them.
                    t.sort_by(f64::total_cmp);
                    VelocityTable::from_columns("generated", &t, &v, &s, &names, convention).ok()
                },
            )
    })
}

proptest! {
    /// Any valid table written as CSV reads back to the same rows, instruments and convention.
    #[test]
    fn written_table_reads_back(table in arbitrary_table()) {
        let text = write_table_csv(&table);
        let read = parse_table(&text, &ReadOptions::new("generated")).map_err(|err| {
            TestCaseError::fail(format!("{err}\n{text}"))
        })?;
        prop_assert_eq!(read.times(), table.times());
        prop_assert_eq!(read.velocities(), table.velocities());
        prop_assert_eq!(read.uncertainties(), table.uncertainties());
        prop_assert_eq!(read.instrument_names(), table.instrument_names());
        prop_assert_eq!(read.instrument_index(), table.instrument_index());
        let (read_convention, convention) = (read.time_convention(), table.time_convention());
        prop_assert_eq!(read_convention.scale, convention.scale);
        prop_assert_eq!(read_convention.offset_days, convention.offset_days);
        prop_assert_eq!(read.velocity_unit_in_source(), VelocityUnit::MetresPerSecond);
    }

    /// The reader never panics on arbitrary text.
    #[test]
    fn arbitrary_text_does_not_panic(text in "[0-9a-z ,.;\t\n#\"\\[\\]/-]{0,200}") {
        let _ = parse_table(&text, &options_m_s("noise"));
    }
}
