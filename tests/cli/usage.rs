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

/// The defaults printed by `--help` are the core's (issue 12: flags default from the core's
/// `Default`, not from restated literals).
#[test]
fn help_defaults_come_from_the_core() {
    use eccaudit_core::inject::LeastSquaresSettings;
    use eccaudit_core::population::PopulationSettings;
    use eccaudit_core::posterior::SensitivityRequest;
    let help = |command: &str| {
        let output = eccaudit().args([command, "--help"]).output().unwrap();
        assert!(output.status.success());
        String::from_utf8(output.stdout).unwrap()
    };
    let has = |text: &str, flag: &str, value: String| {
        // The flag's entry: its line and the description lines up to the next flag.
        let lines: Vec<&str> = text.lines().collect();
        let start = lines
            .iter()
            .position(|l| l.trim_start().starts_with(&format!("{flag} ")))
            .unwrap_or_else(|| panic!("{flag} not in help"));
        let line = lines[start + 1..]
            .iter()
            .take_while(|l| !l.trim_start().starts_with('-'))
            .copied()
            .collect::<Vec<_>>()
            .join(" ");
        assert!(
            line.contains(&format!("[default: {value}]")),
            "{flag}: expected default {value} in {line}"
        );
    };
    let request = SensitivityRequest::default();
    let priors = help("priors");
    has(&priors, "--walkers", request.walkers.to_string());
    has(&priors, "--steps", request.steps.to_string());
    has(&priors, "--burn", request.burn.to_string());
    has(&priors, "--ensembles", request.ensembles.to_string());
    has(
        &priors,
        "--max-evaluations",
        request.max_evaluations.to_string(),
    );
    let lsq = LeastSquaresSettings::default();
    let inject = help("inject");
    let starts: Vec<String> = lsq
        .start_eccentricities
        .iter()
        .map(f64::to_string)
        .collect();
    has(&inject, "--start-e", starts.join(" "));
    has(&inject, "--omega-starts", lsq.n_omega_starts.to_string());
    let population = PopulationSettings::default();
    let text = help("population");
    has(&text, "--bins", population.bins.to_string());
    has(
        &text,
        "--draws-per-star",
        population.max_draws_per_star.to_string(),
    );
}
