//! Keyword settings of `fit` and `inject`: the command line's flags as serde structs, turned
//! into the core's `ModelSpec` and options as the command line does (the audit and the priors
//! use the core's own settings types directly).

use serde::Deserialize;

use eccaudit_core::audit::{
    table_design, InjectedAmplitudes, PosteriorInjectionSettings, TableDesignGrid,
};
use eccaudit_core::fit::FitOptions;
use eccaudit_core::inject::{
    InjectionDesign, LeastSquaresEstimator, LeastSquaresSettings, PosteriorEstimator, TrialPeriod,
};
use eccaudit_core::spec::{JitterMode, Model, ModelSpec};
use eccaudit_core::table::VelocityTable;

/// The model flags every fitting command shares (`--companions --period --trend --jitter
/// --min-period --max-period --max-fap`), as the core's [`ModelSpec`].
fn model_spec(
    companions: usize,
    periods: &[f64],
    trend: bool,
    jitter: JitterMode,
    (min_period, max_period, max_fap): (f64, Option<f64>, f64),
    audit_companion: Option<usize>,
) -> ModelSpec {
    ModelSpec {
        companions,
        periods: periods.to_vec(),
        trend,
        jitter,
        min_period,
        max_period,
        max_fap,
        audit_companion,
    }
}

/// The settings of `eccaudit fit` (same names and defaults as its flags; `periods` is the
/// repeated `--period`, `jitter` is `"auto"`, `"fit"` or `"off"`).
#[derive(Debug, Clone, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct FitRequest {
    companions: usize,
    periods: Vec<f64>,
    trend: bool,
    jitter: JitterMode,
    min_period: f64,
    max_period: Option<f64>,
    max_fap: f64,
    peaks: usize,
    random_starts: usize,
    seed: u64,
    stellar_mass: Option<f64>,
}

impl Default for FitRequest {
    fn default() -> Self {
        let spec = ModelSpec::DEFAULT;
        FitRequest {
            companions: spec.companions,
            periods: Vec::new(),
            trend: spec.trend,
            jitter: spec.jitter,
            min_period: spec.min_period,
            max_period: spec.max_period,
            max_fap: spec.max_fap,
            peaks: 3,
            random_starts: 0,
            seed: 1,
            stellar_mass: None,
        }
    }
}

impl FitRequest {
    /// The validated model and the base fit options, as `eccaudit fit` builds them.
    pub fn model(&self) -> Result<(Model, FitOptions), String> {
        let model = model_spec(
            self.companions,
            &self.periods,
            self.trend,
            self.jitter,
            (self.min_period, self.max_period, self.max_fap),
            None,
        )
        .validate()
        .map_err(|e| e.to_string())?;
        let base = FitOptions {
            n_peaks: self.peaks,
            n_random_starts: self.random_starts,
            seed: self.seed,
            stellar_mass: self.stellar_mass,
            ..FitOptions::default()
        };
        Ok((model, base))
    }
}

/// The settings of `eccaudit inject FILE` (same names and defaults as its flags).
#[derive(Debug, Clone, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct InjectRequest {
    companions: usize,
    periods: Vec<f64>,
    trend: bool,
    jitter: JitterMode,
    min_period: f64,
    max_period: Option<f64>,
    max_fap: f64,
    k: Vec<f64>,
    k_over_sigma: Vec<f64>,
    e: Vec<f64>,
    omega_deg: Vec<f64>,
    added_noise: f64,
    trials: usize,
    seed: u64,
    period_search: bool,
    start_e: Vec<f64>,
    omega_starts: usize,
    lucy_sweeney: bool,
    /// Eccentricity priors of the posterior estimators; `None` = the default (`uniform`),
    /// empty = least squares only.
    posterior: Option<Vec<String>>,
    posterior_walkers: usize,
    posterior_steps: usize,
    posterior_burn: usize,
}

impl Default for InjectRequest {
    fn default() -> Self {
        let spec = ModelSpec::DEFAULT;
        InjectRequest {
            companions: spec.companions,
            periods: Vec::new(),
            trend: spec.trend,
            jitter: spec.jitter,
            min_period: spec.min_period,
            max_period: spec.max_period,
            max_fap: spec.max_fap,
            k: Vec::new(),
            k_over_sigma: Vec::new(),
            e: Vec::new(),
            omega_deg: Vec::new(),
            added_noise: 0.0,
            trials: 200,
            seed: 1,
            period_search: false,
            start_e: vec![0.1, 0.4],
            omega_starts: 4,
            lucy_sweeney: true,
            posterior: None,
            posterior_walkers: 24,
            posterior_steps: 600,
            posterior_burn: 300,
        }
    }
}

impl InjectRequest {
    /// The design, as `eccaudit inject FILE` builds it: the core's [`table_design`] (the model
    /// fitted to the table, its period, and its K unless `k` or `k_over_sigma` is given).
    pub fn design(&self, table: &VelocityTable) -> Result<InjectionDesign, String> {
        if !self.k.is_empty() && !self.k_over_sigma.is_empty() {
            return Err("give k or k_over_sigma, not both".into());
        }
        let model = model_spec(
            self.companions,
            &self.periods,
            self.trend,
            self.jitter,
            (self.min_period, self.max_period, self.max_fap),
            Some(1),
        );
        let grid = TableDesignGrid {
            eccentricities: self.e.clone(),
            omegas_deg: self.omega_deg.clone(),
            added_noise: self.added_noise,
            trials_per_cell: self.trials,
            seed: self.seed,
            semi_amplitudes: if !self.k.is_empty() {
                InjectedAmplitudes::Given(self.k.clone())
            } else if !self.k_over_sigma.is_empty() {
                InjectedAmplitudes::OverSigma(self.k_over_sigma.clone())
            } else {
                InjectedAmplitudes::Fitted
            },
        };
        let (_, design) = table_design(table, &model, &grid).map_err(|e| e.to_string())?;
        Ok(design)
    }

    /// The estimators, as the command line builds them from the same flags.
    pub fn estimators(
        &self,
        design: &InjectionDesign,
    ) -> Result<(LeastSquaresEstimator, Vec<PosteriorEstimator>), String> {
        let lsq = LeastSquaresEstimator {
            settings: LeastSquaresSettings {
                period: if self.period_search {
                    TrialPeriod::Search
                } else {
                    TrialPeriod::StartAtKnown
                },
                start_eccentricities: self.start_e.clone(),
                n_omega_starts: self.omega_starts,
                lucy_sweeney: self.lucy_sweeney,
                ..LeastSquaresSettings::default()
            },
        };
        let posterior = PosteriorInjectionSettings {
            priors: self
                .posterior
                .clone()
                .unwrap_or_else(|| PosteriorInjectionSettings::default().priors),
            n_walkers: self.posterior_walkers,
            n_steps: self.posterior_steps,
            n_burn: self.posterior_burn,
            ..PosteriorInjectionSettings::default()
        };
        let posteriors = posterior
            .estimators_for(self.seed, design)
            .map_err(|e| e.to_string())?;
        Ok((lsq, posteriors))
    }
}
