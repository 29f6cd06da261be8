//! The simulation design of an injection–recovery run: the epochs and error bars of the
//! observing run, the grid of injected orbits, the noise, and how trials are numbered.

use serde::Serialize;
use thiserror::Error;

use super::InjectError;
use crate::kepler::TWO_PI;
use crate::random::stream_rng;
use crate::table::VelocityTable;
use rand::RngExt;

/// Default grid of injected eccentricities: 0, 0.05, …, 0.6 (each value i/20, the double
/// nearest the decimal, so it prints as typed).
pub fn default_eccentricity_grid() -> Vec<f64> {
    (0..=12).map(|i| f64::from(i) / 20.0).collect()
}

/// Trial indices reserved for the extra (adaptive) trials of each cell: cell `c`'s extra trials
/// are `n_base + c·EXTRA_BLOCK + k`, `k < EXTRA_BLOCK`, after the design's base trials.
pub const EXTRA_BLOCK: u64 = 1 << 24;

/// Stream index reserved for drawing a random schedule's epochs (trial streams are 0, 1, …;
/// this one is far above any trial count).
pub const SCHEDULE_STREAM: u64 = u64::MAX;

/// Where the epochs and error bars of the simulated observing run come from.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Sampling {
    /// Epochs [d].
    pub times: Vec<f64>,
    /// Stated 1σ uncertainties [m/s], one per epoch.
    pub uncertainties: Vec<f64>,
    /// Instrument index of each epoch (into `instrument_names`).
    pub instruments: Vec<usize>,
    /// Instrument names.
    pub instrument_names: Vec<String>,
}

/// How the epochs of a [`Schedule`] are spread over its baseline.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Spacing {
    /// Evenly spaced, first and last epoch at the ends of the baseline.
    Regular,
    /// Independent uniform times over the baseline, sorted.
    Random,
}

/// A planned observing run: `n_epochs` epochs over `baseline` days from `start_time`, each with
/// the same stated `uncertainty`.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Schedule {
    /// Number of epochs.
    pub n_epochs: usize,
    /// Time from the first to the last possible epoch [d].
    pub baseline: f64,
    /// First epoch [d].
    pub start_time: f64,
    /// Regular or random epochs.
    pub spacing: Spacing,
    /// Stated uncertainty of every epoch [m/s].
    pub uncertainty: f64,
}

impl Sampling {
    /// Checks and builds a sampling from columns (one instrument index per epoch).
    pub fn new(
        times: Vec<f64>,
        uncertainties: Vec<f64>,
        instruments: Vec<usize>,
        instrument_names: Vec<String>,
    ) -> Result<Self, InjectError> {
        if times.len() != uncertainties.len() || times.len() != instruments.len() {
            return Err(InjectError::Design(DesignError::LengthMismatch {
                n_times: times.len(),
                n_uncertainties: uncertainties.len(),
                n_instruments: instruments.len(),
            }));
        }
        for (index, (&t, &s)) in times.iter().zip(&uncertainties).enumerate() {
            if !t.is_finite() {
                return Err(DesignError::BadEpoch {
                    index,
                    what: "time",
                    value: t,
                }
                .into());
            }
            if !(s.is_finite() && s > 0.0) {
                return Err(DesignError::BadEpoch {
                    index,
                    what: "uncertainty",
                    value: s,
                }
                .into());
            }
        }
        crate::limits::check_count(
            "number of epochs",
            times.len() as u64,
            crate::limits::MAX_EPOCHS,
        )
        .map_err(DesignError::from)?;
        if let Some((index, &i)) = instruments
            .iter()
            .enumerate()
            .find(|(_, &i)| i >= instrument_names.len())
        {
            return Err(DesignError::BadEpoch {
                index,
                what: "instrument index",
                value: i as f64,
            }
            .into());
        }
        Ok(Self {
            times,
            uncertainties,
            instruments,
            instrument_names,
        })
    }

    /// The epochs, uncertainties and instruments of a loaded table (its velocities are not used).
    pub fn from_table(table: &VelocityTable) -> Self {
        Self {
            times: table.times().to_vec(),
            uncertainties: table.uncertainties().to_vec(),
            instruments: table.instrument_index().to_vec(),
            instrument_names: table.instrument_names().to_vec(),
        }
    }

    /// The epochs of a planned run. Random epochs are drawn from
    /// [`stream_rng`]`(seed, `[`SCHEDULE_STREAM`]`)`, so the same seed gives the same run.
    pub fn from_schedule(schedule: &Schedule, seed: u64) -> Result<Self, InjectError> {
        let Schedule {
            n_epochs,
            baseline,
            start_time,
            spacing,
            uncertainty,
        } = *schedule;
        if n_epochs < 2 {
            return Err(DesignError::BadSchedule {
                what: "number of epochs",
                value: n_epochs as f64,
                reason: "at least 2",
            }
            .into());
        }
        crate::limits::check_count(
            "schedule epochs",
            n_epochs as u64,
            crate::limits::MAX_EPOCHS,
        )
        .map_err(DesignError::from)?;
        if !(baseline.is_finite() && baseline > 0.0) {
            return Err(DesignError::BadSchedule {
                what: "baseline",
                value: baseline,
                reason: "must be positive",
            }
            .into());
        }
        if !start_time.is_finite() {
            return Err(DesignError::BadSchedule {
                what: "start time",
                value: start_time,
                reason: "must be finite",
            }
            .into());
        }
        let times = match spacing {
            Spacing::Regular => (0..n_epochs)
                .map(|i| start_time + baseline * i as f64 / (n_epochs - 1) as f64)
                .collect(),
            Spacing::Random => {
                let mut rng = stream_rng(seed, SCHEDULE_STREAM);
                let mut times: Vec<f64> = (0..n_epochs)
                    .map(|_| start_time + baseline * rng.random::<f64>())
                    .collect();
                times.sort_by(f64::total_cmp);
                times
            }
        };
        Self::new(
            times,
            vec![uncertainty; n_epochs],
            vec![0; n_epochs],
            vec!["schedule".to_string()],
        )
    }

    /// Number of epochs.
    pub fn n_epochs(&self) -> usize {
        self.times.len()
    }

    /// Median stated uncertainty [m/s] (the σ of "K/σ"); the mean of the two middle values for
    /// an even count.
    pub fn median_uncertainty(&self) -> f64 {
        crate::stats::median(&self.uncertainties)
    }
}

/// Problems with a design; each names the offending value.
#[derive(Debug, Clone, PartialEq, Error)]
pub enum DesignError {
    /// Columns of different lengths.
    #[error(
        "sampling columns differ in length: {n_times} times, {n_uncertainties} uncertainties, \
         {n_instruments} instrument indices"
    )]
    LengthMismatch {
        /// Times given.
        n_times: usize,
        /// Uncertainties given.
        n_uncertainties: usize,
        /// Instrument indices given.
        n_instruments: usize,
    },
    /// One epoch is unusable.
    #[error("epoch {index} (0-based): {what} is {value}; it must be finite (uncertainties > 0)")]
    BadEpoch {
        /// 0-based epoch.
        index: usize,
        /// Which column.
        what: &'static str,
        /// The value.
        value: f64,
    },
    /// A count is above its bound in [`crate::limits`].
    #[error(transparent)]
    TooLarge(#[from] crate::limits::LimitError),
    /// A schedule setting is unusable.
    #[error("schedule {what} = {value}: {reason}")]
    BadSchedule {
        /// Which setting.
        what: &'static str,
        /// The value.
        value: f64,
        /// What is required.
        reason: &'static str,
    },
    /// A grid or noise setting is unusable.
    #[error("{what} = {value}: {reason}")]
    BadSetting {
        /// Which setting.
        what: &'static str,
        /// The value.
        value: f64,
        /// What is required.
        reason: &'static str,
    },
}

/// The rest of the model in every trial: what is simulated besides the injected companion,
/// and the model each simulation is refitted with (the one fitted to the real data).
///
/// The default is the bare case: no background, no instrument jitter, one companion, no trend,
/// no fitted jitter.
#[derive(Debug, Clone, PartialEq, Serialize, Default)]
pub struct TrialModel {
    /// Velocity of everything but the injected companion at each epoch [m/s]: the other
    /// companions, the trend and the instrument offsets at their fitted values, evaluated once
    /// by the fit's own model ([`crate::fit::RvProblem::model_velocities`]). Empty = zero.
    pub background: Vec<f64>,
    /// Jitter of each instrument [m/s] added in quadrature to the noise of its epochs; unknown
    /// to the estimators, which fit it when `fit_jitter`. Empty = none.
    pub instrument_jitters: Vec<f64>,
    /// Starting periods [d] of the refit, in the order of the fit to the real data (the
    /// audited companion's entry is replaced by the design's period); the length is the number
    /// of companions refitted. The order matters: the multi-start fit finds companions one after
    /// another, so the real fit's order (strongest signal first) avoids the local minima a
    /// weak companion fitted first can fall into.
    pub periods: Vec<f64>,
    /// Index of the audited (injected) companion in `periods`.
    pub audited: usize,
    /// Refit a linear trend.
    pub trend: bool,
    /// Refit one jitter per instrument (Baluev 2009 modified likelihood).
    pub fit_jitter: bool,
}

impl TrialModel {
    /// Companions in the refit (at least 1).
    pub fn n_companions(&self) -> usize {
        self.periods.len().max(1)
    }
}

/// The full design of an injection–recovery run.
///
/// The grid is true e × K × ω (ω random when `omegas` is empty); every cell gets
/// `trials_per_cell` trials. Trial `i` belongs to cell `i / trials_per_cell` and draws all its
/// random numbers (ω when random, the phase, the noise, then a seed for the estimators) from
/// [`stream_rng`]`(seed, i)`, so its result does not depend on which thread or worker ran it.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct InjectionDesign {
    /// Epochs and error bars.
    pub sampling: Sampling,
    /// Injected period [d] (the same in every cell).
    pub period: f64,
    /// Injected eccentricities (grid axis 1).
    pub eccentricities: Vec<f64>,
    /// Injected semi-amplitudes K [m/s] (grid axis 2).
    pub semi_amplitudes: Vec<f64>,
    /// Injected arguments of periastron ω [rad] (grid axis 3); empty: ω uniform in [0, 2π) per trial.
    pub omegas: Vec<f64>,
    /// Extra Gaussian noise [m/s] added in quadrature to each stated uncertainty when simulating.
    /// The estimators are told the total σ (the jitter is treated as known).
    pub jitter: f64,
    /// Trials per grid cell.
    pub trials_per_cell: usize,
    /// Master seed.
    pub seed: u64,
    /// The rest of the model: background velocities, instrument jitters, the refit's model.
    pub model: TrialModel,
}

/// One cell of the grid: the injected e, K and ω (None: random per trial).
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct GridCell {
    /// 0-based cell index.
    pub index: usize,
    /// Injected eccentricity.
    pub eccentricity: f64,
    /// Injected semi-amplitude [m/s].
    pub semi_amplitude: f64,
    /// Injected ω [rad], or None when drawn per trial.
    pub omega: Option<f64>,
}

impl InjectionDesign {
    /// Checks every setting; returns the first problem.
    pub fn validate(&self) -> Result<(), InjectError> {
        let bad = |what: &'static str, value: f64, reason: &'static str| {
            Err(InjectError::Design(DesignError::BadSetting {
                what,
                value,
                reason,
            }))
        };
        // Re-check the sampling (it may have been built field by field).
        Sampling::new(
            self.sampling.times.clone(),
            self.sampling.uncertainties.clone(),
            self.sampling.instruments.clone(),
            self.sampling.instrument_names.clone(),
        )?;
        if !(self.period.is_finite() && self.period > 0.0) {
            return bad("period", self.period, "must be positive");
        }
        if self.eccentricities.is_empty() {
            return bad("number of eccentricities", 0.0, "give at least one");
        }
        if let Some(&e) = self
            .eccentricities
            .iter()
            .find(|e| !(**e >= 0.0 && **e <= 0.95))
        {
            return bad("injected eccentricity", e, "must lie in [0, 0.95]");
        }
        if self.semi_amplitudes.is_empty() {
            return bad("number of semi-amplitudes", 0.0, "give at least one");
        }
        if let Some(&k) = self
            .semi_amplitudes
            .iter()
            .find(|k| !(k.is_finite() && **k > 0.0))
        {
            return bad("injected semi-amplitude", k, "must be positive");
        }
        if let Some(&w) = self.omegas.iter().find(|w| !w.is_finite()) {
            return bad("injected omega", w, "must be finite");
        }
        if !(self.jitter.is_finite() && self.jitter >= 0.0) {
            return bad("jitter", self.jitter, "must be ≥ 0");
        }
        if self.trials_per_cell == 0 {
            return bad("trials per cell", 0.0, "at least 1");
        }
        use crate::limits::{
            check_count, product, MAX_GRID_CELLS, MAX_TRIALS, MAX_TRIALS_PER_CELL,
        };
        let trials_per_cell = self.trials_per_cell as u64;
        let n_cells = product(&[
            self.eccentricities.len() as u64,
            self.semi_amplitudes.len() as u64,
            self.omegas.len().max(1) as u64,
        ]);
        check_count("trials per cell", trials_per_cell, MAX_TRIALS_PER_CELL)
            .and_then(|()| check_count("grid cells", n_cells, MAX_GRID_CELLS))
            .and_then(|()| {
                check_count(
                    "trials in all (cells × trials per cell)",
                    product(&[n_cells, trials_per_cell]),
                    MAX_TRIALS,
                )
            })
            .map_err(DesignError::from)?;
        let m = &self.model;
        if !m.background.is_empty() && m.background.len() != self.sampling.n_epochs() {
            return bad(
                "background velocities",
                m.background.len() as f64,
                "one per epoch",
            );
        }
        if let Some(&v) = m.background.iter().find(|v| !v.is_finite()) {
            return bad("background velocity", v, "must be finite");
        }
        if !m.instrument_jitters.is_empty()
            && m.instrument_jitters.len() != self.sampling.instrument_names.len()
        {
            return bad(
                "instrument jitters",
                m.instrument_jitters.len() as f64,
                "one per instrument",
            );
        }
        if let Some(&j) = m
            .instrument_jitters
            .iter()
            .find(|j| !(j.is_finite() && **j >= 0.0))
        {
            return bad("instrument jitter", j, "must be ≥ 0");
        }
        if m.periods.len() > crate::spec::MAX_COMPANIONS {
            return bad("refitted companions", m.periods.len() as f64, "at most 3");
        }
        if let Some(&p) = m
            .periods
            .iter()
            .skip(1)
            .find(|p| !(p.is_finite() && **p > 0.0))
        {
            return bad("starting period", p, "must be positive");
        }
        Ok(())
    }

    /// Number of grid cells.
    pub fn n_cells(&self) -> usize {
        self.eccentricities.len() * self.semi_amplitudes.len() * self.omegas.len().max(1)
    }

    /// Total number of trials.
    pub fn n_trials(&self) -> u64 {
        (self.n_cells() * self.trials_per_cell) as u64
    }

    /// The cell with this index; cells run over ω fastest, then K, then e.
    pub fn cell(&self, index: usize) -> GridCell {
        let n_omega = self.omegas.len().max(1);
        let n_k = self.semi_amplitudes.len();
        let i_omega = index % n_omega;
        let i_k = (index / n_omega) % n_k;
        let i_e = index / (n_omega * n_k);
        GridCell {
            index,
            eccentricity: self.eccentricities[i_e],
            semi_amplitude: self.semi_amplitudes[i_k],
            omega: self.omegas.get(i_omega).copied(),
        }
    }

    /// All cells in order.
    pub fn cells(&self) -> Vec<GridCell> {
        (0..self.n_cells()).map(|i| self.cell(i)).collect()
    }

    /// The cell of a trial: base trials `i < n_trials()` belong to cell `i / trials_per_cell`;
    /// extra trials to the cell of their [`EXTRA_BLOCK`] (see [`InjectionDesign::extra_trials`]).
    pub fn cell_of_trial(&self, trial: u64) -> usize {
        let base = self.n_trials();
        if trial < base {
            (trial / self.trials_per_cell as u64) as usize
        } else {
            usize::try_from((trial - base) / EXTRA_BLOCK).unwrap_or(usize::MAX)
        }
    }

    /// The indices reserved for extra trials of cell `cell` (each with its own random stream).
    pub fn extra_trials(&self, cell: usize) -> std::ops::Range<u64> {
        let start = self.n_trials() + cell as u64 * EXTRA_BLOCK;
        start..start + EXTRA_BLOCK
    }

    /// True when `trial` is a base trial or an extra trial of an existing cell.
    pub fn has_trial(&self, trial: u64) -> bool {
        self.cell_of_trial(trial) < self.n_cells()
    }

    /// The reference epoch of the injected mean longitude: the middle of the time span (as in
    /// [`crate::fit::FitData::new`]).
    pub fn reference_time(&self) -> f64 {
        let (lo, hi) = self
            .sampling
            .times
            .iter()
            .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), &t| {
                (lo.min(t), hi.max(t))
            });
        0.5 * (lo + hi)
    }

    /// Starting periods of the refit of a simulation: the model's, in the real fit's order,
    /// with the design's period at the audited companion's place.
    pub fn refit_periods(&self) -> Vec<f64> {
        let mut periods = self.model.periods.clone();
        if periods.is_empty() {
            periods.push(self.period);
        } else {
            periods[self.model.audited] = self.period;
        }
        periods
    }

    /// σ of the simulated noise of each epoch: √(σ_i² + jitter² + s_j²) with s_j the fitted
    /// jitter of the epoch's instrument (the known part alone when there is none) [m/s].
    pub fn simulation_sigmas(&self) -> Vec<f64> {
        let known = self.noise_sigmas();
        if self.model.instrument_jitters.is_empty() {
            return known;
        }
        known
            .iter()
            .zip(&self.sampling.instruments)
            .map(|(s, &j)| {
                let extra = self.model.instrument_jitters[j];
                libm::sqrt(s * s + extra * extra)
            })
            .collect()
    }

    /// The uncertainties the estimators are told: √(σ_i² + jitter²) [m/s] (the design's known
    /// extra noise; fitted instrument jitters are left to the estimators).
    pub fn noise_sigmas(&self) -> Vec<f64> {
        self.sampling
            .uncertainties
            .iter()
            .map(|s| libm::sqrt(s * s + self.jitter * self.jitter))
            .collect()
    }

    /// K/σ of a semi-amplitude, σ the median stated uncertainty with the jitter in quadrature.
    pub fn signal_to_noise(&self, semi_amplitude: f64) -> f64 {
        let s = self.sampling.median_uncertainty();
        semi_amplitude / libm::sqrt(s * s + self.jitter * self.jitter)
    }

    /// A stable text of every setting, for the settings fingerprint. Floats are printed in
    /// Rust's shortest round-trip form, so equal designs give equal text.
    pub fn settings_text(&self) -> String {
        format!("{self:?}")
    }
}

/// A random angle uniform in [0, 2π) (the injected ω when the design gives no ω axis, and the
/// injected mean anomaly).
pub fn random_angle<R: rand::Rng + ?Sized>(rng: &mut R) -> f64 {
    TWO_PI * rng.random::<f64>()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn design() -> InjectionDesign {
        InjectionDesign {
            sampling: Sampling::from_schedule(
                &Schedule {
                    n_epochs: 10,
                    baseline: 100.0,
                    start_time: 0.0,
                    spacing: Spacing::Regular,
                    uncertainty: 2.0,
                },
                1,
            )
            .unwrap(),
            period: 7.0,
            eccentricities: vec![0.0, 0.3],
            semi_amplitudes: vec![10.0, 20.0, 40.0],
            omegas: vec![],
            jitter: 0.0,
            trials_per_cell: 5,
            seed: 3,
            model: TrialModel::default(),
        }
    }

    #[test]
    fn default_grid_is_zero_to_point_six_by_point_zero_five() {
        let grid = default_eccentricity_grid();
        assert_eq!(grid.len(), 13);
        assert_eq!(grid[0], 0.0);
        approx::assert_abs_diff_eq!(grid[12], 0.6, epsilon = 1e-15);
    }

    #[test]
    fn cells_run_over_k_fastest_then_e() {
        let d = design();
        assert_eq!(d.n_cells(), 6);
        assert_eq!(d.n_trials(), 30);
        let c = d.cell(4);
        assert_eq!(
            (c.eccentricity, c.semi_amplitude, c.omega),
            (0.3, 20.0, None)
        );
        assert_eq!(d.cell_of_trial(29), 5);
        assert_eq!(d.cell_of_trial(5), 1);
    }

    #[test]
    fn schedules_regular_and_random() {
        let mut s = Schedule {
            n_epochs: 5,
            baseline: 8.0,
            start_time: 100.0,
            spacing: Spacing::Regular,
            uncertainty: 1.5,
        };
        let regular = Sampling::from_schedule(&s, 1).unwrap();
        assert_eq!(regular.times, vec![100.0, 102.0, 104.0, 106.0, 108.0]);
        s.spacing = Spacing::Random;
        let a = Sampling::from_schedule(&s, 1).unwrap();
        let b = Sampling::from_schedule(&s, 1).unwrap();
        assert_eq!(a, b);
        assert!(a.times.windows(2).all(|w| w[0] <= w[1]));
        assert!(a.times.iter().all(|t| (100.0..108.0).contains(t)));
        s.n_epochs = 1;
        assert!(Sampling::from_schedule(&s, 1).is_err());
    }

    #[test]
    fn validation_names_the_bad_value() {
        let mut d = design();
        d.eccentricities.push(1.2);
        let message = d.validate().unwrap_err().to_string();
        assert!(message.contains("1.2"), "{message}");
        let err = Sampling::new(
            vec![0.0, 1.0],
            vec![1.0, -1.0],
            vec![0, 0],
            vec!["a".into()],
        )
        .unwrap_err()
        .to_string();
        assert!(err.contains("epoch 1") && err.contains("-1"), "{err}");
    }

    #[test]
    fn median_uncertainty_and_signal_to_noise() {
        let mut d = design();
        d.sampling.uncertainties = vec![1.0, 3.0, 2.0, 4.0, 2.0, 2.0, 2.0, 2.0, 9.0, 2.0];
        assert_eq!(d.sampling.median_uncertainty(), 2.0);
        d.jitter = 1.5;
        // √(2² + 1.5²) = 2.5.
        approx::assert_relative_eq!(d.signal_to_noise(10.0), 4.0, max_relative = 1e-15);
    }
}
