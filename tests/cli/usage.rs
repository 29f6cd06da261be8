//! Command-line usage mistakes: one readable line on standard error, exit status 2.

use crate::support::eccaudit;

fn check_one_line_usage_error(args: &[&str], expected: &str) {
    let output = eccaudit().args(args).output().unwrap();
    assert_eq!(output.status.code(), Some(2), "{args:?}");
    assert!(output.stdout.is_empty());
    let stderr = String::from_utf8(output.stderr).unwrap();
    assert_eq!(stderr.lines().count(), 1, "one line for {args:?}: {stderr}");
    assert!(stderr.starts_with("eccaudit: error: "), "{stderr}");
    assert!(stderr.contains(expected), "{args:?}: {stderr}");
}

#[test]
fn usage_errors_are_one_line() {
    check_one_line_usage_error(&["frobnicate"], "unrecognized subcommand 'frobnicate'");
    check_one_line_usage_error(&["table"], "required arguments were not provided: <FILE>");
    check_one_line_usage_error(&["curve", "--period", "3"], "--start <START> --end <END>");
    check_one_line_usage_error(
        &["curve", "--period", "x", "--start", "0", "--end", "1"],
        "invalid value 'x'",
    );
    check_one_line_usage_error(
        &["table", "t.csv", "--velocity-unit", "furlongs"],
        "furlongs",
    );
}

#[test]
fn help_and_version_still_print_normally() {
    let help = eccaudit().arg("--help").output().unwrap();
    assert!(help.status.success());
    assert!(String::from_utf8(help.stdout)
        .unwrap()
        .contains("Usage: eccaudit"));
    let version = eccaudit().arg("--version").output().unwrap();
    assert!(version.status.success());
    assert!(String::from_utf8(version.stdout)
        .unwrap()
        .starts_with("eccaudit 0."));
}
