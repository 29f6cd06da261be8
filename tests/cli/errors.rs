//! How the command line ends: each error says its message once, and a reader that closes the
//! pipe early (`eccaudit table FILE | head -1`) gets a quiet exit with status 0, not a panic.

use std::process::{Command, Stdio};

fn eccaudit() -> Command {
    Command::new(env!("CARGO_BIN_EXE_eccaudit"))
}

/// Runs eccaudit with standard output a pipe whose reading end is closed at once, so every
/// write fails with EPIPE; returns the exit code and standard error.
fn run_with_closed_stdout(args: &[&str]) -> (Option<i32>, String) {
    let mut child = eccaudit()
        .args(args)
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    drop(child.stdout.take());
    let output = child.wait_with_output().unwrap();
    (
        output.status.code(),
        String::from_utf8(output.stderr).unwrap(),
    )
}

#[test]
fn closed_pipe_is_a_quiet_success() {
    // `print!` of the summary: the panic in std's print becomes exit 0.
    let (code, stderr) =
        run_with_closed_stdout(&["table", "demo-data/velka17-nearly-circular.csv"]);
    assert_eq!(code, Some(0), "{stderr}");
    assert!(stderr.is_empty(), "{stderr}");
    let (code, stderr) =
        run_with_closed_stdout(&["table", "demo-data/velka17-nearly-circular.csv", "--json"]);
    assert_eq!(code, Some(0), "{stderr}");
    assert!(stderr.is_empty(), "{stderr}");
    // A writer (`curve` streams CSV, far more than a pipe buffer): the io error becomes exit 0.
    let (code, stderr) = run_with_closed_stdout(&[
        "curve",
        "--period",
        "4.83",
        "--semi-amplitude",
        "18",
        "--tp",
        "0",
        "--start",
        "0",
        "--end",
        "100",
        "--points",
        "200000",
    ]);
    assert_eq!(code, Some(0), "{stderr}");
    assert!(stderr.is_empty(), "{stderr}");
}

#[test]
fn a_closed_pipe_does_not_hide_a_real_error() {
    let (code, stderr) = run_with_closed_stdout(&["table", "no-such-file.csv"]);
    assert_eq!(code, Some(1), "{stderr}");
    assert!(stderr.starts_with("eccaudit: error: "), "{stderr}");
}

#[test]
fn each_error_says_its_message_once() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("grid");
    let mut args = schedule_inject(out.to_str().unwrap());
    args.extend(["--epochs", "30", "--trials", "0"]);
    let (code, stderr) = run(&args);
    assert_eq!(code, Some(1));
    assert_eq!(stderr.lines().count(), 1, "{stderr}");
    assert!(stderr.contains("trials per cell = 0"), "{stderr}");
    assert_eq!(
        stderr.matches("trials per cell").count(),
        1,
        "said more than once: {stderr}"
    );
}

/// `eccaudit inject` on a schedule (365 d, σ = 3 m/s, P = 23.7 d, K = 15 m/s, least squares
/// only) writing into `out`: the options each error test adds its own to.
fn schedule_inject(out: &str) -> Vec<&str> {
    vec![
        "inject",
        "--baseline",
        "365",
        "--uncertainty",
        "3",
        "--period",
        "23.7",
        "--k",
        "15",
        "--no-posterior",
        "--out",
        out,
    ]
}

/// Runs eccaudit and returns its exit code and standard error.
fn run(args: &[&str]) -> (Option<i32>, String) {
    let output = eccaudit().args(args).output().unwrap();
    (
        output.status.code(),
        String::from_utf8(output.stderr).unwrap(),
    )
}

#[test]
fn counts_beyond_the_limits_get_one_line_not_an_allocation_failure() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("grid");
    let out = out.to_str().unwrap();
    let schedule = schedule_inject(out);
    let cases: [(&[&str], &str); 5] = [
        (
            &["--epochs", "30", "--trials", "100000000000"],
            "trials per cell = 100000000000 is more than eccaudit allows (1000000)",
        ),
        (
            &["--epochs", "1000000000", "--trials", "10"],
            "schedule epochs = 1000000000 is more than eccaudit allows (1000000)",
        ),
        (
            &["--epochs", "30", "--trials", "1000000", "--e", "0,0.1,0.2,0.3,0.4,0.5,0.6,0.7,0.8,0.9,0.95"],
            "trials in all (cells × trials per cell) = 11000000 is more than eccaudit allows (10000000)",
        ),
        (
            &["--epochs", "30", "--trials", "2", "--posterior", "uniform", "--posterior-walkers", "100000000"],
            "walkers = 100000000 is more than eccaudit allows (10000)",
        ),
        (
            &["--epochs", "30", "--trials", "2", "--posterior", "uniform", "--posterior-steps", "100000000000"],
            "is more than eccaudit allows (10000000)",
        ),
    ];
    for (extra, expected) in cases {
        let args: Vec<&str> = schedule
            .iter()
            .copied()
            .filter(|arg| !(extra.contains(&"--posterior") && *arg == "--no-posterior"))
            .chain(extra.iter().copied())
            .collect();
        let (code, stderr) = run(&args);
        assert_eq!(code, Some(1), "{args:?}: {stderr}");
        assert_eq!(stderr.lines().count(), 1, "{args:?}: {stderr}");
        assert!(stderr.contains(expected), "{args:?}: {stderr}");
    }
    let (code, stderr) = run(&[
        "fit",
        "demo-data/velka17-nearly-circular.csv",
        "--companions",
        "1000000",
    ]);
    assert_eq!(code, Some(1), "{stderr}");
    assert!(stderr.contains("companions = 1000000: 1 to 3"), "{stderr}");
    let (code, stderr) = run(&[
        "priors",
        "demo-data/velka17-nearly-circular.csv",
        "--walkers",
        "1000000000",
    ]);
    assert_eq!(code, Some(1), "{stderr}");
    assert!(
        stderr.contains("walkers = 1000000000 is more than eccaudit allows (10000)"),
        "{stderr}"
    );
}
