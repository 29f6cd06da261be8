//! `eccaudit inject` and `eccaudit audit`: identical results whatever the thread count, an
//! interrupted run resumed to the same result, settings checked on resume, and the outputs.

use crate::support::{eccaudit, DEMO};
use predicates::prelude::*;
use std::path::Path;

/// A small schedule run: 2 eccentricities × 6 trials.
fn inject_args(out: &Path) -> Vec<String> {
    [
        "inject",
        "--epochs",
        "18",
        "--baseline",
        "120",
        "--uncertainty",
        "2.5",
        "--period",
        "7.3",
        "--k",
        "20",
        "--e",
        "0,0.3",
        "--trials",
        "6",
        "--seed",
        "42",
        "--out",
    ]
    .iter()
    .map(|s| s.to_string())
    .chain([out.display().to_string()])
    .collect()
}

fn read(path: &Path) -> String {
    std::fs::read_to_string(path).unwrap()
}

#[test]
fn one_thread_and_all_threads_give_identical_files() {
    let dir = tempfile::tempdir().unwrap();
    let (one, all) = (dir.path().join("one"), dir.path().join("all"));
    eccaudit()
        .args(inject_args(&one))
        .args(["--threads", "1"])
        .assert()
        .success();
    // Default pool (all cores), and an explicit 4 threads on top of it via RAYON_NUM_THREADS.
    eccaudit()
        .args(inject_args(&all))
        .env("RAYON_NUM_THREADS", "4")
        .assert()
        .success()
        .stdout(predicate::str::contains("lucy_sweeney"));
    let csv = read(&one.join("trials.csv"));
    assert_eq!(csv, read(&all.join("trials.csv")));
    assert_eq!(
        read(&one.join("summary.json")),
        read(&all.join("summary.json"))
    );
    // Magic line, header, 12 rows in trial order.
    let lines: Vec<&str> = csv.lines().collect();
    assert!(lines[0].starts_with("# eccaudit inject fingerprint="));
    assert_eq!(lines.len(), 2 + 12);
    let trials: Vec<u64> = lines[2..]
        .iter()
        .map(|l| l.split(',').next().unwrap().parse().unwrap())
        .collect();
    assert_eq!(trials, (0..12).collect::<Vec<u64>>());
    for figure in ["bias.svg", "distributions.svg"] {
        assert!(read(&one.join(figure)).starts_with("<svg"), "{figure}");
    }
}

#[test]
fn an_interrupted_run_resumes_to_the_same_result() {
    let dir = tempfile::tempdir().unwrap();
    let (whole, parts, cut) = (
        dir.path().join("whole"),
        dir.path().join("parts"),
        dir.path().join("cut"),
    );
    eccaudit().args(inject_args(&whole)).assert().success();

    // Stopped after 5 trials, then resumed.
    eccaudit()
        .args(inject_args(&parts))
        .args(["--stop-after", "5"])
        .assert()
        .success()
        .stderr(predicate::str::contains("5 of 12 trials done"));
    assert_eq!(read(&parts.join("trials.csv")).lines().count(), 2 + 5);
    eccaudit()
        .args(inject_args(&parts))
        .assert()
        .failure()
        .stderr(predicate::str::contains("--resume"));
    eccaudit()
        .args(inject_args(&parts))
        .arg("--resume")
        .assert()
        .success();
    assert_eq!(
        read(&parts.join("trials.csv")),
        read(&whole.join("trials.csv"))
    );
    assert_eq!(
        read(&parts.join("summary.json")),
        read(&whole.join("summary.json"))
    );

    // Killed mid-write: the file ends in the middle of a row.
    std::fs::create_dir_all(&cut).unwrap();
    let full = read(&whole.join("trials.csv"));
    let keep = full.len() * 3 / 5;
    std::fs::write(cut.join("trials.csv"), &full[..keep]).unwrap();
    eccaudit()
        .args(inject_args(&cut))
        .arg("--resume")
        .assert()
        .success();
    assert_eq!(read(&cut.join("trials.csv")), full);
    assert_eq!(
        read(&cut.join("summary.json")),
        read(&whole.join("summary.json"))
    );
}

#[test]
fn resume_refuses_other_settings() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("run");
    eccaudit()
        .args(inject_args(&out))
        .args(["--stop-after", "2"])
        .assert()
        .success();
    let mut other = inject_args(&out);
    let seed = other.iter().position(|a| a == "42").unwrap();
    other[seed] = "43".into();
    eccaudit()
        .args(other)
        .arg("--resume")
        .assert()
        .failure()
        .stderr(
            predicate::str::contains("other settings").and(predicate::str::contains("fingerprint")),
        );
}

#[test]
fn audit_writes_the_statement() {
    // The nearly circular demo table (truth e = 0.03, stated in its header): the formal
    // Lucy–Sweeney test (AJ 76, 544) does not exclude a circular orbit there (see fit.rs).
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("audit");
    let path = format!("{DEMO}/velka17-nearly-circular.csv");
    eccaudit()
        .args(["audit", &path, "--trials", "8", "--e", "0,0.1,0.2", "--out"])
        .arg(&out)
        .assert()
        .success()
        .stdout(predicate::str::contains("Eccentricity statement"))
        .stdout(predicate::str::contains(
            "circular orbit is not excluded at the 5% level",
        ))
        .stdout(predicate::str::contains("Methods:"));
    let statement: serde_json::Value =
        serde_json::from_str(&read(&out.join("statement.json"))).unwrap();
    assert_eq!(statement["decision"]["circular_excluded"], false);
    // Least squares, Lucy–Sweeney, and the default posterior (uniform prior) three ways.
    let names: Vec<&str> = statement["rows"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| c["name"].as_str().unwrap())
        .collect();
    assert_eq!(
        names,
        [
            "lsq",
            "lucy_sweeney",
            "posterior_uniform_median",
            "posterior_uniform_mean",
            "posterior_uniform_mode"
        ]
    );
    assert!(out.join("bias.svg").exists() && out.join("trials.csv").exists());
}

/// An adaptive audit stopped part-way (`--stop-after`) and resumed gives the same trials and
/// the same statement as one uninterrupted run.
#[test]
fn adaptive_audit_resumes_to_the_same_result() {
    let dir = tempfile::tempdir().unwrap();
    let path = format!("{DEMO}/velka17-nearly-circular.csv");
    let common = [
        "audit",
        path.as_str(),
        "--trials",
        "10",
        "--e",
        "0,0.1,0.2,0.3",
        "--no-posterior",
        "--seed",
        "4",
        "--quiet",
        "--threads",
        "2",
    ];
    let whole = dir.path().join("whole");
    eccaudit()
        .args(common)
        .arg("--out")
        .arg(&whole)
        .assert()
        .success();
    let parts = dir.path().join("parts");
    // 40 base trials, then part of the first extra batch.
    eccaudit()
        .args(common)
        .args(["--stop-after", "150", "--out"])
        .arg(&parts)
        .assert()
        .success()
        .stderr(predicate::str::contains("run again with --resume"));
    eccaudit()
        .args(common)
        .args(["--resume", "--out"])
        .arg(&parts)
        .assert()
        .success();
    let a = read(&whole.join("trials.csv"));
    assert!(a.lines().count() > 2 + 40, "extra trials were run");
    assert_eq!(a, read(&parts.join("trials.csv")));
    assert_eq!(
        read(&whole.join("statement.json")),
        read(&parts.join("statement.json"))
    );
}

#[test]
fn schedule_needs_its_settings() {
    eccaudit()
        .args([
            "inject",
            "--epochs",
            "10",
            "--baseline",
            "50",
            "--out",
            "/nonexistent/x",
        ])
        .assert()
        .failure()
        .stderr(predicate::str::contains("--uncertainty"));
}
