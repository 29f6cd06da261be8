//! Levenberg–Marquardt against the NIST StRD nonlinear-regression certified values.
//!
//! Source of every certified number: NIST Statistical Reference Datasets,
//! Nonlinear Regression (NIST/ITL StRD, 1999; certified values computed by
//! NIST in 128-bit precision and confirmed by two independent codes). The data
//! files in `tests/data/nist/` are NIST's own `.dat` files, byte for byte; see
//! `tests/data/nist/README.md` for where they came from. The certified
//! parameters, their standard deviations and the residual sum of squares are
//! parsed from the headers of those files, so the file is the cited source.
//!
//! Stated tolerances: parameters and residual sum of squares to a relative
//! 1e-6 (6 significant digits, as NIST asks of a "correct" solver); certified
//! standard deviations, `sqrt(RSS/dof · diag((JᵀJ)⁻¹))`, to a relative 1e-4.

use eccaudit_core::lsq::{
    fit_least_squares, DMatrix, FiniteDifference, LeastSquaresProblem, LsqOptions, LsqReport,
};

/// One NIST StRD dataset: data, two starting points, certified values.
struct NistDataset {
    name: &'static str,
    x: Vec<f64>,
    y: Vec<f64>,
    start_1: Vec<f64>,
    start_2: Vec<f64>,
    certified_params: Vec<f64>,
    certified_std_devs: Vec<f64>,
    certified_rss: f64,
    degrees_of_freedom: usize,
}

fn parse_nist(name: &'static str, text: &str) -> NistDataset {
    let mut start_1 = Vec::new();
    let mut start_2 = Vec::new();
    let mut certified_params = Vec::new();
    let mut certified_std_devs = Vec::new();
    let mut certified_rss = f64::NAN;
    let mut n_observations = 0usize;
    let mut certified_residual_sd = f64::NAN;
    let lines: Vec<&str> = text.lines().collect();
    for line in &lines {
        let trimmed = line.trim();
        // Parameter lines: "b1 =   500   250   2.3894212918E+02  2.7070075241E+00"
        if trimmed.starts_with('b') && trimmed.contains('=') {
            let fields: Vec<f64> = trimmed
                .split('=')
                .nth(1)
                .unwrap()
                .split_whitespace()
                .map(|f| f.parse().unwrap())
                .collect();
            assert_eq!(fields.len(), 4, "{name}: {line}");
            start_1.push(fields[0]);
            start_2.push(fields[1]);
            certified_params.push(fields[2]);
            certified_std_devs.push(fields[3]);
        }
        if let Some(rest) = trimmed.strip_prefix("Residual Sum of Squares:") {
            certified_rss = rest.trim().parse().unwrap();
        }
        if let Some(rest) = trimmed.strip_prefix("Number of Observations:") {
            n_observations = rest.trim().parse().unwrap();
        }
        if let Some(rest) = trimmed.strip_prefix("Residual Standard Deviation:") {
            certified_residual_sd = rest.trim().parse().unwrap();
        }
    }
    // Observations follow the last line that starts with "Data:".
    let data_start = lines
        .iter()
        .rposition(|l| l.trim_start().starts_with("Data:"))
        .unwrap()
        + 1;
    let (mut x, mut y) = (Vec::new(), Vec::new());
    for line in &lines[data_start..] {
        let fields: Vec<f64> = line
            .split_whitespace()
            .map(|f| f.parse().unwrap())
            .collect();
        if fields.len() == 2 {
            y.push(fields[0]);
            x.push(fields[1]);
        }
    }
    assert_eq!(x.len(), n_observations, "{name}: observation count");
    // Degrees of freedom = observations − parameters. (NIST's Rat43.dat header
    // states 9 where 15 − 4 = 11; its certified residual standard deviation
    // 2.8262414662E+01 = sqrt(RSS/11) confirms 11, checked here for every file.)
    let degrees_of_freedom = n_observations - certified_params.len();
    let implied_sd = (certified_rss / degrees_of_freedom as f64).sqrt();
    assert!(
        ((implied_sd - certified_residual_sd) / certified_residual_sd).abs() < 1e-9,
        "{name}: dof"
    );
    NistDataset {
        name,
        x,
        y,
        start_1,
        start_2,
        certified_params,
        certified_std_devs,
        certified_rss,
        degrees_of_freedom,
    }
}

/// Model value and gradient `∂f/∂b` at one predictor value.
type ModelFn = fn(b: &[f64], x: f64, gradient: &mut [f64]) -> f64;

/// Unweighted residuals `y − f(x; b)` of a NIST model, with the analytic
/// Jacobian `−∂f/∂b` unless `analytic` is false.
struct NistProblem<'a> {
    data: &'a NistDataset,
    model: ModelFn,
    analytic: bool,
}

impl LeastSquaresProblem for NistProblem<'_> {
    fn n_params(&self) -> usize {
        self.data.certified_params.len()
    }
    fn n_residuals(&self) -> usize {
        self.data.x.len()
    }
    fn residuals(&self, params: &[f64], out: &mut [f64]) {
        let mut gradient = [0.0; 8];
        for (i, (&x, &y)) in self.data.x.iter().zip(&self.data.y).enumerate() {
            out[i] = y - (self.model)(params, x, &mut gradient[..params.len()]);
        }
    }
    fn jacobian(&self, params: &[f64], out: &mut DMatrix<f64>) -> bool {
        if !self.analytic {
            return false;
        }
        let mut gradient = [0.0; 8];
        for (i, &x) in self.data.x.iter().enumerate() {
            (self.model)(params, x, &mut gradient[..params.len()]);
            for j in 0..params.len() {
                out[(i, j)] = -gradient[j];
            }
        }
        true
    }
}

/// Misra1a and BoxBOD: y = b1·(1 − exp(−b2·x)) (NIST StRD model files).
fn exponential_rise(b: &[f64], x: f64, g: &mut [f64]) -> f64 {
    let e = (-b[1] * x).exp();
    g[0] = 1.0 - e;
    g[1] = b[0] * x * e;
    b[0] * (1.0 - e)
}

/// MGH10: y = b1·exp(b2/(x + b3)) (NIST StRD; Meyer 1970).
fn meyer(b: &[f64], x: f64, g: &mut [f64]) -> f64 {
    let e = (b[1] / (x + b[2])).exp();
    g[0] = e;
    g[1] = b[0] * e / (x + b[2]);
    g[2] = -b[0] * e * b[1] / ((x + b[2]) * (x + b[2]));
    b[0] * e
}

/// Thurber: y = (b1 + b2 x + b3 x² + b4 x³)/(1 + b5 x + b6 x² + b7 x³) (NIST StRD).
fn thurber(b: &[f64], x: f64, g: &mut [f64]) -> f64 {
    let (x2, x3) = (x * x, x * x * x);
    let numerator = b[0] + b[1] * x + b[2] * x2 + b[3] * x3;
    let denominator = 1.0 + b[4] * x + b[5] * x2 + b[6] * x3;
    let f = numerator / denominator;
    g[0] = 1.0 / denominator;
    g[1] = x / denominator;
    g[2] = x2 / denominator;
    g[3] = x3 / denominator;
    g[4] = -f * x / denominator;
    g[5] = -f * x2 / denominator;
    g[6] = -f * x3 / denominator;
    f
}

/// Rat43: y = b1 / (1 + exp(b2 − b3 x))^(1/b4) (NIST StRD; Ratkowsky 1983).
fn rat43(b: &[f64], x: f64, g: &mut [f64]) -> f64 {
    let e = (b[1] - b[2] * x).exp();
    let base = 1.0 + e;
    let f = b[0] * base.powf(-1.0 / b[3]);
    g[0] = f / b[0];
    g[1] = -f * e / (b[3] * base);
    g[2] = f * e * x / (b[3] * base);
    g[3] = f * base.ln() / (b[3] * b[3]);
    f
}

/// Eckerle4: y = (b1/b2)·exp(−½((x − b3)/b2)²) (NIST StRD).
fn eckerle4(b: &[f64], x: f64, g: &mut [f64]) -> f64 {
    let z = (x - b[2]) / b[1];
    let e = (-0.5 * z * z).exp();
    let f = b[0] / b[1] * e;
    g[0] = e / b[1];
    g[1] = f * (z * z - 1.0) / b[1];
    g[2] = f * z / b[1];
    f
}

fn dataset(name: &'static str) -> NistDataset {
    let text = match name {
        "Misra1a" => include_str!("../data/nist/Misra1a.dat"),
        "Thurber" => include_str!("../data/nist/Thurber.dat"),
        "MGH10" => include_str!("../data/nist/MGH10.dat"),
        "BoxBOD" => include_str!("../data/nist/BoxBOD.dat"),
        "Rat43" => include_str!("../data/nist/Rat43.dat"),
        "Eckerle4" => include_str!("../data/nist/Eckerle4.dat"),
        other => panic!("no dataset {other}"),
    };
    parse_nist(name, text)
}

fn fit(
    data: &NistDataset,
    model: ModelFn,
    start: &[f64],
    analytic: bool,
    rule: FiniteDifference,
) -> LsqReport {
    let problem = NistProblem {
        data,
        model,
        analytic,
    };
    let options = LsqOptions {
        finite_difference: rule,
        max_evaluations: 5000,
        ..LsqOptions::default()
    };
    fit_least_squares(&problem, start, None, &options).unwrap()
}

/// Checks a fit against the certified values (tolerances in the file header).
fn assert_certified(data: &NistDataset, report: &LsqReport, label: &str) {
    let context = format!("{} {label}: {report:?}", data.name);
    assert!(
        report.converged() || report.termination.at_machine_precision(),
        "{context}"
    );
    for (j, (&got, &certified)) in report.params.iter().zip(&data.certified_params).enumerate() {
        let relative = ((got - certified) / certified).abs();
        assert!(
            relative <= 1e-6,
            "b{}: {got} vs certified {certified} (rel {relative:.2e}); {context}",
            j + 1
        );
    }
    let rss_relative = ((report.chi_squared - data.certified_rss) / data.certified_rss).abs();
    assert!(
        rss_relative <= 1e-6,
        "RSS {} vs {} ({rss_relative:.2e}); {context}",
        report.chi_squared,
        data.certified_rss
    );
    assert_eq!(report.dof, data.degrees_of_freedom);
    // Unweighted data: NIST's standard deviation is sqrt(RSS/dof · (JᵀJ)⁻¹_jj),
    // i.e. our formal error (σ = 1) times sqrt(reduced χ²).
    let formal = report
        .formal_errors
        .as_ref()
        .expect("covariance at a certified optimum");
    let scale = report.reduced_chi_squared.unwrap().sqrt();
    for (j, (&sigma, &certified)) in formal.iter().zip(&data.certified_std_devs).enumerate() {
        let relative = ((sigma * scale - certified) / certified).abs();
        assert!(
            relative <= 1e-4,
            "sd(b{}): {} vs certified {certified}; {context}",
            j + 1,
            sigma * scale
        );
    }
}

/// Fits NIST dataset `name` with `model`'s analytic Jacobian from both certified starts and
/// checks each fit against the certified values.
fn assert_certified_from_both_starts(name: &'static str, model: ModelFn) {
    let data = dataset(name);
    for (label, start) in [("start 1", &data.start_1), ("start 2", &data.start_2)] {
        let report = fit(&data, model, start, true, FiniteDifference::Central);
        assert_certified(&data, &report, label);
    }
}

// NIST StRD Misra1a (lower difficulty; Misra 1978). Certified b1 = 2.3894212918E+02,
// b2 = 5.5015643181E-04, RSS = 1.2455138894E-01 (read from Misra1a.dat).
#[test]
fn misra1a_start_1_and_2() {
    assert_certified_from_both_starts("Misra1a", exponential_rise);
}

// Same, with a finite-difference Jacobian (forward and central).
#[test]
fn misra1a_finite_difference_jacobian() {
    let data = dataset("Misra1a");
    for rule in [FiniteDifference::Forward, FiniteDifference::Central] {
        let report = fit(&data, exponential_rise, &data.start_1, false, rule);
        assert_certified(&data, &report, &format!("start 1, {rule:?}"));
        assert!(report.n_finite_difference_evals > 0);
    }
}

// NIST StRD Thurber (higher difficulty). Certified b1 = 1.2881396800E+03 … b7 =
// 4.9727297349E-02, RSS = 5.6427082397E+03 (read from Thurber.dat).
#[test]
fn thurber_start_1_and_2() {
    assert_certified_from_both_starts("Thurber", thurber);
}

// NIST StRD MGH10 (higher difficulty; Meyer 1970). Certified b1 = 5.6096364710E-03,
// b2 = 6.1813463463E+03, b3 = 3.4522363462E+02, RSS = 8.7945855171E+01.
#[test]
fn mgh10_start_1_and_2() {
    assert_certified_from_both_starts("MGH10", meyer);
}

// NIST StRD BoxBOD (higher difficulty; Box, Hunter & Hunter 1978, pp. 483-487).
// Certified b1 = 2.1380940889E+02, b2 = 5.4723748542E-01, RSS = 1.1680088766E+03.
#[test]
fn boxbod_start_1_and_2() {
    assert_certified_from_both_starts("BoxBOD", exponential_rise);
}

// NIST StRD Rat43 (higher difficulty; Ratkowsky 1983, pp. 62 and 88). Certified
// b1 = 6.9964151270E+02 … b4 = 1.2792483859E+00, RSS = 8.7864049080E+03.
#[test]
fn rat43_start_1_and_2() {
    assert_certified_from_both_starts("Rat43", rat43);
}

// NIST StRD Eckerle4 (higher difficulty). Certified b1 = 1.5543827178E+00,
// b2 = 4.0888321754E+00, b3 = 4.5154121844E+02, RSS = 1.4635887487E-03.
#[test]
fn eckerle4_start_1_and_2() {
    assert_certified_from_both_starts("Eckerle4", eckerle4);
}
