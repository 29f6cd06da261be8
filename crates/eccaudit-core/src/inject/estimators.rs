//! Eccentricity estimators compared on every trial: the [`Estimator`] trait that any estimator
//! (least squares now, posterior summaries under a prior later) implements, and the
//! least-squares estimator with its Lucy–Sweeney decision.

use serde::Serialize;
use thiserror::Error;

use super::design::InjectionDesign;
use crate::fit::{fit_orbit, CompanionFit, FitData, FitError, FitOptions, LUCY_SWEENEY_THRESHOLD};
use crate::random::SimRng;

/// z of the two-sided 95% normal interval (common practice).
pub const Z95: f64 = 1.959_963_984_540_054;

/// What one estimator says about one data set.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct EccentricityEstimate {
    /// Point estimate of e.
    pub point: f64,
    /// Lower end of the 68% interval.
    pub lower68: f64,
    /// Upper end of the 68% interval.
    pub upper68: f64,
    /// Lower end of the 95% interval.
    pub lower95: f64,
    /// Upper end of the 95% interval.
    pub upper95: f64,
    /// The estimator's decision at the 5% level: `Some(true)` when it calls the orbit
    /// eccentric, `None` when it makes no such decision.
    pub calls_eccentric: Option<bool>,
    /// Further numbers, named by [`OutputInfo::extra_names`] in the same order.
    pub extra: Vec<f64>,
}

/// Description of one output of an estimator (one estimator may give several, e.g. the
/// posterior median, mean and mode from one sampler run).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct OutputInfo {
    /// Short name, used as a CSV column prefix: lowercase letters, digits and `_`.
    pub name: String,
    /// What the estimate is, in words.
    pub label: String,
    /// Prior on e ("none" for least squares).
    pub prior: String,
    /// How the intervals are made and truncated.
    pub intervals: String,
    /// When it calls an orbit eccentric (empty when it never decides).
    pub eccentric_call: String,
    /// Names of [`EccentricityEstimate::extra`].
    pub extra_names: Vec<String>,
}

/// Why an estimator could not produce an estimate for one data set.
#[derive(Debug, Clone, PartialEq, Error)]
pub enum EstimatorError {
    /// The least-squares fit failed.
    #[error("least-squares fit failed: {0}")]
    Fit(FitError),
    /// Any other failure (for estimators added later), in words.
    #[error("{0}")]
    Other(String),
}

/// Name of the extra output that records whether a trial's posterior run met its own
/// convergence rule (1) or not (0).
pub const CONVERGED_EXTRA: &str = "converged";

impl OutputInfo {
    /// Index into [`EccentricityEstimate::extra`] of the convergence flag
    /// ([`CONVERGED_EXTRA`]), for outputs of a run that has a convergence rule.
    pub fn converged_index(&self) -> Option<usize> {
        self.extra_names.iter().position(|n| n == CONVERGED_EXTRA)
    }
}

// The message above already prints the inner error, so it is not also reported as `source()`
// (which would make a printed chain say it twice).
impl From<FitError> for EstimatorError {
    fn from(err: FitError) -> Self {
        Self::Fit(err)
    }
}

/// An eccentricity estimator that the injection–recovery engine runs on every simulated data
/// set (and on the real data for the statement).
///
/// Implementations must be deterministic given `rng`: all their randomness must come from it,
/// so that a trial's result depends only on the master seed and its index.
pub trait Estimator: Send + Sync {
    /// Short name of the estimator (e.g. `lsq`).
    fn name(&self) -> &str;
    /// The outputs it produces, in the order [`Estimator::estimate`] returns them.
    fn outputs(&self) -> Vec<OutputInfo>;
    /// Every setting in a stable text, for the settings fingerprint of a run.
    fn settings_text(&self) -> String;
    /// Its cost per data set in words (starts, sampler steps, …).
    fn cost(&self) -> String;
    /// Estimates from one data set. `design.period` is the period to start from (the injected
    /// one in a trial, the fitted one for the real data).
    fn estimate(
        &self,
        data: &FitData,
        design: &InjectionDesign,
        rng: &mut SimRng,
    ) -> Result<Vec<EccentricityEstimate>, EstimatorError>;
}

/// How the least-squares estimator finds the period of each data set.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum TrialPeriod {
    /// Start at the design's period (the injected one) with no periodogram; the period is still
    /// fitted. Much faster; assumes the period is known well, as it is once it has been found.
    StartAtKnown,
    /// Search the periodogram as for real data (periods from 1 d to the baseline), then fit.
    Search,
}

/// Settings of [`LeastSquaresEstimator`].
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct LeastSquaresSettings {
    /// Where the period comes from.
    pub period: TrialPeriod,
    /// Starting eccentricities; each e ≥ 0.1 is tried at `n_omega_starts` values of ω.
    pub start_eccentricities: Vec<f64>,
    /// Starting ω values per starting e (≥ 0.1).
    pub n_omega_starts: usize,
    /// Periodogram peaks tried (with [`TrialPeriod::Search`]).
    pub n_peaks: usize,
    /// Also report the Lucy–Sweeney decision as a second output.
    pub lucy_sweeney: bool,
}

impl Default for LeastSquaresSettings {
    /// Eight starts: e ∈ {0.1, 0.4} × four ω, starting at the known period, with the
    /// Lucy–Sweeney output.
    fn default() -> Self {
        Self {
            period: TrialPeriod::StartAtKnown,
            start_eccentricities: vec![0.1, 0.4],
            n_omega_starts: 4,
            n_peaks: 1,
            lucy_sweeney: true,
        }
    }
}

impl LeastSquaresSettings {
    /// Number of (e, ω) starts per candidate period.
    pub fn n_starts(&self) -> usize {
        self.start_eccentricities
            .iter()
            .map(|&e| if e < 0.1 { 1 } else { self.n_omega_starts })
            .sum()
    }
}

/// The least-squares (minimum χ²) estimator: the multi-start Levenberg–Marquardt fit of
/// [`fit_orbit`] with the model of the design's [`super::TrialModel`] — the companions, one
/// offset per instrument, the trend and the jitters (Baluev 2009 modified likelihood) of the
/// fit to the real data; by default one companion, no trend, no fitted jitter. The weights are
/// the stated uncertainties with the design's known extra noise in quadrature. The audited
/// companion is the one at the audited index when starting at the known periods (the real
/// fit's order is kept), else the refitted one whose period is nearest (in ln P) the design's.
///
/// Output `lsq`: ê of the eccentric solution, with the formal intervals ê ± σ_e (68%) and
/// ê ± 1.96 σ_e (95%) clipped to [0, 1), σ_e from the covariance by the delta method; it calls
/// the orbit eccentric when the 95% interval excludes 0 (ê > 1.96 σ_e).
///
/// Output `lucy_sweeney` (optional): the eccentricity adopted by the test of Lucy & Sweeney
/// (1971, AJ 76, 544) in the 2-D Wald form — ê when p = exp(−½ zᵀΣ⁻¹z) ≤ 0.05, else 0, with
/// z = (e cos ω, e sin ω) and Σ its covariance from the fit
/// ([`crate::fit::lucy_sweeney_wald`]) — with the same formal intervals; it calls the orbit
/// eccentric when p ≤ 0.05.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct LeastSquaresEstimator {
    /// Its settings.
    pub settings: LeastSquaresSettings,
}

impl LeastSquaresEstimator {
    /// The fit options used for a data set whose period is expected near `period` (one
    /// companion, no trend, no jitter).
    pub fn fit_options(&self, period: f64) -> FitOptions {
        self.options(vec![period], false, false)
    }

    /// The fit options of a data set of `design`: the model of [`InjectionDesign::model`],
    /// starting at [`InjectionDesign::refit_periods`] (or searching the periodogram for each
    /// companion with [`TrialPeriod::Search`]).
    pub fn fit_options_for(&self, design: &InjectionDesign) -> FitOptions {
        self.options(
            design.refit_periods(),
            design.model.trend,
            design.model.fit_jitter,
        )
    }

    fn options(&self, periods: Vec<f64>, trend: bool, jitter: bool) -> FitOptions {
        let s = &self.settings;
        FitOptions {
            n_companions: periods.len().max(1),
            trend,
            jitter,
            initial_periods: match s.period {
                TrialPeriod::StartAtKnown => periods,
                TrialPeriod::Search => Vec::new(),
            },
            n_peaks: s.n_peaks.max(1),
            start_eccentricities: s.start_eccentricities.clone(),
            n_omega_starts: s.n_omega_starts.max(1),
            // The injected signal is not in question: never stop at the period search.
            max_false_alarm_probability: 1.0,
            // Keep the eccentric solution only; the decision is made here.
            lucy_sweeney_threshold: 1.0,
            ..FitOptions::default()
        }
    }
}

/// Formal interval `point ± z σ` clipped to [0, 1).
fn clipped(point: f64, sigma: f64, z: f64) -> (f64, f64) {
    ((point - z * sigma).max(0.0), (point + z * sigma).min(1.0))
}

impl Estimator for LeastSquaresEstimator {
    fn name(&self) -> &str {
        "lsq"
    }

    fn outputs(&self) -> Vec<OutputInfo> {
        let intervals = "formal intervals ê ± σ_e (68%) and ê ± 1.96 σ_e (95%) from the \
                         covariance, truncated at e = 0";
        let mut outputs = vec![OutputInfo {
            name: "lsq".into(),
            label: "least-squares estimate (minimum chi-squared)".into(),
            prior: "none".into(),
            intervals: intervals.into(),
            eccentric_call: "the formal 95% interval excludes 0 (ê > 1.96 σ_e)".into(),
            extra_names: vec![
                "sigma_e".into(),
                "chi_squared".into(),
                "period".into(),
                "semi_amplitude".into(),
            ],
        }];
        if self.settings.lucy_sweeney {
            outputs.push(OutputInfo {
                name: "lucy_sweeney".into(),
                label: "Lucy-Sweeney adopted value (the least-squares e if p <= 0.05, else 0)"
                    .into(),
                prior: "none".into(),
                intervals: intervals.into(),
                eccentric_call: "Lucy & Sweeney (1971) p = exp(-W/2) <= 0.05, W = z'Σ⁻¹z of \
                                 z = (e cos ω, e sin ω)"
                    .into(),
                extra_names: vec!["p".into()],
            });
        }
        outputs
    }

    fn settings_text(&self) -> String {
        format!("{:?}", self.settings)
    }

    fn cost(&self) -> String {
        let per_period = self.settings.n_starts();
        match self.settings.period {
            TrialPeriod::StartAtKnown => format!(
                "{per_period} Levenberg-Marquardt starts at the known period, then one polish"
            ),
            TrialPeriod::Search => format!(
                "a periodogram, then {per_period} Levenberg-Marquardt starts at each of {} peak(s), \
                 then one polish",
                self.settings.n_peaks.max(1)
            ),
        }
    }

    fn estimate(
        &self,
        data: &FitData,
        design: &InjectionDesign,
        _rng: &mut SimRng,
    ) -> Result<Vec<EccentricityEstimate>, EstimatorError> {
        let report = fit_orbit(data, &self.fit_options_for(design))?;
        let solution = &report.eccentric;
        // Starting at the known periods keeps the real fit's order: the audited companion is
        // the one at its index; a periodogram search may reorder them: nearest period then.
        let companion = match self.settings.period {
            TrialPeriod::StartAtKnown => solution
                .companions
                .get(design.model.audited)
                .unwrap_or(&solution.companions[0]),
            TrialPeriod::Search => nearest_companion(&solution.companions, design.period),
        };
        let e_hat = companion.eccentricity.value;
        let sigma_e = companion.eccentricity.error.unwrap_or(f64::NAN);
        let (lower68, upper68, lower95, upper95) = if sigma_e.is_finite() {
            let (l68, u68) = clipped(e_hat, sigma_e, 1.0);
            let (l95, u95) = clipped(e_hat, sigma_e, Z95);
            (l68, u68, l95, u95)
        } else {
            // No formal error: the interval says nothing.
            (0.0, 1.0, 0.0, 1.0)
        };
        let lsq = EccentricityEstimate {
            point: e_hat,
            lower68,
            upper68,
            lower95,
            upper95,
            calls_eccentric: Some(lower95 > 0.0),
            extra: vec![
                sigma_e,
                solution.chi_squared,
                companion.period.value,
                companion.semi_amplitude.value,
            ],
        };
        let mut out = vec![lsq.clone()];
        if self.settings.lucy_sweeney {
            // The fit's own test (2-D Wald form); no covariance: p = 1 (nothing decided).
            let p = companion.lucy_sweeney.map_or(1.0, |t| t.probability);
            let significant = p <= LUCY_SWEENEY_THRESHOLD;
            out.push(EccentricityEstimate {
                point: if significant { e_hat } else { 0.0 },
                calls_eccentric: Some(significant),
                extra: vec![p],
                ..lsq
            });
        }
        Ok(out)
    }
}

/// The companion whose period is nearest `period` in ln P (the first on a tie; the audited
/// companion of a refit).
pub fn nearest_companion(companions: &[CompanionFit], period: f64) -> &CompanionFit {
    let distance = |c: &CompanionFit| libm::fabs(libm::log(c.period.value / period));
    companions
        .iter()
        .min_by(|a, b| distance(a).total_cmp(&distance(b)))
        .expect("a fit has at least one companion")
}

/// The outputs of a set of estimators, in order.
pub fn all_outputs(estimators: &[&dyn Estimator]) -> Vec<OutputInfo> {
    estimators.iter().flat_map(|e| e.outputs()).collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn default_least_squares_has_eight_starts() {
        // The reference job of the injection benchmark uses eight starts.
        assert_eq!(LeastSquaresSettings::default().n_starts(), 8);
        let estimator = LeastSquaresEstimator::default();
        let options = estimator.fit_options(12.5);
        assert_eq!(options.initial_periods, vec![12.5]);
        let names: Vec<String> = estimator.outputs().into_iter().map(|o| o.name).collect();
        assert_eq!(names, ["lsq", "lucy_sweeney"]);
    }

    #[test]
    fn intervals_are_clipped_at_zero() {
        assert_eq!(clipped(0.05, 0.1, 1.0), (0.0, 0.15000000000000002));
        let (lo, hi) = clipped(0.9, 0.1, Z95);
        assert!(lo > 0.7 && hi == 1.0);
    }
}
