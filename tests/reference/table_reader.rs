//! Velocity-table reader on the example files in tests/data/tables: good inputs read right,
//! malformed inputs rejected with file, line and column (one loop over the fixtures of
//! `malformed/` and their `expected/NAME.message` files, plus typed checks and inline cases).

use crate::malformed_tables::{malformed_tables, MALFORMED};
use approx::assert_relative_eq;
use eccaudit_core::table::{
    parse_table, Delimiter, ReadOptions, StatedBy, TableError, TimeScale, TimeSpec, VelocityTable,
    VelocityUnit,
};

fn read(name: &str, text: &str) -> Result<VelocityTable, TableError> {
    parse_table(text, &ReadOptions::new(name))
}

fn read_m_s(name: &str, text: &str) -> Result<VelocityTable, TableError> {
    let options = ReadOptions {
        velocity_unit: Some(VelocityUnit::MetresPerSecond),
        ..ReadOptions::new(name)
    };
    parse_table(text, &options)
}

/// The one-line message a table was refused with (the test fails if it was read).
fn refusal(result: Result<VelocityTable, TableError>) -> String {
    result.unwrap_err().to_string()
}

// ----------------------------------------------------------------------------
// Good inputs
// ----------------------------------------------------------------------------

#[test]
fn csv_with_header_comments_blank_line_and_two_instruments() {
    let text = include_str!("../data/tables/good/two_instruments.csv");
    let table = read("two_instruments.csv", text).unwrap();
    assert_eq!(table.n_rows(), 5);
    assert_eq!(
        table.times(),
        &[5001.512, 5003.498, 5010.731, 5012.604, 5020.550]
    );
    assert_eq!(table.velocities(), &[12.5, -3.0, 7.25, 20.0, -15.5]);
    assert_eq!(table.uncertainties(), &[1.5, 1.2, 2.0, 2.5, 1.0]);
    assert_eq!(
        table.instrument_names(),
        &["North".to_string(), "South".to_string()]
    );
    assert_eq!(table.instrument_index(), &[0, 0, 1, 1, 0]);
    // Lines of the original file: header on 3, blank line 6.
    assert_eq!(table.lines(), &[4, 5, 7, 8, 9]);
    let convention = table.time_convention();
    assert_eq!(convention.scale, TimeScale::Bjd);
    assert_eq!(convention.offset_days, Some(2_450_000.0));
    assert_eq!(convention.stated_by, StatedBy::Header);
    assert_eq!(table.velocity_unit_stated_by(), StatedBy::Header);
    assert!(table.notices().is_empty(), "{:?}", table.notices());

    let summary = table.summary();
    assert_eq!(summary.n_rows, 5);
    assert_eq!(summary.n_instruments, 2);
    assert_eq!(summary.time_convention_label, "BJD - 2450000");
    assert_eq!(summary.overall.first_time, 5001.512);
    assert_eq!(summary.overall.last_time, 5020.550);
    // Baseline by hand: 5020.550 − 5001.512 = 19.038 d (tolerance: one rounding of the subtraction).
    assert_relative_eq!(summary.overall.baseline_days, 19.038, max_relative = 1e-12);
    let north = &summary.instruments[0];
    assert_eq!((north.name.as_str(), north.n_rows), ("North", 3));
    // By hand (common practice): mean of 12.5, −3, −15.5 is −2; RMS = sqrt((14.5² + 1² + 13.5²) / 3).
    assert_relative_eq!(north.mean_velocity_m_s, -2.0, max_relative = 1e-14);
    assert_relative_eq!(
        north.rms_m_s,
        (393.5_f64 / 3.0).sqrt(),
        max_relative = 1e-14
    );
    assert_relative_eq!(north.median_uncertainty_m_s, 1.2);
    let south = &summary.instruments[1];
    assert_eq!((south.name.as_str(), south.n_rows), ("South", 2));
    assert_relative_eq!(south.median_uncertainty_m_s, 2.25, max_relative = 1e-15);
    assert_relative_eq!(summary.overall.median_uncertainty_m_s, 1.5);
}

#[test]
fn tsv_with_units_in_header_is_converted_from_km_s() {
    let text = include_str!("../data/tables/good/kms.tsv");
    let table = read("kms.tsv", text).unwrap();
    assert_eq!(
        table.velocity_unit_in_source(),
        VelocityUnit::KilometresPerSecond
    );
    // 1 km/s = 1000 m/s exactly; the product is one rounding away from the decimal value.
    let expected_m_s = [-12345.1, -12340.2, -12339.0, -12347.5];
    for (value, expected) in table.velocities().iter().zip(expected_m_s) {
        assert_relative_eq!(*value, expected, max_relative = 1e-15);
    }
    let expected_sigma_m_s = [2.1, 1.9, 2.5, 2.0];
    for (value, expected) in table.uncertainties().iter().zip(expected_sigma_m_s) {
        assert_relative_eq!(*value, expected, max_relative = 1e-13);
    }
    assert_eq!(table.time_convention().scale, TimeScale::Bjd);
    assert_eq!(table.time_convention().offset_days, Some(0.0));
    assert_eq!(table.instrument_names(), &["default".to_string()]);
}

#[test]
fn whitespace_without_header_needs_and_takes_an_explicit_unit() {
    let text = include_str!("../data/tables/good/no_header.txt");
    assert_eq!(
        refusal(read("no_header.txt", text)),
        "no_header.txt: velocity unit not stated: write it in the header of column 2 \
         (e.g. `rv [m/s]`) or choose it (command line: --velocity-unit m/s|km/s; page: the Velocity unit menu)"
    );
    let options = ReadOptions {
        velocity_unit: Some(VelocityUnit::KilometresPerSecond),
        ..ReadOptions::new("no_header.txt")
    };
    let table = parse_table(text, &options).unwrap();
    assert_eq!(table.velocity_unit_stated_by(), StatedBy::Explicit);
    assert_eq!(
        table.instrument_names(),
        &["Blue arm".to_string(), "red".to_string()]
    );
    assert_eq!(table.instrument_index(), &[0, 0, 1, 1]);
    assert_eq!(table.lines(), &[2, 3, 4, 5]);
    assert_relative_eq!(table.velocities()[0], 103_200.0, max_relative = 1e-15);
    // Times below 2 400 000 with no stated convention: unknown origin, said in a notice.
    let convention = table.time_convention();
    assert_eq!(convention.offset_days, None);
    assert_eq!(convention.stated_by, StatedBy::Inferred);
    assert!(table.notices()[0].contains("time convention not stated"));
    assert!(table
        .summary()
        .to_string()
        .contains("inferred from the magnitude"));
}

#[test]
fn full_julian_dates_without_convention_are_inferred_as_such() {
    let text = "2455001.5 1 1\n2455002.5 2 1\n2455003.5 3 1\n";
    let table = read_m_s("jd.txt", text).unwrap();
    let convention = table.time_convention();
    assert_eq!(convention.scale, TimeScale::Unstated);
    assert_eq!(convention.offset_days, Some(0.0));
    assert_eq!(convention.stated_by, StatedBy::Inferred);
    assert_eq!(
        table.summary().time_convention_label,
        "JD-like full date (scale not stated)"
    );
}

#[test]
fn unsorted_rows_are_sorted_stably_with_a_notice() {
    let text = include_str!("../data/tables/good/unsorted.csv");
    let table = read("unsorted.csv", text).unwrap();
    assert_eq!(table.times(), &[58001.1, 58001.1, 58002.7, 58003.2]);
    // Equal times keep file order: line 3 (A) before line 5 (B).
    assert_eq!(table.lines(), &[3, 5, 4, 2]);
    assert_eq!(
        table.instrument_names(),
        &["A".to_string(), "B".to_string()]
    );
    assert_eq!(table.instrument_index(), &[0, 1, 1, 0]);
    // The uncertainty header has no unit: it takes the velocity's km/s.
    assert_relative_eq!(table.uncertainties()[0], 10.0, max_relative = 1e-15);
    assert_eq!(
        table.notices(),
        &["times are not in increasing order (first out of order on line 3); rows were sorted by time"
            .to_string()]
    );
    let convention = table.time_convention();
    assert_eq!(
        (convention.scale, convention.offset_days),
        (TimeScale::Jd, Some(2_400_000.5))
    );
}

#[test]
fn columns_in_any_order_with_aliases() {
    let text = "Telescope;e_rv;VRAD (km/s);JD\nA;0.001;1.5;2450001\nA;0.001;1.6;2450002\n;0.002;1.7;2450003\n";
    let table = read("semicolon.csv", text).unwrap();
    assert_eq!(table.times(), &[2450001.0, 2450002.0, 2450003.0]);
    assert_relative_eq!(table.velocities()[2], 1700.0, max_relative = 1e-15);
    assert_eq!(
        table.instrument_names(),
        &["A".to_string(), "default".to_string()]
    );
    assert!(table.notices()[0].contains("blank instrument label (first on line 4)"));
}

#[test]
fn instrument_label_that_is_also_a_column_name_is_data() {
    let table = read_m_s("site.txt", "1 2 3 site\n2 3 4 site\n3 4 5 t\n").unwrap();
    assert_eq!(
        table.instrument_names(),
        &["site".to_string(), "t".to_string()]
    );
}

#[test]
fn explicit_delimiter_and_trailing_commas() {
    let text = "t,rv_ms,err,\n1,2,3,\n2,3,4,\n3,4,5,\n";
    let options = ReadOptions {
        delimiter: Some(Delimiter::Comma),
        time: Some("bjd-2450000".parse::<TimeSpec>().unwrap()),
        ..ReadOptions::new("trailing.csv")
    };
    let table = parse_table(text, &options).unwrap();
    assert_eq!(table.velocities(), &[2.0, 3.0, 4.0]);
    assert_eq!(table.time_convention().stated_by, StatedBy::Explicit);
}

// ----------------------------------------------------------------------------
// Malformed inputs: message text and position
// ----------------------------------------------------------------------------

/// The error of reading malformed fixture `name` (its message is checked by
/// [`every_malformed_fixture_gives_its_expected_message`]).
fn malformed(name: &str) -> TableError {
    let text = std::fs::read_to_string(format!("{MALFORMED}/{name}")).unwrap();
    read(name, &text).unwrap_err()
}

/// Every file in `tests/data/tables/malformed/` is refused with exactly the message of
/// `expected/NAME.message` (file, line and column where they apply). To add a malformed case,
/// add both files. Positions worth knowing: in `bad_yaml.ecsv` the flow mapping opened on
/// line 5 is never closed, so the YAML scanner stops at `schema:` on line 7, column 3 (after
/// the `# ` prefix); in `bad_xml.vot`, `<TD>-1426.64</TR>` on line 22 does not match.
#[test]
fn every_malformed_fixture_gives_its_expected_message() {
    for (name, expected) in malformed_tables() {
        let message = malformed(&name).to_string();
        assert_eq!(message, expected, "{name}");
        assert!(!message.contains('\n'), "{name}: one line");
    }
}

#[test]
fn non_numeric_field() {
    let err = malformed("not_a_number.csv");
    assert!(matches!(
        err,
        TableError::NotANumber {
            line: 5,
            column: 2,
            ..
        }
    ));
}

#[test]
fn nan_uncertainty() {
    let err = malformed("nan.csv");
    assert!(matches!(
        err,
        TableError::NotFinite {
            line: 3,
            column: 3,
            ..
        }
    ));
    assert_eq!(
        refusal(read(
            "inf.csv",
            "time,rv [m/s],err\n1,2,3\n2,-inf,3\n3,4,5\n"
        )),
        "inf.csv:3:2: rv [m/s] (column 2) is `-inf`; only finite numbers are allowed"
    );
}

#[test]
fn zero_uncertainty_in_a_reordered_tsv() {
    let err = malformed("zero_uncertainty.tsv");
    assert!(matches!(
        err,
        TableError::NonPositiveUncertainty {
            line: 5,
            column: 1,
            ..
        }
    ));
    assert_eq!(
        refusal(read_m_s("negative.txt", "1 2 3\n2 3 -0.5\n3 4 5\n")),
        "negative.txt:2:3: uncertainty (column 3) must be greater than zero, found `-0.5`"
    );
}

#[test]
fn wrong_number_of_fields() {
    let err = malformed("wrong_field_count.csv");
    assert!(matches!(
        err,
        TableError::WrongFieldCount {
            line: 3,
            expected: 4,
            found: 5,
            ..
        }
    ));
    assert_eq!(
        refusal(read_m_s("short.txt", "\n1 2 3\n2 3\n3 4 5\n")),
        "short.txt:3: expected 3 fields (as on line 2), found 2"
    );
    assert_eq!(
        refusal(read_m_s("wide.txt", "1 2 3 A B\n")),
        "wide.txt:1: without a header a row needs 3 or 4 fields \
         (time, velocity, uncertainty[, instrument]); found 5"
    );
}

#[test]
fn duplicate_row_names_both_lines() {
    let err = malformed("duplicate.csv");
    assert!(matches!(
        err,
        TableError::DuplicateRow {
            line: 6,
            first_line: 3,
            ..
        }
    ));
}

#[test]
fn empty_file_and_header_only() {
    let err = read("blank.csv", "").unwrap_err();
    assert!(matches!(err, TableError::Empty { .. }));
    assert_eq!(
        refusal(read("header.csv", "# c\ntime,rv [m/s],err\n")),
        "header.csv: the table has no data rows (only a header on line 2)"
    );
}

#[test]
fn unknown_header_name_and_unit() {
    let err = malformed("unknown_header.csv");
    assert!(matches!(
        err,
        TableError::UnknownHeader {
            line: 1,
            column: 4,
            ..
        }
    ));
    assert_eq!(
        refusal(read("cm.csv", "\ntime,rv [cm/s],err\n1,2,3\n2,3,4\n3,4,5\n")),
        "cm.csv:2:2: unit `cm/s` in header `rv [cm/s]` (column 2) not recognised; write m/s or km/s"
    );
    assert_eq!(
        refusal(read("twice.csv", "time,rv [m/s],vel [m/s],err\n")),
        "twice.csv:1:3: the header names the velocity column twice: column 2 `rv [m/s]` and column 3 `vel [m/s]`"
    );
    let err = read("missing.csv", "time,rv [m/s],instrument\n1,2,A\n").unwrap_err();
    assert!(
        err.to_string()
            .starts_with("missing.csv:1: the header has no uncertainty column"),
        "{err}"
    );
}

#[test]
fn header_and_explicit_settings_that_disagree() {
    let text = include_str!("../data/tables/good/kms.tsv");
    let options = ReadOptions {
        velocity_unit: Some(VelocityUnit::MetresPerSecond),
        ..ReadOptions::new("kms.tsv")
    };
    assert_eq!(
        refusal(parse_table(text, &options)),
        "kms.tsv:1:2: header `rv_kms` (column 2) says km/s but the velocity unit was given as m/s"
    );
    let options = ReadOptions {
        time: Some("mjd".parse().unwrap()),
        ..ReadOptions::new("kms.tsv")
    };
    assert_eq!(
        refusal(parse_table(text, &options)),
        "kms.tsv:1:1: header `bjd` (column 1) says the times are BJD but they were given as MJD (JD - 2400000.5)"
    );
}
