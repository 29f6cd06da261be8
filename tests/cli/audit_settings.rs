//! `eccaudit audit --settings`: a settings file replays an audit exactly, and refuses other data.

use crate::support::{eccaudit, DEMO};
use predicates::prelude::*;

#[test]
fn written_settings_replay_to_identical_results() {
    let dir = tempfile::tempdir().unwrap();
    let table = format!("{DEMO}/corvin4-eccentric.tsv");
    let settings = dir.path().join("settings.json");
    let first = eccaudit()
        .args([
            "audit", &table, "--trials", "6", "--e", "0,0.3", "--seed", "5", "--json", "--quiet",
        ])
        .args(["--out".as_ref(), dir.path().join("a").as_os_str()])
        .args(["--write-settings".as_ref(), settings.as_os_str()])
        .output()
        .unwrap();
    assert!(
        first.status.success(),
        "{}",
        String::from_utf8_lossy(&first.stderr)
    );

    // The replay takes every choice from the file: the flags below would change the
    // result if they were used, and must not be.
    let replay = eccaudit()
        .args([
            "audit", &table, "--trials", "50", "--seed", "99", "--json", "--quiet",
        ])
        .args(["--out".as_ref(), dir.path().join("b").as_os_str()])
        .args(["--settings".as_ref(), settings.as_os_str()])
        .output()
        .unwrap();
    assert!(
        replay.status.success(),
        "{}",
        String::from_utf8_lossy(&replay.stderr)
    );
    assert_eq!(first.stdout, replay.stdout);
    let report: serde_json::Value = serde_json::from_slice(&replay.stdout).unwrap();
    assert_eq!(report["trials_total"], 12);
}

#[test]
fn settings_for_another_table_are_refused_in_one_line() {
    let dir = tempfile::tempdir().unwrap();
    let settings = dir.path().join("settings.json");
    eccaudit()
        .args([
            "audit",
            &format!("{DEMO}/corvin4-eccentric.tsv"),
            "--trials",
            "2",
            "--e",
            "0",
            "--quiet",
        ])
        .args(["--out".as_ref(), dir.path().join("a").as_os_str()])
        .args(["--write-settings".as_ref(), settings.as_os_str()])
        .assert()
        .success();
    let output = eccaudit()
        .args([
            "audit",
            &format!("{DEMO}/velka17-nearly-circular.csv"),
            "--quiet",
        ])
        .args(["--out".as_ref(), dir.path().join("b").as_os_str()])
        .args(["--settings".as_ref(), settings.as_os_str()])
        .output()
        .unwrap();
    assert_eq!(output.status.code(), Some(1));
    let stderr = String::from_utf8(output.stderr).unwrap();
    assert_eq!(stderr.lines().count(), 1, "{stderr}");
    assert!(
        stderr.contains("the settings were made for `corvin4-eccentric.tsv`"),
        "{stderr}"
    );
}

#[test]
fn a_typo_in_a_settings_file_is_named() {
    let dir = tempfile::tempdir().unwrap();
    let settings = dir.path().join("settings.json");
    std::fs::write(
        &settings,
        r#"{"format": "eccaudit-audit-settings", "sed": 3}"#,
    )
    .unwrap();
    eccaudit()
        .args(["audit", &format!("{DEMO}/corvin4-eccentric.tsv"), "--quiet"])
        .args(["--out".as_ref(), dir.path().join("a").as_os_str()])
        .args(["--settings".as_ref(), settings.as_os_str()])
        .assert()
        .code(1)
        .stderr(predicate::str::contains("unknown field `sed`"));
}

/// `--estimator NAME` makes the statement quote that estimator (stored in the replay file and
/// said in the statement's rule); a name that is not one of the audit's estimators is one
/// clear line naming the estimators there are.
#[test]
fn the_user_chooses_the_quoted_estimator() {
    let dir = tempfile::tempdir().unwrap();
    let table = format!("{DEMO}/corvin4-eccentric.tsv");
    let settings = dir.path().join("settings.json");
    let output = eccaudit()
        .args([
            "audit",
            &table,
            "--trials",
            "4",
            "--e",
            "0,0.3",
            "--no-posterior",
            "--estimator",
            "lsq",
            "--max-circular",
            "100",
            "--json",
            "--quiet",
        ])
        .args(["--out".as_ref(), dir.path().join("a").as_os_str()])
        .args(["--write-settings".as_ref(), settings.as_os_str()])
        .output()
        .unwrap();
    assert!(
        output.status.success(),
        "{}",
        String::from_utf8_lossy(&output.stderr)
    );
    let report: serde_json::Value = serde_json::from_slice(&output.stdout).unwrap();
    assert_eq!(report["statement"]["recommended"], "lsq");
    assert_eq!(
        report["statement"]["recommendation_rule"],
        "chosen by the user (lsq)"
    );
    assert_eq!(report["statement"]["max_circular_trials"], 100);
    let saved: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(&settings).unwrap()).unwrap();
    assert_eq!(saved["injection"]["estimator"], "lsq");
    assert_eq!(saved["injection"]["max_circular_trials"], 100);

    eccaudit()
        .args([
            "audit",
            &table,
            "--trials",
            "2",
            "--no-posterior",
            "--estimator",
            "median",
            "--quiet",
        ])
        .args(["--out".as_ref(), dir.path().join("b").as_os_str()])
        .assert()
        .failure()
        .stderr(predicate::str::contains(
            "estimator `median`: not one of this audit's estimators (lsq)",
        ))
        .stderr(predicate::function(|s: &str| s.lines().count() == 1));
}
