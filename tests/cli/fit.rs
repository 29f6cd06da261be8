//! `eccaudit fit FILE`: text table and JSON on the demo tables, and one-line errors for the bad
//! cases (too few points, no significant period, degenerate sampling, bad options).

use crate::support::{eccaudit, temp_table, DEMO};
use predicates::prelude::*;

#[test]
fn eccentric_demo_as_text() {
    // The demo table's header states the truth it was simulated from: P = 112.6 d,
    // e = 0.47, ω = 214° (= −146°); the fit must land within a few formal σ of it.
    let path = format!("{DEMO}/corvin4-eccentric.tsv");
    eccaudit()
        .args(["fit", &path, "--stellar-mass", "1.0"])
        .assert()
        .success()
        .stdout(predicate::str::contains(
            "Eccentric solution (minimum chi2)",
        ))
        .stdout(predicate::str::is_match(r"P\s+\[d\]\s+112\.\d+ ± 0\.\d+").unwrap())
        .stdout(predicate::str::contains("eccentricity significant"))
        .stdout(predicate::str::contains("m sin i"))
        .stdout(predicate::str::contains("Adopted: eccentric solution"));
}

#[test]
fn nearly_circular_demo_as_json_adopts_circular() {
    // Truth e = 0.03 (header of the demo table): with these errors the Lucy–Sweeney test
    // (AJ 76, 544) cannot call it significant, so the circular refit is adopted.
    let path = format!("{DEMO}/velka17-nearly-circular.csv");
    let output = eccaudit()
        .args(["fit", &path, "--json", "--jitter", "fit"])
        .output()
        .unwrap();
    assert!(output.status.success(), "{output:?}");
    let report: serde_json::Value = serde_json::from_slice(&output.stdout).unwrap();
    assert_eq!(report["adopted"], "circular");
    let ecc = &report["eccentric"]["companions"][0];
    let p = ecc["period"]["value"].as_f64().unwrap();
    let sp = ecc["period"]["error"].as_f64().unwrap();
    assert!((p - 4.8372).abs() < 3.0 * sp, "P = {p} ± {sp}");
    let ls = &ecc["lucy_sweeney"];
    assert!(ls["probability"].as_f64().unwrap() > 0.05);
    assert_eq!(ls["significant"], false);
    let instruments = report["circular"]["instruments"].as_array().unwrap();
    assert_eq!(instruments.len(), 2);
    assert!(instruments.iter().all(|i| i["jitter"].as_f64().is_some()));
    assert!(report["n_reached_best"].as_u64().unwrap() >= 1);
    assert!(report["eccentric"]["covariance"].is_array());
    // The model's checks sit beside the fit report.
    assert_eq!(report["jitter"]["mode"], "fit");
    assert_eq!(report["jitter"]["method"], "modified_likelihood");
    assert!(report["goodness"]["p_value"].as_f64().is_some());
    assert!(report["eccentric"]["chi_squared_p"].as_f64().is_some());
}

#[test]
fn too_few_points_is_one_clear_line() {
    let file = temp_table(
        "bjd,rv [m/s],err [m/s]\n1.0,3.0,1.0\n2.3,5.0,1.0\n3.1,-2.0,1.0\n4.7,1.0,1.0\n5.2,0.0,1.0\n6.9,4.0,1.0\n",
    );
    eccaudit()
        .args(["fit", file.path().to_str().unwrap()])
        .assert()
        .failure()
        .stderr(predicate::str::contains(
            "too few points: 6 epochs for 6 parameters",
        ))
        .stderr(predicate::str::contains("at least 7 epochs are needed"));
}

#[test]
fn pure_noise_is_fitted_as_a_marginal_detection() {
    // Deterministic pseudo-noise (no periodic signal); the best peak's false-alarm probability
    // is far above 1 %: the fit goes ahead and its first line says the detection is marginal.
    let mut text = String::from("bjd,rv [m/s],err [m/s]\n");
    for i in 0..30 {
        let t = 3.1 * i as f64 + 1.3 * (0.77 * (i * i) as f64).sin();
        let v = 2.0 * ((i * 7919 % 101) as f64 / 101.0 - 0.5);
        text.push_str(&format!("{t},{v},1.0\n"));
    }
    let file = temp_table(&text);
    let output = eccaudit()
        .args(["fit", file.path().to_str().unwrap()])
        .output()
        .unwrap();
    assert!(output.status.success(), "{output:?}");
    let stdout = String::from_utf8(output.stdout).unwrap();
    assert!(
        stdout.starts_with("NOTE: marginal detection: companion 1"),
        "{stdout}"
    );
    assert!(
        stdout.contains("above the limit 0.01 (--max-fap)"),
        "{stdout}"
    );
}

#[test]
fn all_epochs_at_one_phase_is_degenerate() {
    // Epochs at whole days and a starting period of 1 d: every epoch at the same phase.
    let mut text = String::from("bjd,rv [m/s],err [m/s]\n");
    for i in 0..20 {
        text.push_str(&format!("{}.0,{},1.0\n", 100 + 3 * i, (i % 5) as f64));
    }
    let file = temp_table(&text);
    eccaudit()
        .args(["fit", file.path().to_str().unwrap(), "--period", "1.0"])
        .assert()
        .failure()
        .stderr(predicate::str::contains(
            "degenerate sampling for companion 1",
        ))
        .stderr(predicate::str::contains("only 1 distinct phase"));
}

#[test]
fn bad_options_are_refused() {
    let path = format!("{DEMO}/corvin4-eccentric.tsv");
    eccaudit()
        .args(["fit", &path, "--companions", "0"])
        .assert()
        .failure()
        .stderr(predicate::str::contains("companions = 0: 1 to 3"));
    eccaudit()
        .args(["fit", &path, "--companions", "4"])
        .assert()
        .failure()
        .stderr(predicate::str::contains("companions = 4: 1 to 3"));
    eccaudit()
        .args(["fit", &path, "--jitter", "sometimes"])
        .assert()
        .failure()
        .stderr(predicate::str::contains("one of auto, fit, off"));
    eccaudit()
        .args(["fit", &path, "--min-period", "50", "--max-period", "10"])
        .assert()
        .failure()
        .stderr(predicate::str::contains(
            "max_period = 10: must be above min_period = 50",
        ));
}
