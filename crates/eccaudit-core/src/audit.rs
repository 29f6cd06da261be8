//! The whole audit as one plan, shared by the command line and the page.
//!
//! An audit is: read the table, fit it by least squares, simulate the
//! observer's own run at the fitted orbit over a grid of true eccentricities,
//! estimate e from every simulation as from the real data, and state the
//! result. [`AuditSettings`] holds every choice (and is the replay file the
//! page writes and `eccaudit audit --settings` reads); [`AuditPlan`] does the
//! work in resumable pieces: [`AuditPlan::run_trials`] over any range of trial
//! indices (a thread, a Web Worker, a resumed run), then
//! [`AuditPlan::finish`] with all the records. Because each trial draws from
//! its own random stream ([`crate::random::stream_rng`]), the numbers depend
//! only on the settings and the data, never on how the trials were split.

use std::ops::Range;

use serde::{Deserialize, Serialize};
use sha2::{Digest, Sha256};
use thiserror::Error;

use crate::fit::{
    EccentricityCoordinates, FitData, FitError, FitOptions, FitReport, ParameterLayout, RvProblem,
};
use crate::inject::adaptive::{
    kind_of_trial, ExtraKind, ExtraState, BELT_MAX_LEAST_SQUARES, BELT_MIN_ALL,
    BELT_MIN_LEAST_SQUARES, BELT_TARGET_ERROR, BIAS_TARGET_ERROR, DECISION_CAP, DECISION_FAR,
    DECISION_TARGET_ERROR,
};
use crate::inject::statement::{
    cells_in_use, choose, decision_statistic, estimates_by_cell, interval_errors, output_belt,
    statement_cells, DECISION_ALPHA,
};
use crate::inject::{
    all_outputs, default_eccentricity_grid, eccentricity_statement, run_trials, summarise,
    AuditContext, EccentricityEstimate, EccentricityStatement, Estimator, FittedOrbit, InjectError,
    InjectionDesign, InjectionSummary, LeastSquaresEstimator, LeastSquaresSettings, Outcome,
    PosteriorEstimator, Sampling, TrialModel, TrialPeriod, TrialRecord,
};
use crate::posterior::{fast_sampler_settings, parse_prior_spec};
use crate::sampler::SamplerSettings;
use crate::spec::{fit_model, JitterMode, ModelFit, ModelSpec, ModelSpecError};
use crate::table::{ReadOptions, TimeSpec, VelocityTable, VelocityUnit};

/// The `format` field of a settings file.
pub const SETTINGS_FORMAT: &str = "eccaudit-audit-settings";
/// The settings version this build writes. Version 2 replaced the `fit` section by `model`
/// ([`ModelSpec`]); version-1 files are still read ([`AuditSettings::from_json`]).
pub const SETTINGS_VERSION: u32 = 2;
/// Random stream of the estimators run on the real data (trials use 0, 1, …).
const REAL_DATA_STREAM: u64 = u64::MAX - 1;

/// Which table the settings were made for: checked before a replay.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct DataIdentity {
    /// File name as the user loaded it (informative; not checked).
    pub file_name: String,
    /// SHA-256 of the file's bytes, lower-case hex ([`data_fingerprint`]).
    pub sha256: String,
}

/// How the table is read.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct ReadSettings {
    /// Velocity unit when the header does not state it.
    pub velocity_unit: Option<VelocityUnit>,
    /// Time convention when the header does not state it.
    pub time: Option<TimeSpec>,
}

impl ReadSettings {
    /// The reader's options for the table `source_name` with this unit and time convention and
    /// the separator detected (a caller with its own separator sets `delimiter`): how the
    /// command line, the survey and the page read a table under these settings.
    pub fn options(&self, source_name: impl Into<String>) -> ReadOptions {
        ReadOptions {
            source_name: source_name.into(),
            velocity_unit: self.velocity_unit,
            time: self.time,
            delimiter: None,
        }
    }
}

/// The `fit` section of a version-1 settings file, read only to turn it into a [`ModelSpec`].
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct FitSettings {
    /// Shortest period searched [d].
    pub min_period: f64,
    /// Longest period searched [d]; `None` = the baseline.
    pub max_period: Option<f64>,
    /// Fit a linear trend.
    pub trend: bool,
    /// Fit a jitter per instrument (maximum likelihood).
    pub jitter: bool,
}

impl FitSettings {
    /// The model a version-1 file meant: one companion, jitter fitted or off as it said.
    pub fn to_model(&self) -> ModelSpec {
        ModelSpec {
            min_period: self.min_period,
            max_period: self.max_period,
            trend: self.trend,
            jitter: if self.jitter {
                JitterMode::Fit
            } else {
                JitterMode::Off
            },
            ..ModelSpec::DEFAULT
        }
    }
}

impl Default for FitSettings {
    fn default() -> Self {
        FitSettings {
            min_period: 1.0,
            max_period: None,
            trend: false,
            jitter: false,
        }
    }
}

/// The injection–recovery grid and its estimators.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct InjectionSettings {
    /// True eccentricities injected.
    pub eccentricities: Vec<f64>,
    /// Base simulations per true eccentricity (every estimator); the audit adds trials where
    /// its statement needs them ([`AuditPlan::next_batch`]).
    pub trials_per_cell: usize,
    /// Extra Gaussian scatter added to every simulated velocity [m/s], in quadrature, and told
    /// to the estimators as known (on top of any fitted instrument jitter, which the model
    /// decides).
    pub jitter: f64,
    /// Fixed arguments of periastron [degrees]; empty = random ω per trial.
    pub omegas_deg: Vec<f64>,
    /// Search the periodogram in each simulation instead of starting at the known period.
    pub period_search: bool,
    /// Starting eccentricities of the least-squares fits in each simulation.
    pub start_eccentricities: Vec<f64>,
    /// Starting arguments of periastron per starting eccentricity.
    pub n_omega_starts: usize,
    /// Also report the Lucy–Sweeney decision as an estimator.
    pub lucy_sweeney: bool,
    /// Posterior estimators run on every simulation.
    pub posterior: PosteriorInjectionSettings,
    /// The estimator the statement quotes, by output name (`lsq`, `posterior_median_…`, …);
    /// None = the stated rule ([`crate::inject::RECOMMENDATION_RULE`]).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub estimator: Option<String>,
    /// Most circular simulations the decision may use ([`DECISION_CAP`] by default, and at
    /// most that): fewer makes the audit quicker and the decision's p less precise (its
    /// Monte-Carlo error is stated either way).
    #[serde(skip_serializing_if = "is_decision_cap")]
    pub max_circular_trials: u64,
}

fn is_decision_cap(n: &u64) -> bool {
    *n == DECISION_CAP
}

/// Posterior estimators of injection–recovery: one per eccentricity prior, each giving the
/// posterior median, mean and mode of e from a short sampler run.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct PosteriorInjectionSettings {
    /// Eccentricity priors as specs (`uniform`, `kipping2013`, `beta(0.867,3.03):0..0.8`, …);
    /// empty = no posterior estimators.
    pub priors: Vec<String>,
    /// Walkers of each run.
    pub n_walkers: usize,
    /// Steps kept after burn-in.
    pub n_steps: usize,
    /// Burn-in steps.
    pub n_burn: usize,
    /// Most log-density evaluations per run; each run extends itself until its convergence rule
    /// holds or this budget runs out (default [`crate::posterior::FAST_MAX_EVALUATIONS`]).
    pub max_evaluations: u64,
    /// Base simulations per true eccentricity that also run the posterior estimators (the
    /// first ones of each cell; the others run least squares only): posterior runs are the
    /// expensive kind, so the audit runs them at this smaller count (default
    /// [`DEFAULT_POSTERIOR_TRIALS_PER_CELL`]) and states their Monte-Carlo errors. `None` (JSON
    /// `null`) = every base simulation, as `inject` does.
    pub trials_per_cell: Option<usize>,
}

/// Default base simulations per true eccentricity that run the posterior estimators in an
/// audit ([`PosteriorInjectionSettings::trials_per_cell`]).
pub const DEFAULT_POSTERIOR_TRIALS_PER_CELL: usize = 8;

impl Default for PosteriorInjectionSettings {
    /// One prior, uniform on [0, 0.99], with the fast sampler preset of
    /// [`crate::posterior::fast_sampler_settings`] (4 ensembles of 16 walkers, 200 burn-in and
    /// at least 400 steps, run until converged within
    /// [`crate::posterior::FAST_MAX_EVALUATIONS`]).
    fn default() -> Self {
        let fast = fast_sampler_settings(0);
        PosteriorInjectionSettings {
            priors: vec!["uniform".to_string()],
            n_walkers: fast.n_walkers,
            n_steps: fast.n_steps,
            n_burn: fast.n_burn,
            max_evaluations: crate::posterior::FAST_MAX_EVALUATIONS,
            trials_per_cell: Some(DEFAULT_POSTERIOR_TRIALS_PER_CELL),
        }
    }
}

impl PosteriorInjectionSettings {
    /// The estimators, named `posterior_<spec>` (spec characters other than letters, digits
    /// and dots become `_`).
    pub fn estimators(&self, seed: u64) -> Result<Vec<PosteriorEstimator>, AuditError> {
        let sampler = SamplerSettings {
            n_walkers: self.n_walkers,
            n_steps: self.n_steps,
            n_burn: self.n_burn,
            ..fast_sampler_settings(seed)
        };
        // Refuse oversized runs here, once, rather than in every trial.
        crate::limits::check_sampler_counts(
            sampler.n_walkers,
            sampler.n_burn,
            sampler.n_steps,
            sampler.thin,
        )
        .map_err(|e| AuditError::Settings(format!("injection.posterior: {e}")))?;
        self.priors
            .iter()
            .enumerate()
            .map(|(idx, spec)| {
                let prior = parse_prior_spec(spec).map_err(|e| {
                    AuditError::Settings(crate::one_line(&format!(
                        "injection.posterior.priors[{idx}]: {e}"
                    )))
                })?;
                let tag: String = spec
                    .trim()
                    .chars()
                    .map(|c| {
                        if c.is_ascii_alphanumeric() || c == '.' {
                            c.to_ascii_lowercase()
                        } else {
                            '_'
                        }
                    })
                    .collect();
                Ok(
                    PosteriorEstimator::new(prior, sampler, format!("posterior_{tag}"))
                        .with_length(crate::sampler::RunLength {
                            max_evaluations: self.max_evaluations,
                            ..crate::posterior::fast_run_length()
                        }),
                )
            })
            .collect()
    }
}

impl PosteriorInjectionSettings {
    /// The estimators for simulations of `design`: each samples the model the design's
    /// refits use (companions, trend, jitter sampled when the model fits jitters).
    pub fn estimators_for(
        &self,
        seed: u64,
        design: &InjectionDesign,
    ) -> Result<Vec<PosteriorEstimator>, AuditError> {
        let mut posteriors = self.estimators(seed)?;
        for p in &mut posteriors {
            p.posterior.n_companions = design.model.n_companions();
            p.posterior.trend = design.model.trend;
            p.posterior.jitter = design.model.fit_jitter;
        }
        Ok(posteriors)
    }

    /// The estimators for simulations of `design` under the jitter mode of the model spec,
    /// treated exactly as `eccaudit priors` treats it
    /// ([`crate::posterior::SensitivityRequest::to_settings`]): one jitter per instrument is
    /// sampled under `auto` and `fit`, none under `off` — whether or not the least-squares fit
    /// of the real data needed one — so that the posterior in a trial is the posterior the
    /// user gets from `priors` for a table like the simulated one.
    pub fn estimators_for_mode(
        &self,
        seed: u64,
        design: &InjectionDesign,
        jitter: crate::spec::JitterMode,
    ) -> Result<Vec<PosteriorEstimator>, AuditError> {
        let mut posteriors = self.estimators_for(seed, design)?;
        for p in &mut posteriors {
            p.posterior.jitter = jitter != crate::spec::JitterMode::Off;
        }
        Ok(posteriors)
    }
}

impl Default for InjectionSettings {
    fn default() -> Self {
        let lsq = LeastSquaresSettings::default();
        InjectionSettings {
            eccentricities: default_eccentricity_grid(),
            trials_per_cell: 40,
            jitter: 0.0,
            omegas_deg: Vec::new(),
            period_search: false,
            start_eccentricities: lsq.start_eccentricities,
            n_omega_starts: lsq.n_omega_starts,
            lucy_sweeney: lsq.lucy_sweeney,
            posterior: PosteriorInjectionSettings::default(),
            estimator: None,
            max_circular_trials: DECISION_CAP,
        }
    }
}

/// Every choice of an audit: the replay file.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct AuditSettings {
    /// Always [`SETTINGS_FORMAT`].
    pub format: String,
    /// Always [`SETTINGS_VERSION`] for this build.
    pub version: u32,
    /// The table these settings were made for, when known.
    pub data: Option<DataIdentity>,
    /// How the table is read.
    pub read: ReadSettings,
    /// The model fitted to the real data and to every simulation.
    pub model: ModelSpec,
    /// Version 1 only: the fit settings (turned into `model` when read).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub fit: Option<FitSettings>,
    /// The injection–recovery grid.
    pub injection: InjectionSettings,
    /// Master seed of every simulation.
    pub seed: u64,
}

impl Default for AuditSettings {
    fn default() -> Self {
        AuditSettings {
            format: SETTINGS_FORMAT.to_string(),
            version: SETTINGS_VERSION,
            data: None,
            read: ReadSettings::default(),
            model: ModelSpec::DEFAULT,
            fit: None,
            injection: InjectionSettings::default(),
            seed: 1,
        }
    }
}

/// Why an audit cannot go ahead.
#[derive(Debug, Clone, PartialEq, Error)]
pub enum AuditError {
    /// The settings text is not valid settings JSON.
    #[error("settings: {0}")]
    Settings(String),
    /// The settings were made for another table.
    #[error(
        "the settings were made for `{expected_name}` (SHA-256 {expected}), but this table's \
         SHA-256 is {found}: load the same file, or remove the \"data\" entry to use these settings anyway"
    )]
    DataMismatch {
        /// File name in the settings.
        expected_name: String,
        /// Hash in the settings.
        expected: String,
        /// Hash of the table given.
        found: String,
    },
    /// The model specification is unusable.
    #[error("model: {0}")]
    Model(ModelSpecError),
    /// The least-squares fit of the real data failed.
    #[error("least-squares fit: {0}")]
    Fit(FitError),
    /// The simulations cannot run.
    #[error("{0}")]
    Inject(InjectError),
}

// Conversions without `#[source]`: the message already holds the cause, so an error chain
// printed in full does not repeat it.
impl From<ModelSpecError> for AuditError {
    fn from(error: ModelSpecError) -> Self {
        AuditError::Model(error)
    }
}

impl From<FitError> for AuditError {
    fn from(error: FitError) -> Self {
        AuditError::Fit(error)
    }
}

impl From<InjectError> for AuditError {
    fn from(error: InjectError) -> Self {
        AuditError::Inject(error)
    }
}

// The message above already prints the inner error, so it is not also reported as `source()`
// (which would make a printed chain say it twice).
/// SHA-256 of a table's bytes as lower-case hex: the data identity of a settings file.
pub fn data_fingerprint(bytes: &[u8]) -> String {
    Sha256::digest(bytes)
        .iter()
        .map(|b| format!("{b:02x}"))
        .collect()
}

impl AuditSettings {
    /// Parse a settings file (JSON). Unknown fields, a wrong `format` or a
    /// newer `version` are errors, so a typo never silently changes a result.
    pub fn from_json(text: &str) -> Result<Self, AuditError> {
        let mut settings: AuditSettings = serde_json::from_str(text)
            .map_err(|e| AuditError::Settings(crate::one_line(&e.to_string())))?;
        if settings.format != SETTINGS_FORMAT {
            return Err(AuditError::Settings(format!(
                "\"format\" is \"{}\", expected \"{SETTINGS_FORMAT}\"",
                crate::one_line(&settings.format)
            )));
        }
        if settings.version > SETTINGS_VERSION {
            return Err(AuditError::Settings(format!(
                "version {} is newer than this eccaudit reads ({SETTINGS_VERSION})",
                settings.version
            )));
        }
        match (settings.version, settings.fit.take()) {
            (1, Some(fit)) => settings.model = fit.to_model(),
            (1, None) => settings.model = FitSettings::default().to_model(),
            (_, Some(_)) => return Err(AuditError::Settings(
                "\"fit\" belongs to version-1 files; version 2 describes the model in \"model\""
                    .into(),
            )),
            _ => {}
        }
        settings.version = SETTINGS_VERSION;
        settings.model.validate()?;
        Ok(settings)
    }

    /// The settings as pretty JSON.
    pub fn to_json(&self) -> String {
        serde_json::to_string_pretty(self).expect("settings always serialise")
    }

    /// Check that `bytes` are the table these settings were made for (when they name one).
    pub fn check_data(&self, bytes: &[u8]) -> Result<(), AuditError> {
        let Some(identity) = &self.data else {
            return Ok(());
        };
        let found = data_fingerprint(bytes);
        if found == identity.sha256 {
            Ok(())
        } else {
            Err(AuditError::DataMismatch {
                expected_name: identity.file_name.clone(),
                expected: identity.sha256.clone(),
                found,
            })
        }
    }

    fn fit_options(&self) -> FitOptions {
        FitOptions {
            seed: self.seed,
            ..FitOptions::default()
        }
    }

    fn least_squares(&self) -> LeastSquaresEstimator {
        let inj = &self.injection;
        LeastSquaresEstimator {
            settings: LeastSquaresSettings {
                period: if inj.period_search {
                    TrialPeriod::Search
                } else {
                    TrialPeriod::StartAtKnown
                },
                start_eccentricities: inj.start_eccentricities.clone(),
                n_omega_starts: inj.n_omega_starts,
                lucy_sweeney: inj.lucy_sweeney,
                ..LeastSquaresSettings::default()
            },
        }
    }
}

/// The result of an audit of one companion.
#[derive(Debug, Clone, Serialize)]
pub struct AuditReport {
    /// The least-squares fit of the real data.
    pub fit: FitReport,
    /// The model behind the audit: companion audited, trend, jitters, χ² test, false-alarm
    /// probability, what the simulations hold fixed.
    pub context: AuditContext,
    /// Bias, scatter and coverage per grid cell and estimator.
    pub injection: InjectionSummary,
    /// The calibrated statement about the real data.
    pub statement: EccentricityStatement,
    /// Trials done, base and extra (a cancelled or partial run states it).
    pub trials_done: u64,
    /// Base trials in the design.
    pub trials_total: u64,
    /// Extra (adaptive) trials done.
    pub extra_trials: u64,
    /// True when every base trial is done and the adaptive rule asks for no more.
    pub complete: bool,
}

/// A prepared audit of one companion: the fit is done, the simulation design is fixed.
#[derive(Debug)]
pub struct AuditPlan {
    model_fit: ModelFit,
    context: AuditContext,
    design: InjectionDesign,
    least_squares: LeastSquaresEstimator,
    posteriors: Vec<PosteriorEstimator>,
    observed: Vec<Option<EccentricityEstimate>>,
    fitted: FittedOrbit,
    /// The estimator the user chose for the statement (None: the stated rule).
    estimator: Option<String>,
    /// Most circular simulations of the decision.
    max_circular: u64,
    /// Base trials per cell that run every estimator (the first ones of each cell).
    posterior_per_cell: u64,
}

/// The estimators of a plan, in output order.
fn estimators_of<'a>(
    least_squares: &'a LeastSquaresEstimator,
    posteriors: &'a [PosteriorEstimator],
) -> Vec<&'a dyn Estimator> {
    std::iter::once(least_squares as &dyn Estimator)
        .chain(posteriors.iter().map(|p| p as &dyn Estimator))
        .collect()
}

/// The fit of the real data under the settings' model.
fn fit_table(table: &VelocityTable, settings: &AuditSettings) -> Result<ModelFit, AuditError> {
    let model = settings.model.validate()?;
    let data = FitData::from_table(table);
    Ok(fit_model(&data, &model, &settings.fit_options())?)
}

/// Velocity of every part of the fitted `solution` but companion `audited` at the data's
/// epochs: the other companions, the offsets and the trend, by the fit's own model.
fn background_velocities(
    data: &FitData,
    solution: &crate::fit::Solution,
    trend: bool,
    audited: usize,
) -> Vec<f64> {
    let mut layout = ParameterLayout::new(solution.companions.len(), data.n_instruments(), trend);
    for (flag, c) in layout.circular.iter_mut().zip(&solution.companions) {
        *flag = c.held_circular;
    }
    let mut params = solution.parameters[..layout.n_params()].to_vec();
    params[layout.companion_start(audited) + 1] = 0.0;
    let problem = RvProblem::new(data, layout, EccentricityCoordinates::E);
    let mut model = vec![0.0; data.n_points()];
    problem.model_velocities(&params, &mut model);
    model
}

/// The rest of the model in each simulation of companion `audited` (0-based) of `fit`: the
/// background velocity (other companions, trend, offsets of the eccentric solution), the
/// fitted instrument jitters (when the jitter mode fitted them), and the refit's model in the
/// real fit's order of companions.
pub fn trial_model(data: &FitData, fit: &ModelFit, audited: usize) -> TrialModel {
    let solution = &fit.report.eccentric;
    let trend = solution.trend.is_some();
    // The real fit's order: the audited companion keeps its place.
    let periods: Vec<f64> = solution.companions.iter().map(|c| c.period.value).collect();
    TrialModel {
        background: background_velocities(data, solution, trend, audited),
        instrument_jitters: if fit.jitter.fitted {
            solution
                .instruments
                .iter()
                .map(|i| i.jitter.unwrap_or(0.0))
                .collect()
        } else {
            Vec::new()
        },
        periods,
        audited,
        trend,
        fit_jitter: fit.jitter.fitted,
    }
}

/// How the injected semi-amplitudes of [`table_design`] are chosen.
#[derive(Debug, Clone, PartialEq)]
pub enum InjectedAmplitudes {
    /// The fitted K of the audited companion.
    Fitted,
    /// These K [m/s].
    Given(Vec<f64>),
    /// These K/σ, σ the design's median uncertainty with the jitter
    /// ([`InjectionDesign::signal_to_noise`]).
    OverSigma(Vec<f64>),
}

/// What an injection run on a table takes from its settings rather than from the fit.
#[derive(Debug, Clone, PartialEq)]
pub struct TableDesignGrid {
    /// Injected eccentricities; empty = [`crate::inject::default_eccentricity_grid`].
    pub eccentricities: Vec<f64>,
    /// Injected ω [deg]; empty = random per trial.
    pub omegas_deg: Vec<f64>,
    /// Known extra noise [m/s] added in quadrature to every uncertainty.
    pub added_noise: f64,
    /// Trials per grid cell.
    pub trials_per_cell: usize,
    /// Master seed (also the fit's).
    pub seed: u64,
    /// The injected semi-amplitudes.
    pub semi_amplitudes: InjectedAmplitudes,
}

/// Why [`table_design`] failed; each message says what, and the fit's names the table.
#[derive(Debug, Clone, PartialEq, Error)]
pub enum TableDesignError {
    /// The model settings are invalid.
    #[error("{0}")]
    Model(ModelSpecError),
    /// The fit of the table failed.
    #[error("fit of `{table}`: {error}")]
    Fit {
        /// The table's name.
        table: String,
        /// The fit's error.
        error: FitError,
    },
    /// The design is invalid.
    #[error("{0}")]
    Design(InjectError),
}

/// The injection design of `inject FILE` (command line and Python): `model` (its audited
/// companion, else companion 1) fitted to `table` with the grid's seed, the audited companion's
/// period, the rest of the model of each simulation ([`trial_model`]), and the injected K
/// (fitted, given, or K/σ); returns the fit with the design.
pub fn table_design(
    table: &VelocityTable,
    model: &ModelSpec,
    grid: &TableDesignGrid,
) -> Result<(ModelFit, InjectionDesign), TableDesignError> {
    let model = model.validate().map_err(TableDesignError::Model)?;
    let audited = model.audited()[0];
    let data = FitData::from_table(table);
    let base = FitOptions {
        seed: grid.seed,
        ..FitOptions::default()
    };
    let fit = fit_model(&data, &model, &base).map_err(|error| TableDesignError::Fit {
        table: table.source_name().to_string(),
        error,
    })?;
    let companion = &fit.report.eccentric.companions[audited];
    let mut design = InjectionDesign {
        sampling: Sampling::from_table(table),
        period: companion.period.value,
        eccentricities: if grid.eccentricities.is_empty() {
            default_eccentricity_grid()
        } else {
            grid.eccentricities.clone()
        },
        semi_amplitudes: vec![1.0],
        omegas: grid.omegas_deg.iter().map(|d| d.to_radians()).collect(),
        jitter: grid.added_noise,
        trials_per_cell: grid.trials_per_cell,
        seed: grid.seed,
        model: TrialModel::default(),
    };
    design.validate().map_err(TableDesignError::Design)?;
    design.model = trial_model(&data, &fit, audited);
    design.semi_amplitudes = match &grid.semi_amplitudes {
        InjectedAmplitudes::Fitted => vec![companion.semi_amplitude.value],
        InjectedAmplitudes::Given(k) => k.clone(),
        InjectedAmplitudes::OverSigma(ratios) => {
            let unit = design.signal_to_noise(1.0);
            ratios.iter().map(|r| r / unit).collect()
        }
    };
    design.validate().map_err(TableDesignError::Design)?;
    Ok((fit, design))
}

impl AuditPlan {
    /// Fit `table` and fix the simulation design of the first audited companion (the one of
    /// `settings.model.audit_companion`, else companion 1). [`AuditPlan::all`] gives every
    /// audited companion from one fit.
    pub fn new(table: &VelocityTable, settings: &AuditSettings) -> Result<Self, AuditError> {
        let model = settings.model.validate()?;
        let model_fit = fit_table(table, settings)?;
        Self::build(table, settings, model_fit, model.audited()[0])
    }

    /// One plan per audited companion (every companion unless the settings choose one), all
    /// from one fit of the real data.
    pub fn all(table: &VelocityTable, settings: &AuditSettings) -> Result<Vec<Self>, AuditError> {
        let model = settings.model.validate()?;
        let model_fit = fit_table(table, settings)?;
        model
            .audited()
            .into_iter()
            .map(|c| Self::build(table, settings, model_fit.clone(), c))
            .collect()
    }

    /// The plan of companion `audited` (0-based) from a fit already made.
    fn build(
        table: &VelocityTable,
        settings: &AuditSettings,
        model_fit: ModelFit,
        audited: usize,
    ) -> Result<Self, AuditError> {
        let data = FitData::from_table(table);
        let inj = &settings.injection;
        let solution = &model_fit.report.eccentric;
        let companion = &solution.companions[audited];
        let period = companion.period.value;
        let semi_amplitude = companion.semi_amplitude.value;
        let model = trial_model(&data, &model_fit, audited);
        let design = InjectionDesign {
            sampling: Sampling::from_table(table),
            period,
            eccentricities: inj.eccentricities.clone(),
            semi_amplitudes: vec![semi_amplitude],
            omegas: inj.omegas_deg.iter().map(|d| d.to_radians()).collect(),
            jitter: inj.jitter,
            trials_per_cell: inj.trials_per_cell,
            seed: settings.seed,
            model,
        };
        design.validate()?;
        let least_squares = settings.least_squares();
        // The posterior inside each trial samples the same model as the refits.
        let posteriors = settings.injection.posterior.estimators_for_mode(
            settings.seed,
            &design,
            settings.model.jitter,
        )?;
        // The real data, estimated exactly as each simulation is.
        let mut rng = crate::random::stream_rng(settings.seed, REAL_DATA_STREAM);
        let mut observed: Vec<Option<EccentricityEstimate>> = Vec::new();
        for estimator in estimators_of(&least_squares, &posteriors) {
            match estimator.estimate(&data, &design, &mut rng) {
                Ok(estimates) => observed.extend(estimates.into_iter().map(Some)),
                Err(_) => observed.extend(std::iter::repeat_n(None, estimator.outputs().len())),
            }
        }
        let lucy_sweeney_p = companion.lucy_sweeney.as_ref().map(|ls| ls.probability);
        let fitted = FittedOrbit {
            period,
            semi_amplitude,
            omega: companion.omega_deg.value.to_radians(),
            lucy_sweeney_p,
        };
        let context = AuditContext::new(&model_fit, audited, inj.period_search);
        if inj.max_circular_trials == 0 || inj.max_circular_trials > DECISION_CAP {
            return Err(AuditError::Settings(format!(
                "injection.max_circular_trials: {} is not between 1 and {DECISION_CAP}",
                inj.max_circular_trials
            )));
        }
        if let Some(name) = &inj.estimator {
            let outputs = all_outputs(&estimators_of(&least_squares, &posteriors));
            if name == "lucy_sweeney" || !outputs.iter().any(|o| &o.name == name) {
                let names: Vec<&str> = outputs
                    .iter()
                    .map(|o| o.name.as_str())
                    .filter(|n| *n != "lucy_sweeney")
                    .collect();
                return Err(AuditError::Settings(format!(
                    "estimator `{}`: not one of this audit's estimators ({})",
                    crate::one_line(name),
                    names.join(", ")
                )));
            }
        }
        Ok(AuditPlan {
            model_fit,
            context,
            design,
            least_squares,
            posteriors,
            observed,
            fitted,
            estimator: inj.estimator.clone(),
            max_circular: inj.max_circular_trials,
            posterior_per_cell: inj
                .posterior
                .trials_per_cell
                .map_or(inj.trials_per_cell, |n| n.min(inj.trials_per_cell))
                as u64,
        })
    }

    /// The model behind this audit, for the statement.
    pub fn context(&self) -> &AuditContext {
        &self.context
    }

    /// The fit of the model to the real data (with the χ² test, jitter decision, detections
    /// and the notes the output must open with).
    pub fn model_fit(&self) -> &ModelFit {
        &self.model_fit
    }

    /// The audited companion, 1-based.
    pub fn companion(&self) -> usize {
        self.context.companion
    }

    /// The least-squares fit of the real data.
    pub fn fit(&self) -> &FitReport {
        &self.model_fit.report
    }

    /// The simulation design.
    pub fn design(&self) -> &InjectionDesign {
        &self.design
    }

    /// The estimators run on every simulation, in output order.
    pub fn estimators(&self) -> Vec<&dyn Estimator> {
        std::iter::once(&self.least_squares as &dyn Estimator)
            .chain(self.posteriors.iter().map(|p| p as &dyn Estimator))
            .collect()
    }

    /// Base trials in the design (the adaptive rule adds extra trials after them).
    pub fn n_trials(&self) -> u64 {
        self.design.n_trials()
    }

    /// True when `trial` is a base trial or an extra trial of one of the design's cells.
    pub fn has_trial(&self, trial: u64) -> bool {
        self.design.has_trial(trial)
    }

    /// True when trial `trial` runs every estimator: the first
    /// [`PosteriorInjectionSettings::trials_per_cell`] base trials of each cell and the extra
    /// trials of the every-estimator kind; the other trials run least squares only.
    pub fn runs_every_estimator(&self, trial: u64) -> bool {
        let base = self.design.n_trials();
        if trial < base {
            trial % (self.design.trials_per_cell.max(1) as u64) < self.posterior_per_cell
        } else {
            kind_of_trial(&self.design, trial) == Some(ExtraKind::AllEstimators)
        }
    }

    /// Run the trials with indices in `range` (a range of base trials is clipped to them; an
    /// extra range must lie in one cell's block), calling `observer` after each, in index
    /// order. Trials that do not run every estimator ([`AuditPlan::runs_every_estimator`]) run
    /// the least-squares estimator only; their other outputs are [`Outcome::Skipped`]. A
    /// trial's numbers depend only on its index (each estimator draws from its own stream).
    pub fn run_trials(
        &self,
        range: Range<u64>,
        observer: &mut dyn FnMut(&TrialRecord),
    ) -> Result<Vec<TrialRecord>, AuditError> {
        let all = self.estimators();
        let n_outputs = all_outputs(&all).len();
        let lsq: [&dyn Estimator; 1] = [&self.least_squares];
        let base = self.design.n_trials();
        let end = if range.start < base {
            range.end.min(base)
        } else {
            range.end
        };
        let mut records = Vec::with_capacity(end.saturating_sub(range.start) as usize);
        for trial in range.start..end {
            let every = self.runs_every_estimator(trial);
            let estimators: &[&dyn Estimator] = if every { &all } else { &lsq };
            let mut record = run_trials(&self.design, estimators, trial..trial + 1, &mut |_| {})?
                .pop()
                .ok_or(InjectError::TrialOutOfRange {
                    trial,
                    n_trials: base,
                })?;
            record.outcomes.resize(n_outputs, Outcome::Skipped);
            observer(&record);
            records.push(record);
        }
        Ok(records)
    }

    /// The next batch of trials the audit needs, decided from the `records` so far (any order),
    /// or None when it needs no more. The drivers (the command line's threads, the page's
    /// workers) loop: run the trials of the batch not yet done, then ask again.
    ///
    /// The rule, in order: (1) every base trial (the first
    /// [`PosteriorInjectionSettings::trials_per_cell`] of each cell with every estimator, the
    /// rest least squares only); (2) the circular decision: least-squares trials of the e = 0
    /// cell while the Wilson 95% interval of the Monte-Carlo p contains 0.05, or, unless that
    /// interval lies far from 0.05 (below [`DECISION_FAR`]`[0]` or above `[1]`), while p's
    /// standard error exceeds [`DECISION_TARGET_ERROR`]; until the settings'
    /// `max_circular_trials` (at most [`DECISION_CAP`]; batches double, so the last may pass
    /// it); (3) the quoted estimator (recommended from the base trials, or the user's). Least
    /// squares: at least [`BELT_MIN_LEAST_SQUARES`] simulations in the cells its interval rests
    /// on ([`cells_in_use`]), enough in the cell nearest its value for a bias standard error of
    /// [`BIAS_TARGET_ERROR`], then more in the two cells bracketing an end of its interval
    /// while that end's bootstrap standard error ([`interval_errors`], as the statement
    /// computes it) exceeds [`BELT_TARGET_ERROR`] (up to [`BELT_MAX_LEAST_SQUARES`] per cell).
    /// A posterior output: every-estimator trials,
    /// at least [`BELT_MIN_ALL`] in the cells its interval rests on and the bias target at the
    /// nearest. Each within its kind's cap. Only base trials and complete batches are looked
    /// at, so the sequence of batches does not depend on how trials were split or on an
    /// interruption.
    pub fn next_batch(&self, records: &[TrialRecord]) -> Option<Range<u64>> {
        let design = &self.design;
        let base = design.n_trials();
        let mut done_base = vec![false; base as usize];
        for r in records.iter().filter(|r| r.trial < base) {
            done_base[r.trial as usize] = true;
        }
        if done_base.iter().any(|d| !d) {
            return Some(0..base);
        }
        let state = ExtraState::of(design, records);
        let counted: Vec<&TrialRecord> =
            records.iter().filter(|r| state.counts(design, r)).collect();
        let outputs = all_outputs(&self.estimators());
        let cells = statement_cells(design, &self.fitted);
        // (2) The circular decision.
        if let (Some(stat), Some(c0)) = (
            decision_statistic(&outputs),
            cells.iter().find(|c| c.eccentricity == 0.0),
        ) {
            if let Some(obs) = self.observed.get(stat.output).and_then(Option::as_ref) {
                let circular: Vec<&TrialRecord> = counted
                    .iter()
                    .copied()
                    .filter(|r| r.cell == c0.index)
                    .collect();
                if let Some(p) = stat.p_value(obs, &circular) {
                    let far = p.wilson95[1] < DECISION_FAR[0] || p.wilson95[0] > DECISION_FAR[1];
                    let unresolved = !p.resolves(DECISION_ALPHA)
                        || (!far && p.standard_error > DECISION_TARGET_ERROR);
                    if unresolved && (p.n as u64) < self.max_circular {
                        if let Some(batch) = state.next(design, c0.index, ExtraKind::LeastSquares) {
                            return Some(batch);
                        }
                    }
                }
            }
        }
        // (3) The recommended estimator's interval and bias.
        let base_records: Vec<&TrialRecord> =
            counted.iter().copied().filter(|r| r.trial < base).collect();
        let chosen = choose(
            &outputs,
            &self.observed,
            &cells,
            &base_records,
            self.estimator.as_deref(),
        )?;
        let x0 = self.observed[chosen].as_ref()?.point;
        let per_cell =
            estimates_by_cell(&cells, &counted, chosen, outputs[chosen].converged_index());
        let belt = output_belt(&cells, &per_cell, x0)?;
        let interval = belt.interval(x0);
        let (used, nearest) = cells_in_use(&cells, &interval, x0);
        let is_lsq = chosen < self.least_squares.outputs().len();
        // The bias quoted at the cell nearest the value: enough simulations for a standard
        // error of BIAS_TARGET_ERROR.
        let bias_target = |v: &[f64]| -> usize {
            if v.len() < 2 {
                return 2;
            }
            let mean = v.iter().sum::<f64>() / v.len() as f64;
            let var = v.iter().map(|x| (x - mean) * (x - mean)).sum::<f64>() / (v.len() - 1) as f64;
            (var / (BIAS_TARGET_ERROR * BIAS_TARGET_ERROR)).ceil() as usize
        };
        if !is_lsq {
            // A posterior output (the user's choice): every-estimator trials in the cells its
            // interval rests on.
            for j in used {
                let v = &per_cell[j];
                let mut target = BELT_MIN_ALL;
                if j == nearest {
                    target = target.max(bias_target(v));
                }
                if v.len() < target {
                    if let Some(batch) =
                        state.next(design, cells[j].index, ExtraKind::AllEstimators)
                    {
                        return Some(batch);
                    }
                }
            }
            return None;
        }
        // Least squares (cheap): first BELT_MIN_LEAST_SQUARES in the cells the interval rests
        // on and the bias target at the nearest cell; then, while the bootstrap standard
        // error of an end of the interval (computed exactly as the statement computes it)
        // exceeds BELT_TARGET_ERROR, more in the two cells that bracket that end.
        for &j in &used {
            let v = &per_cell[j];
            let mut target = BELT_MIN_LEAST_SQUARES;
            if j == nearest {
                target = target.max(bias_target(v));
            }
            if v.len() < target {
                if let Some(batch) = state.next(design, cells[j].index, ExtraKind::LeastSquares) {
                    return Some(batch);
                }
            }
        }
        let errors = interval_errors(design, &cells, &per_cell, x0)?;
        let bracket = |end: f64| -> Vec<usize> {
            let below = (0..cells.len())
                .rev()
                .find(|&j| cells[j].eccentricity <= end);
            let above = (0..cells.len()).find(|&j| cells[j].eccentricity >= end);
            let mut js: Vec<usize> = below.into_iter().chain(above).collect();
            js.dedup();
            js
        };
        let mut wanted: Vec<usize> = Vec::new();
        if !errors.interval.upper_limit && errors.lower_standard_error > BELT_TARGET_ERROR {
            wanted.extend(bracket(errors.interval.lower));
        }
        if !errors.interval.open_above && errors.upper_standard_error > BELT_TARGET_ERROR {
            wanted.extend(bracket(errors.interval.upper));
        }
        // The cell with the fewest simulations first, so the bracketing cells grow together.
        wanted.sort_by_key(|&j| (per_cell[j].len(), j));
        wanted.dedup();
        for j in wanted {
            if let Some(batch) = state.next(design, cells[j].index, ExtraKind::LeastSquares) {
                // Batches double: take one only while it keeps the cell within the cap.
                if per_cell[j].len() as u64 + (batch.end - batch.start)
                    <= BELT_MAX_LEAST_SQUARES as u64
                {
                    return Some(batch);
                }
            }
        }
        None
    }

    /// Summarise `records` (any order; duplicates by trial index are dropped)
    /// and state the result for the real data.
    pub fn finish(&self, records: &[TrialRecord]) -> Result<AuditReport, AuditError> {
        let estimators = self.estimators();
        let mut sorted: Vec<TrialRecord> = records.to_vec();
        sorted.sort_by_key(|r| r.trial);
        sorted.dedup_by_key(|r| r.trial);
        let injection = summarise(&self.design, &estimators, &sorted);
        let statement = eccentricity_statement(
            &injection,
            &sorted,
            &self.observed,
            self.fitted,
            &self.context,
            self.estimator.as_deref(),
            self.max_circular,
        )?;
        let base = self.n_trials();
        Ok(AuditReport {
            fit: self.model_fit.report.clone(),
            context: self.context.clone(),
            injection,
            statement,
            trials_done: sorted.len() as u64,
            trials_total: base,
            extra_trials: sorted.iter().filter(|r| r.trial >= base).count() as u64,
            complete: self.next_batch(&sorted).is_none(),
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::table::{parse_table, ReadOptions};
    use crate::test_support::two_companion_table;

    /// SHA-256 test vector "abc" (FIPS 180-2, Appendix B.1).
    #[test]
    fn fingerprint_is_sha256_hex() {
        assert_eq!(
            data_fingerprint(b"abc"),
            "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"
        );
    }

    #[test]
    fn settings_round_trip_and_refuse_typos_and_other_data() {
        let settings = AuditSettings {
            data: Some(DataIdentity {
                file_name: "t.csv".into(),
                sha256: data_fingerprint(b"x"),
            }),
            ..AuditSettings::default()
        };
        let back = AuditSettings::from_json(&settings.to_json()).unwrap();
        assert_eq!(back, settings);
        assert!(back.check_data(b"x").is_ok());
        let err = back.check_data(b"y").unwrap_err();
        assert!(err.to_string().contains("made for `t.csv`"), "{err}");

        let typo = settings
            .to_json()
            .replace("\"trials_per_cell\"", "\"trials_per_cel\"");
        let err = AuditSettings::from_json(&typo).unwrap_err().to_string();
        assert!(err.contains("unknown field `trials_per_cel`"), "{err}");
        let wrong = settings
            .to_json()
            .replace(SETTINGS_FORMAT, "something-else");
        assert!(AuditSettings::from_json(&wrong).is_err());
        // Missing fields take their defaults.
        let minimal = AuditSettings::from_json(r#"{"seed": 9}"#).unwrap();
        assert_eq!(minimal.seed, 9);
        assert_eq!(minimal.injection, InjectionSettings::default());
    }

    /// However the trials are split into ranges, the report is the same.
    #[test]
    fn table_design_takes_period_and_k_from_the_fit_or_from_the_grid() {
        // The design of `inject FILE` on a demo table: the fitted period and K by default; K/σ
        // turns into K through the design's own σ (its definition); a bad grid is refused.
        let text = include_str!("../../../demo-data/corvin4-eccentric.tsv");
        let table = parse_table(text, &ReadOptions::new("corvin4-eccentric.tsv")).unwrap();
        let model = ModelSpec {
            audit_companion: Some(1),
            ..ModelSpec::DEFAULT
        };
        let mut grid = TableDesignGrid {
            eccentricities: Vec::new(),
            omegas_deg: vec![30.0],
            added_noise: 0.0,
            trials_per_cell: 3,
            seed: 4,
            semi_amplitudes: InjectedAmplitudes::Fitted,
        };
        let (fit, design) = table_design(&table, &model, &grid).unwrap();
        let c = &fit.report.eccentric.companions[0];
        assert_eq!(design.period, c.period.value);
        assert_eq!(design.semi_amplitudes, vec![c.semi_amplitude.value]);
        assert_eq!(design.eccentricities, default_eccentricity_grid());
        assert_eq!(design.omegas, vec![30f64.to_radians()]);
        grid.semi_amplitudes = InjectedAmplitudes::OverSigma(vec![2.0, 5.0]);
        let (_, scaled) = table_design(&table, &model, &grid).unwrap();
        for (k, ratio) in scaled.semi_amplitudes.iter().zip([2.0, 5.0]) {
            assert!((scaled.signal_to_noise(*k) - ratio).abs() < 1e-12);
        }
        grid.trials_per_cell = 0;
        assert!(matches!(
            table_design(&table, &model, &grid),
            Err(TableDesignError::Design(_))
        ));
    }

    #[test]
    fn split_runs_give_the_same_report() {
        let text = include_str!("../../../demo-data/corvin4-eccentric.tsv");
        let table = parse_table(text, &ReadOptions::new("corvin4-eccentric.tsv")).unwrap();
        let settings = AuditSettings {
            injection: InjectionSettings {
                eccentricities: vec![0.0, 0.4],
                trials_per_cell: 3,
                posterior: PosteriorInjectionSettings {
                    priors: vec!["uniform".into(), "kipping2013:0..0.8".into()],
                    n_walkers: 16,
                    n_steps: 100,
                    n_burn: 50,
                    max_evaluations: 40_000,
                    trials_per_cell: None,
                },
                ..InjectionSettings::default()
            },
            seed: 11,
            ..AuditSettings::default()
        };
        let plan = AuditPlan::new(&table, &settings).unwrap();
        assert_eq!(plan.n_trials(), 6);
        let outputs: Vec<String> = plan
            .estimators()
            .iter()
            .flat_map(|e| e.outputs())
            .map(|o| o.name)
            .collect();
        assert_eq!(
            outputs,
            [
                "lsq",
                "lucy_sweeney",
                "posterior_uniform_median",
                "posterior_uniform_mean",
                "posterior_uniform_mode",
                "posterior_kipping2013_0..0.8_median",
                "posterior_kipping2013_0..0.8_mean",
                "posterior_kipping2013_0..0.8_mode"
            ]
        );
        let whole = plan.run_trials(0..6, &mut |_| {}).unwrap();
        let mut pieces = plan.run_trials(4..6, &mut |_| {}).unwrap();
        pieces.extend(plan.run_trials(0..4, &mut |_| {}).unwrap());
        let a = serde_json::to_string(&plan.finish(&whole).unwrap()).unwrap();
        let b = serde_json::to_string(&plan.finish(&pieces).unwrap()).unwrap();
        assert_eq!(a, b);
        assert!(a.contains("\"trials_done\":6"));
        // The truncated prior keeps every posterior estimate below its e_max.
        for record in &whole {
            for estimate in record.outcomes.iter().skip(5).filter_map(|o| o.estimate()) {
                assert!(
                    estimate.point <= 0.8 && estimate.upper95 <= 0.8,
                    "{estimate:?}"
                );
            }
        }
    }

    /// The simulations of each audited companion reproduce the fitted model: the background
    /// (other companion, trend, offsets) plus the audited companion at its fitted elements is
    /// the fitted model to 1e-9 m/s, and a simulated trial minus its injected Keplerian and
    /// background is exactly its noise (replayed from the trial's stream) to 1e-9 m/s.
    #[test]
    fn simulations_carry_the_fitted_background_of_two_companions_trend_and_offsets() {
        use crate::inject::simulate_trial;
        use crate::model::keplerian_shape;
        use crate::random::{standard_normal, stream_rng};
        let text = two_companion_table(0.0, 5);
        let table = parse_table(&text, &ReadOptions::new("two.csv")).unwrap();
        let settings = AuditSettings {
            model: ModelSpec {
                companions: 2,
                trend: true,
                jitter: JitterMode::Fit,
                ..ModelSpec::DEFAULT
            },
            injection: InjectionSettings {
                eccentricities: vec![0.0, 0.3],
                trials_per_cell: 2,
                posterior: PosteriorInjectionSettings {
                    priors: Vec::new(),
                    ..PosteriorInjectionSettings::default()
                },
                ..InjectionSettings::default()
            },
            ..AuditSettings::default()
        };
        let plans = AuditPlan::all(&table, &settings).unwrap();
        assert_eq!(plans.len(), 2);
        let data = FitData::from_table(&table);
        let solution = &plans[0].fit().eccentric;
        // The full fitted model.
        let mut layout = ParameterLayout::new(2, 2, true);
        layout.circular = vec![false, false];
        let problem = RvProblem::new(&data, layout, EccentricityCoordinates::E);
        let mut full = vec![0.0; data.n_points()];
        problem.model_velocities(
            &solution.parameters[..problem.layout().n_params()],
            &mut full,
        );
        let mut periods_seen = Vec::new();
        for plan in &plans {
            let design = plan.design();
            let audited = plan.companion() - 1;
            let comp = &solution.companions[audited];
            periods_seen.push(design.period);
            assert_eq!(design.model.periods.len(), 2);
            assert_eq!(design.model.periods[audited], comp.period.value);
            assert_eq!(design.model.audited, audited);
            assert!(design.model.trend && design.model.fit_jitter);
            assert_eq!(design.model.instrument_jitters.len(), 2);
            let omega = comp.omega_deg.value.to_radians();
            let lambda = comp.mean_longitude_deg.value.to_radians();
            let mut shape = vec![0.0; data.n_points()];
            assert!(keplerian_shape(
                data.shifted_times(),
                comp.period.value,
                comp.eccentricity.value,
                omega,
                lambda,
                &mut shape
            ));
            for i in 0..data.n_points() {
                let rebuilt = design.model.background[i] + comp.semi_amplitude.value * shape[i];
                assert!(
                    (rebuilt - full[i]).abs() < 1e-9,
                    "epoch {i}: {rebuilt} vs {}",
                    full[i]
                );
            }
            // A trial minus injected Keplerian and background = its own noise.
            let (trial, _) = simulate_trial(design, 3).unwrap();
            let mut rng = stream_rng(design.seed, 3);
            let _omega = crate::inject::design::random_angle(&mut rng);
            let _m = crate::inject::design::random_angle(&mut rng);
            let t_ref = design.reference_time();
            let shifted: Vec<f64> = design.sampling.times.iter().map(|t| t - t_ref).collect();
            assert!(keplerian_shape(
                &shifted,
                design.period,
                trial.cell.eccentricity,
                trial.omega,
                trial.mean_anomaly + trial.omega,
                &mut shape
            ));
            let sigmas = design.simulation_sigmas();
            for i in 0..data.n_points() {
                let noise = sigmas[i] * standard_normal(&mut rng);
                let residual = trial.data.velocities()[i]
                    - trial.cell.semi_amplitude * shape[i]
                    - design.model.background[i]
                    - noise;
                assert!(residual.abs() < 1e-9, "epoch {i}: residual {residual}");
            }
            assert_eq!(trial.data.uncertainties(), &design.noise_sigmas()[..]);
        }
        // The two plans audit the two companions (periods near 9.7 and 61 d).
        periods_seen.sort_by(f64::total_cmp);
        assert!((periods_seen[0] - 9.7).abs() < 0.1 && (periods_seen[1] - 61.0).abs() < 2.0);
        // Each plan runs its trials; the refit finds the audited companion by period.
        let records = plans[1].run_trials(0..4, &mut |_| {}).unwrap();
        let report = plans[1].finish(&records).unwrap();
        assert_eq!(report.context.companion, 2);
        assert_eq!(report.context.others.len(), 1);
        assert!(report.context.trend.is_some());
    }

    /// The adaptive loop gives the same trials and the same report however each batch is split
    /// and in whatever order its pieces finish, and after an interrupted batch is resumed.
    #[test]
    fn adaptive_batches_do_not_depend_on_the_split_or_an_interruption() {
        let text = include_str!("../../../demo-data/velka17-nearly-circular.csv");
        let table = parse_table(text, &ReadOptions::new("velka17-nearly-circular.csv")).unwrap();
        let settings = AuditSettings {
            injection: InjectionSettings {
                eccentricities: vec![0.0, 0.1, 0.2, 0.3],
                trials_per_cell: 20,
                posterior: PosteriorInjectionSettings {
                    priors: Vec::new(),
                    ..PosteriorInjectionSettings::default()
                },
                ..InjectionSettings::default()
            },
            seed: 3,
            ..AuditSettings::default()
        };
        let plan = AuditPlan::new(&table, &settings).unwrap();
        let drive = |chunk: u64, interrupt: bool| {
            let mut records: Vec<TrialRecord> = Vec::new();
            let mut batches = Vec::new();
            let mut interrupted = false;
            while let Some(batch) = plan.next_batch(&records) {
                assert!(batches.len() < 40, "the rule must stop");
                batches.push(batch.clone());
                let mut starts: Vec<u64> = batch.clone().step_by(chunk as usize).collect();
                starts.reverse();
                for s in starts {
                    let end = (s + chunk).min(batch.end);
                    let todo: Vec<u64> = (s..end)
                        .filter(|t| !records.iter().any(|r| r.trial == *t))
                        .collect();
                    for t in todo {
                        records.extend(plan.run_trials(t..t + 1, &mut |_| {}).unwrap());
                    }
                }
                if interrupt && !interrupted && batches.len() == 2 {
                    // Lose the last few trials of the second batch, as a killed run would.
                    interrupted = true;
                    records.retain(|r| r.trial + 5 < batch.end || r.trial < batch.start);
                }
            }
            records.sort_by_key(|r| r.trial);
            (records, batches)
        };
        let (a, batches_a) = drive(1000, false);
        let (b, _) = drive(7, true);
        assert!(batches_a.len() >= 2, "{batches_a:?}");
        assert_eq!(a, b);
        let report = plan.finish(&a).unwrap();
        assert!(report.complete);
        assert!(report.extra_trials > 0);
        let d = report.statement.decision.as_ref().unwrap();
        assert!(
            (d.resolved
                && (d.p.standard_error <= DECISION_TARGET_ERROR
                    || d.p.wilson95[1] < DECISION_FAR[0]
                    || d.p.wilson95[0] > DECISION_FAR[1]))
                || d.p.n as u64 >= DECISION_CAP,
            "{d:?}"
        );
        assert!(
            report.statement.sentences.len() <= 3,
            "{:?}",
            report.statement.sentences
        );
        assert_eq!(
            serde_json::to_string(&report).unwrap(),
            serde_json::to_string(&plan.finish(&b).unwrap()).unwrap()
        );
    }
}
