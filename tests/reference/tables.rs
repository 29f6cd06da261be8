//! ECSV and VOTable files written by astropy (tests/fixtures/make_table_fixtures.py, version
//! pinned in tests/fixtures/requirements.txt) read to the same numbers as the demo CSV/TSV they
//! were made from (their malformed files are fixtures of `table_reader.rs`' one loop).

use eccaudit_core::table::{
    parse_table, ReadOptions, TableFormat, TimeScale, VelocityTable, VelocityUnit,
};

fn read(name: &str, text: &str) -> VelocityTable {
    parse_table(text, &ReadOptions::new(name)).unwrap_or_else(|err| panic!("{err}"))
}

fn velka17_csv() -> VelocityTable {
    read(
        "velka17-nearly-circular.csv",
        include_str!("../../demo-data/velka17-nearly-circular.csv"),
    )
}

fn corvin4_tsv() -> VelocityTable {
    read(
        "corvin4-eccentric.tsv",
        include_str!("../../demo-data/corvin4-eccentric.tsv"),
    )
}

/// Same rows, same bits (astropy writes each float as its shortest repr, which parses back to
/// the same double; Python's repr and Rust's parser are both correctly rounded).
fn assert_same_values(a: &VelocityTable, b: &VelocityTable) {
    assert_eq!(a.times(), b.times());
    assert_eq!(a.velocities(), b.velocities());
    assert_eq!(a.uncertainties(), b.uncertainties());
    assert_eq!(a.instrument_names(), b.instrument_names());
    assert_eq!(a.instrument_index(), b.instrument_index());
}

#[test]
fn astropy_ecsv_with_a_time_column_reads_like_the_csv() {
    let text = include_str!("../data/tables/astropy/velka17.ecsv");
    assert_eq!(TableFormat::detect(text, "velka17.ecsv"), TableFormat::Ecsv);
    let ecsv = read("velka17.ecsv", text);
    let csv = velka17_csv();
    assert_same_values(&ecsv, &csv);
    // astropy Time(format="jd", scale="tdb") is read as BJD, like the CSV's `bjd` header.
    assert_eq!(ecsv.time_convention().scale, TimeScale::Bjd);
    assert_eq!(ecsv.time_convention().offset_days, Some(0.0));
    assert_eq!(
        ecsv.velocity_unit_in_source(),
        VelocityUnit::MetresPerSecond
    );
}

#[test]
fn astropy_votable_with_timesys_reads_like_the_csv() {
    let text = include_str!("../data/tables/astropy/velka17.vot");
    let vot = read("velka17.vot", text);
    assert_same_values(&vot, &velka17_csv());
    assert_eq!(vot.time_convention().scale, TimeScale::Bjd);
    assert_eq!(vot.time_convention().offset_days, Some(0.0));
}

#[test]
fn astropy_ecsv_in_km_per_second_reads_like_the_tsv() {
    let ecsv = read(
        "corvin4_kms.ecsv",
        include_str!("../data/tables/astropy/corvin4_kms.ecsv"),
    );
    let tsv = corvin4_tsv();
    assert_same_values(&ecsv, &tsv);
    assert_eq!(
        ecsv.velocity_unit_in_source(),
        VelocityUnit::KilometresPerSecond
    );
    assert_eq!(ecsv.time_convention(), tsv.time_convention());
}

#[test]
fn astropy_ecsv_with_mjd_times_reads_like_the_tsv_shifted() {
    let ecsv = read(
        "corvin4_mjd.ecsv",
        include_str!("../data/tables/astropy/corvin4_mjd.ecsv"),
    );
    let tsv = corvin4_tsv();
    assert_eq!(ecsv.time_convention().scale, TimeScale::Bjd);
    assert_eq!(ecsv.time_convention().offset_days, Some(2_400_000.5));
    assert_eq!(ecsv.velocities(), tsv.velocities());
    assert_eq!(ecsv.uncertainties(), tsv.uncertainties());
    // MJD = (BJD - 2450000) + 49999.5. The fixture script added 49999.5 in Python and astropy
    // wrote the result; the same sum in Rust is the same correctly rounded double, but astropy
    // stores the MJD as two doubles and formats their sum, so allow a few ulps at 6e4 d
    // (ulp = 7.3e-12 d).
    for (mjd, t) in ecsv.times().iter().zip(tsv.times()) {
        assert!(
            (mjd - (t + 49_999.5)).abs() <= 4.0 * 7.3e-12,
            "{mjd} vs {t}"
        );
    }
}

#[test]
fn astropy_votable_columns_found_by_ucd() {
    let vot = read(
        "corvin4_ucd.vot",
        include_str!("../data/tables/astropy/corvin4_ucd.vot"),
    );
    let tsv = corvin4_tsv();
    assert_eq!(vot.velocities(), tsv.velocities());
    assert_eq!(vot.uncertainties(), tsv.uncertainties());
    let shifted: Vec<f64> = tsv.times().iter().map(|t| t + 2_450_000.0).collect();
    assert_eq!(vot.times(), shifted.as_slice());
    assert_eq!(vot.time_convention().scale, TimeScale::Bjd);
    assert_eq!(vot.time_convention().offset_days, Some(0.0));
}
