//! `eccaudit priors FILE`: JSON that parses with one run per prior, the text table, SVG figures,
//! and one readable line for a bad prior spec.

use assert_cmd::Command;
use predicates::prelude::*;

const DEMO: &str = concat!(env!("CARGO_MANIFEST_DIR"), "/demo-data");

fn eccaudit() -> Command {
    Command::cargo_bin("eccaudit").expect("the eccaudit binary is built for tests")
}

/// Short runs: these tests check the command, not convergence.
const SHORT: [&str; 6] = ["--steps", "300", "--burn", "200", "--walkers", "24"];

#[test]
fn json_has_one_summary_per_prior() {
    // The demo table's header states e = 0.47 (simulated truth); with 36 epochs the posterior
    // median under every prior lies within 0.1 of it (formal σ_e ≈ 0.02 from `eccaudit fit`).
    let path = format!("{DEMO}/corvin4-eccentric.tsv");
    let output = eccaudit()
        .args([
            "priors",
            &path,
            "--json",
            "--priors",
            "uniform:0..0.99",
            "kipping2013",
        ])
        .args(SHORT)
        .output()
        .unwrap();
    assert!(output.status.success(), "{output:?}");
    let report: serde_json::Value = serde_json::from_slice(&output.stdout).unwrap();
    let runs = report["runs"].as_array().unwrap();
    assert_eq!(runs.len(), 2);
    for run in runs {
        let s = &run["summary"];
        let median = s["median"].as_f64().unwrap();
        assert!((median - 0.47).abs() < 0.1, "median {median}");
        assert_eq!(s["density"]["e"].as_array().unwrap().len(), 201);
        assert!(s["information_gain"]["nats"].is_f64());
        assert!(s["bayes_factor"]["status"].is_string());
        // 4 independent ensembles of 24 walkers, side by side.
        assert_eq!(s["cost"]["n_walkers"], 96);
        assert_eq!(s["cost"]["n_ensembles"], 4);
        assert_eq!(s["converged"], true, "{}", s["verdict"]);
    }
    assert!(report["methods"].as_array().unwrap().len() >= 4);
}

#[test]
fn text_table_and_plots() {
    let path = format!("{DEMO}/velka17-nearly-circular.csv");
    let dir = tempfile::tempdir().unwrap();
    eccaudit()
        .args(["priors", &path, "--priors", "uniform:0..0.5", "ecosw"])
        .args(SHORT)
        .args(["--plots", dir.path().to_str().unwrap()])
        .assert()
        .success()
        .stdout(predicate::str::contains("Prior sensitivity of e"))
        .stdout(predicate::str::contains("uniform on [0, 0.5]"))
        .stdout(predicate::str::contains("BF01"))
        .stdout(predicate::str::contains("Methods:"));
    for name in ["posterior-e.svg", "corner-1.svg", "traces-2.svg"] {
        let svg = std::fs::read_to_string(dir.path().join(name)).unwrap();
        assert!(svg.starts_with("<svg"), "{name}");
    }
}

#[test]
fn bad_prior_spec_is_one_line() {
    let path = format!("{DEMO}/corvin4-eccentric.tsv");
    let output = eccaudit()
        .args(["priors", &path, "--priors", "beta(2)"])
        .output()
        .unwrap();
    assert!(!output.status.success());
    let stderr = String::from_utf8(output.stderr).unwrap();
    assert_eq!(stderr.lines().count(), 1, "{stderr}");
    assert!(stderr.contains("prior spec `beta(2)`: `beta` takes 2 argument(s), 1 given"));
}
