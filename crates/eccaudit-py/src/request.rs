//! Keyword settings of `fit` and `inject`: the command line's flags as serde structs (the audit
//! and the priors use the core's own settings types directly).

use serde::Deserialize;

use eccaudit_core::audit::PosteriorInjectionSettings;
use eccaudit_core::fit::FitOptions;
use eccaudit_core::inject::{
    default_eccentricity_grid, InjectionDesign, LeastSquaresEstimator, LeastSquaresSettings,
    PosteriorEstimator, Sampling, TrialPeriod,
};
use eccaudit_core::periodogram::FrequencyLimits;
use eccaudit_core::table::VelocityTable;

/// The settings of `eccaudit fit` (same names and defaults as its flags).
#[derive(Debug, Clone, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct FitRequest {
    companions: usize,
    min_period: Option<f64>,
    max_period: Option<f64>,
    periods: Vec<f64>,
    peaks: usize,
    random_starts: usize,
    seed: u64,
    trend: bool,
    jitter: bool,
    max_fap: f64,
    stellar_mass: Option<f64>,
}

impl Default for FitRequest {
    fn default() -> Self {
        FitRequest {
            companions: 1,
            min_period: None,
            max_period: None,
            periods: Vec::new(),
            peaks: 3,
            random_starts: 0,
            seed: 1,
            trend: false,
            jitter: false,
            max_fap: 0.01,
            stellar_mass: None,
        }
    }
}

impl FitRequest {
    /// The fit options, checked as the command line checks its flags.
    pub fn options(&self, times: &[f64]) -> Result<FitOptions, String> {
        if self.companions == 0 {
            return Err("companions must be at least 1".into());
        }
        if self.periods.len() > self.companions {
            return Err(format!(
                "{} periods given for {} companion(s)",
                self.periods.len(),
                self.companions
            ));
        }
        let mut options = FitOptions {
            n_companions: self.companions,
            trend: self.trend,
            initial_periods: self.periods.clone(),
            n_peaks: self.peaks,
            n_random_starts: self.random_starts,
            seed: self.seed,
            max_false_alarm_probability: self.max_fap,
            jitter: self.jitter,
            stellar_mass: self.stellar_mass,
            ..FitOptions::default()
        };
        if self.min_period.is_some() || self.max_period.is_some() {
            let baseline = times.iter().copied().fold(f64::NEG_INFINITY, f64::max)
                - times.iter().copied().fold(f64::INFINITY, f64::min);
            let min_period = self.min_period.unwrap_or(1.0);
            let max_period = self.max_period.unwrap_or(baseline);
            if !(min_period > 0.0 && max_period > min_period) {
                return Err(format!(
                    "period range [{min_period}, {max_period}] d: need 0 < min_period < max_period"
                ));
            }
            options.limits = FrequencyLimits::PeriodRange {
                min_period,
                max_period,
            };
        }
        Ok(options)
    }
}

/// The settings of `eccaudit inject FILE` (same names and defaults as its flags).
#[derive(Debug, Clone, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct InjectRequest {
    period: Option<f64>,
    k: Vec<f64>,
    k_over_sigma: Vec<f64>,
    e: Vec<f64>,
    omega_deg: Vec<f64>,
    jitter: f64,
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
        InjectRequest {
            period: None,
            k: Vec::new(),
            k_over_sigma: Vec::new(),
            e: Vec::new(),
            omega_deg: Vec::new(),
            jitter: 0.0,
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
    /// The design, as `eccaudit inject FILE` builds it: period and K fitted to the table when
    /// not given (default least-squares fit).
    pub fn design(
        &self,
        table: &VelocityTable,
        sampling: Sampling,
    ) -> Result<InjectionDesign, String> {
        if !self.k.is_empty() && !self.k_over_sigma.is_empty() {
            return Err("give k or k_over_sigma, not both".into());
        }
        let fitted = if self.period.is_none() || (self.k.is_empty() && self.k_over_sigma.is_empty())
        {
            let data = eccaudit_core::fit::FitData::from_table(table);
            let report = eccaudit_core::fit::fit_orbit(&data, &FitOptions::default())
                .map_err(|e| format!("fit of `{}`: {e}", table.source_name()))?;
            let c = &report.eccentric.companions[0];
            Some((c.period.value, c.semi_amplitude.value))
        } else {
            None
        };
        let period = self.period.or(fitted.map(|f| f.0)).ok_or("no period")?;
        let mut design = InjectionDesign {
            sampling,
            period,
            eccentricities: if self.e.is_empty() {
                default_eccentricity_grid()
            } else {
                self.e.clone()
            },
            semi_amplitudes: vec![1.0],
            omegas: self.omega_deg.iter().map(|d| d.to_radians()).collect(),
            jitter: self.jitter,
            trials_per_cell: self.trials,
            seed: self.seed,
            model: Default::default(),
        };
        design.validate().map_err(|e| e.to_string())?;
        design.semi_amplitudes = if !self.k.is_empty() {
            self.k.clone()
        } else if !self.k_over_sigma.is_empty() {
            let unit = design.signal_to_noise(1.0);
            self.k_over_sigma.iter().map(|r| r / unit).collect()
        } else {
            vec![fitted.map(|f| f.1).ok_or("no semi-amplitude")?]
        };
        design.validate().map_err(|e| e.to_string())?;
        Ok(design)
    }

    /// The estimators, as the command line builds them from the same flags.
    pub fn estimators(&self) -> Result<(LeastSquaresEstimator, Vec<PosteriorEstimator>), String> {
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
        };
        let posteriors = posterior.estimators(self.seed).map_err(|e| e.to_string())?;
        Ok((lsq, posteriors))
    }
}
