//! `eccaudit table FILE`: summary as text and JSON, one-line errors with file:line:column and a non-zero exit.

use crate::malformed_tables::{malformed_tables, MALFORMED};
use crate::support::eccaudit;
use predicates::prelude::*;
use std::io::Write;

const DATA: &str = concat!(env!("CARGO_MANIFEST_DIR"), "/tests/data/tables");

#[test]
fn text_summary_of_a_good_table() {
    let path = format!("{DATA}/good/two_instruments.csv");
    eccaudit()
        .args(["table", &path])
        .assert()
        .success()
        .stdout(predicate::str::contains("rows           5 (2 instruments)"))
        .stdout(predicate::str::contains(
            "BJD - 2450000, stated in the header, in days",
        ))
        .stdout(predicate::str::contains("baseline 19.038 d"))
        .stdout(predicate::str::is_match(r"(?m)^North\s+3\s").unwrap())
        .stdout(predicate::str::is_match(r"(?m)^South\s+2\s").unwrap())
        .stdout(predicate::str::is_match(r"(?m)^all\s+5\s").unwrap());
}

#[test]
fn json_summary_is_self_describing() {
    let path = format!("{DATA}/good/kms.tsv");
    let output = eccaudit()
        .args(["table", &path, "--json"])
        .output()
        .unwrap();
    assert!(output.status.success());
    let summary: serde_json::Value = serde_json::from_slice(&output.stdout).unwrap();
    assert_eq!(summary["n_rows"], 4);
    assert_eq!(summary["velocity_unit"], "m/s");
    assert_eq!(summary["velocity_unit_in_source"], "km/s");
    assert_eq!(summary["time_unit"], "days");
    assert_eq!(summary["time_convention"]["scale"], "bjd");
    assert_eq!(summary["time_convention_label"], "BJD");
    assert_eq!(summary["instruments"][0]["name"], "default");
    // Median of 2.1, 1.9, 2.5, 2.0 m/s is (2.0 + 2.1) / 2 = 2.05 m/s (by hand); tolerance covers
    // the km/s → m/s conversion rounding.
    let median = summary["overall"]["median_uncertainty_m_s"]
        .as_f64()
        .unwrap();
    assert!((median - 2.05).abs() < 1e-12, "{median}");
}

#[test]
fn options_give_unit_and_time_convention() {
    let path = format!("{DATA}/good/no_header.txt");
    eccaudit()
        .args([
            "table",
            &path,
            "--velocity-unit",
            "km/s",
            "--time",
            "offset:2450000",
        ])
        .assert()
        .success()
        .stdout(predicate::str::contains(
            "JD - 2450000 (scale not stated), stated explicitly",
        ))
        .stdout(predicate::str::contains(
            "km/s in the file (stated explicitly)",
        ));
}

#[test]
fn missing_unit_is_one_readable_line() {
    let path = format!("{DATA}/good/no_header.txt");
    eccaudit()
        .args(["table", &path])
        .assert()
        .failure()
        .stdout(predicate::str::is_empty())
        .stderr(predicate::eq(format!(
            "eccaudit: error: {path}: velocity unit not stated: write it in the header of column 2 \
             (e.g. `rv [m/s]`) or choose it (command line: --velocity-unit m/s|km/s; page: the Velocity unit menu)\n"
        )));
}

/// Every malformed fixture fails with one line: `eccaudit: error: ` and the message of
/// `malformed/expected/NAME.message` (the reader's own, checked in the reference tests).
#[test]
fn every_malformed_fixture_fails_with_its_one_line_message() {
    for (name, expected) in malformed_tables() {
        eccaudit()
            .current_dir(MALFORMED)
            .args(["table", &name])
            .assert()
            .failure()
            .stdout(predicate::str::is_empty())
            .stderr(predicate::eq(format!("eccaudit: error: {expected}\n")));
    }
}

#[test]
fn missing_file_is_one_readable_line() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("absent.csv");
    let path = path.display().to_string();
    eccaudit()
        .args(["table", &path])
        .assert()
        .failure()
        .stderr(predicate::str::starts_with(format!(
            "eccaudit: error: cannot read `{path}`: "
        )))
        .stderr(predicate::function(|text: &str| text.lines().count() == 1));
}

#[test]
fn non_utf8_file_is_rejected_readably() {
    let mut file = tempfile::NamedTempFile::new().unwrap();
    file.write_all(b"time,rv [m/s],err\n1,2,\xff\n").unwrap();
    let path = file.path().display().to_string();
    eccaudit()
        .args(["table", &path])
        .assert()
        .failure()
        .stderr(predicate::str::contains("the file is not UTF-8 text"));
}

#[test]
fn bad_option_value_is_refused() {
    let path = format!("{DATA}/good/no_header.txt");
    eccaudit()
        .args(["table", &path, "--velocity-unit", "furlongs"])
        .assert()
        .failure()
        .stderr(predicate::str::contains("expected m/s or km/s"));
}
