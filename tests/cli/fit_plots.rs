//! `eccaudit fit FILE --plots DIR`: the SVG figures exist and hold what they should (curves,
//! false-alarm levels, one phase fold per companion with every epoch drawn twice).

use crate::support::{eccaudit, DEMO};
/// The text lines of the `<text>` elements plotters writes (the content sits on its own line).
fn texts(svg: &str) -> Vec<String> {
    let lines: Vec<&str> = svg.lines().collect();
    lines
        .windows(2)
        .filter(|w| w[0].starts_with("<text"))
        .map(|w| w[1].trim().to_string())
        .collect()
}

/// Filled circles: data points (both panels of a fold) and legend dots.
fn filled_circles(svg: &str) -> usize {
    svg.lines()
        .filter(|l| l.starts_with("<circle") && l.contains("stroke=\"none\""))
        .count()
}

#[test]
fn eccentric_demo_writes_periodogram_and_phase_fold() {
    let dir = tempfile::tempdir().unwrap();
    let plots = dir.path().join("figures");
    let path = format!("{DEMO}/corvin4-eccentric.tsv");
    let output = eccaudit()
        .args(["fit", &path, "--json", "--plots", plots.to_str().unwrap()])
        .output()
        .unwrap();
    assert!(output.status.success(), "{output:?}");
    // stdout stays pure JSON.
    let report: serde_json::Value = serde_json::from_slice(&output.stdout).unwrap();
    let n_points = report["n_points"].as_u64().unwrap() as usize;
    let best = report["period_search"][0]["best_period"].as_f64().unwrap();

    let periodogram = std::fs::read_to_string(plots.join("periodogram.svg")).unwrap();
    let words = texts(&periodogram);
    for wanted in [
        "FAP 10%",
        "FAP 1%",
        "FAP 0.1%",
        "period [d]",
        "normalised power",
        "window",
    ] {
        assert!(words.iter().any(|t| t == wanted), "{wanted:?} in {words:?}");
    }
    // The marked peak is the report's best period, with two decimals.
    let peak = format!("P = {best:.2} d");
    assert!(words.contains(&peak), "{peak} in {words:?}");

    let phase = std::fs::read_to_string(plots.join("phase-c1.svg")).unwrap();
    assert!(!plots.join("phase-c2.svg").exists());
    // Every epoch in the velocity panel and in the residual panel, plus one legend dot for the
    // single instrument.
    assert_eq!(filled_circles(&phase), 2 * n_points + 1);
    let words = texts(&phase);
    assert!(
        words
            .iter()
            .any(|t| t.starts_with("phase (0 = periastron at ")),
        "{words:?}"
    );
    assert!(words.iter().any(|t| t == "residual [m/s]"), "{words:?}");
    assert!(words.iter().any(|t| t == "model"), "{words:?}");
}

#[test]
fn circular_adopted_fold_with_two_instruments_says_where_phase_zero_is() {
    // The nearly circular demo with two instruments: its adopted solution is the circular
    // refit (see fit.rs), so phase 0 is the time of maximum velocity.
    let dir = tempfile::tempdir().unwrap();
    let path = format!("{DEMO}/velka17-nearly-circular.csv");
    eccaudit()
        .args(["fit", &path, "--plots", dir.path().to_str().unwrap()])
        .assert()
        .success();
    let phase = std::fs::read_to_string(dir.path().join("phase-c1.svg")).unwrap();
    let words = texts(&phase);
    assert!(
        words
            .iter()
            .any(|t| t.starts_with("phase (0 = maximum velocity at ")),
        "{words:?}"
    );
    let n_rows = std::fs::read_to_string(&path)
        .unwrap()
        .lines()
        .filter(|l| !l.starts_with('#'))
        .count()
        - 1;
    // Two instruments: two legend dots.
    assert_eq!(filled_circles(&phase), 2 * n_rows + 2);
}
