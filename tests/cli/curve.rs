//! `eccaudit curve` end to end: CSV output and one-line errors.

use crate::support::eccaudit;
use std::f64::consts::PI;

use predicates::prelude::*;

fn parse_csv(text: &str) -> (String, Vec<(f64, f64)>) {
    let mut lines = text.lines();
    let header = lines.next().expect("header line").to_string();
    let rows = lines
        .map(|line| {
            let (t, v) = line.split_once(',').expect("two columns");
            (t.parse().unwrap(), v.parse().unwrap())
        })
        .collect();
    (header, rows)
}

#[test]
fn circular_curve_parses_and_matches_closed_form() {
    let output = eccaudit()
        .args([
            "curve",
            "--period",
            "2.5",
            "--semi-amplitude",
            "40",
            "--eccentricity",
            "0",
            "--omega-deg",
            "90",
            "--tp",
            "1.0",
            "--gamma",
            "-7.5",
            "--start",
            "0",
            "--end",
            "10",
            "--points",
            "101",
        ])
        .assert()
        .success()
        .get_output()
        .stdout
        .clone();
    let (header, rows) = parse_csv(&String::from_utf8(output).unwrap());
    assert_eq!(header, "time [d],velocity [m/s]");
    assert_eq!(rows.len(), 101);
    assert_eq!(rows[0].0, 0.0);
    assert_eq!(rows[100].0, 10.0);
    for &(t, v) in &rows {
        // e = 0: v = K cos(2π(t − T_p)/P + ω) + γ (common practice).
        let expected = 40.0 * (2.0 * PI * (t - 1.0) / 2.5 + PI / 2.0).cos() - 7.5;
        assert!((v - expected).abs() < 1e-9, "t={t}: {v} vs {expected}");
    }
}

#[test]
fn repeated_companions_and_trend_write_to_file() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("curve.csv");
    eccaudit()
        .args([
            "curve",
            "--companion",
            "P=3,K=10,e=0.2,omega_deg=45,tp=0.5",
            "--companion",
            "P=50,K=5,tp=10",
            "--trend",
            "0.1",
            "--t-ref",
            "5",
            "--start",
            "0",
            "--end",
            "20",
            "--points",
            "11",
            "--output",
        ])
        .arg(&path)
        .assert()
        .success()
        .stdout(predicate::str::is_empty());
    let (header, rows) = parse_csv(&std::fs::read_to_string(&path).unwrap());
    assert_eq!(header, "time [d],velocity [m/s]");
    assert_eq!(rows.len(), 11);
    // Reference: the same model built through the library.
    let a = eccaudit_core::orbit::OrbitalElements::new(3.0, 10.0, 0.2, PI / 4.0, 0.5).unwrap();
    let b = eccaudit_core::orbit::OrbitalElements::new(50.0, 5.0, 0.0, 0.0, 10.0).unwrap();
    for &(t, v) in &rows {
        let expected = a.radial_velocity(t) + b.radial_velocity(t) + 0.1 * (t - 5.0);
        assert!((v - expected).abs() < 1e-9, "t={t}");
    }
}

fn assert_one_line_error(args: &[&str], needle: &str) {
    let assert = eccaudit().args(args).assert().failure();
    let stderr = String::from_utf8(assert.get_output().stderr.clone()).unwrap();
    assert_eq!(stderr.trim_end().lines().count(), 1, "stderr: {stderr}");
    assert!(stderr.contains(needle), "stderr lacks '{needle}': {stderr}");
}

#[test]
fn bad_inputs_give_one_line_and_nonzero_exit() {
    let base = ["curve", "--start", "0", "--end", "1"];
    let with = |extra: &[&'static str]| -> Vec<&'static str> {
        base.iter().copied().chain(extra.iter().copied()).collect()
    };
    assert_one_line_error(
        &with(&[
            "--period",
            "2",
            "--semi-amplitude",
            "3",
            "--tp",
            "0",
            "--eccentricity",
            "1.2",
        ]),
        "eccentricity",
    );
    assert_one_line_error(
        &with(&["--period", "0", "--semi-amplitude", "3", "--tp", "0"]),
        "period",
    );
    assert_one_line_error(
        &with(&["--period", "2", "--semi-amplitude", "-3", "--tp", "0"]),
        "semi-amplitude",
    );
    assert_one_line_error(&with(&["--period", "2"]), "--tp");
    assert_one_line_error(&with(&["--companion", "P=2,K=abc,tp=0"]), "not a number");
    assert_one_line_error(&with(&["--companion", "P=2,K=3,tp=0,e=1"]), "eccentricity");
    assert_one_line_error(&with(&[]), "no companion");
    assert_one_line_error(
        &[
            "curve",
            "--start",
            "5",
            "--end",
            "1",
            "--companion",
            "P=2,K=3,tp=0",
        ],
        "--end",
    );
}
