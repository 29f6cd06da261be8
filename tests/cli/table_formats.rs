//! The command line on astropy's formats: ECSV and VOTable tables fit to the same numbers as the
//! CSV they were made from (malformed ones: the fixture loop of `table.rs`), and `inject` writes
//! its trials as ECSV too.

use crate::support::eccaudit;
const ROOT: &str = env!("CARGO_MANIFEST_DIR");

fn fit_json(path: &str) -> serde_json::Value {
    let output = eccaudit()
        .args(["fit", path, "--json"])
        .output()
        .expect("eccaudit runs");
    assert!(
        output.status.success(),
        "{}",
        String::from_utf8_lossy(&output.stderr)
    );
    serde_json::from_slice(&output.stdout).expect("fit --json prints JSON")
}

#[test]
fn fit_of_astropy_files_equals_fit_of_the_csv() {
    let csv = fit_json(&format!("{ROOT}/demo-data/velka17-nearly-circular.csv"));
    for file in ["velka17.ecsv", "velka17.vot"] {
        let other = fit_json(&format!("{ROOT}/tests/data/tables/astropy/{file}"));
        assert_eq!(other, csv, "{file}");
    }
    let tsv = fit_json(&format!("{ROOT}/demo-data/corvin4-eccentric.tsv"));
    let ecsv = fit_json(&format!(
        "{ROOT}/tests/data/tables/astropy/corvin4_kms.ecsv"
    ));
    assert_eq!(ecsv, tsv);
}

#[test]
fn inject_writes_trials_as_ecsv_with_the_csv_values() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("grid");
    eccaudit()
        .args([
            "inject",
            "--epochs",
            "12",
            "--baseline",
            "100",
            "--uncertainty",
            "3",
            "--period",
            "9.5",
            "--k",
            "20",
            "--e",
            "0,0.3",
            "--trials",
            "3",
            "--no-posterior",
            "--seed",
            "5",
            "--quiet",
            "--out",
        ])
        .arg(&out)
        .assert()
        .success();
    let csv = std::fs::read_to_string(out.join("trials.csv")).unwrap();
    let ecsv = std::fs::read_to_string(out.join("trials.ecsv")).unwrap();
    assert!(ecsv.starts_with("# %ECSV 1.0\n"));
    assert!(ecsv.contains("{name: true_k, unit: m / s, datatype: float64"));
    // Same rows: the CSV's data lines (after its comment lines and header) and the ECSV's
    // (after its header and names line) hold the same numbers in the same columns.
    let csv_rows: Vec<Vec<String>> = csv
        .lines()
        .filter(|l| !l.starts_with('#'))
        .skip(1)
        .map(|l| l.split(',').map(str::to_string).collect())
        .collect();
    let ecsv_rows: Vec<Vec<String>> = ecsv
        .lines()
        .filter(|l| !l.starts_with('#'))
        .skip(1)
        .map(|l| l.split(' ').map(str::to_string).collect())
        .collect();
    assert_eq!(csv_rows.len(), 6);
    assert_eq!(ecsv_rows.len(), csv_rows.len());
    for (c, e) in csv_rows.iter().zip(&ecsv_rows) {
        // trial, cell, true_e, true_k, true_omega, true_mean_anomaly, lsq_status, lsq_point
        assert_eq!(c[..8], e[..8]);
    }
}
