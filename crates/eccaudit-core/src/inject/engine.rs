//! The injection–recovery engine: simulate one trial from the master seed and its index, run
//! every estimator on it, and do so for any range of trial indices (so a grid can be split
//! across threads, processes or Web Workers with identical results).

use std::ops::Range;

use rand::RngExt;
use serde::Serialize;

use super::design::{random_angle, GridCell, InjectionDesign};
use super::estimators::{EccentricityEstimate, Estimator};
use super::InjectError;
use crate::fit::FitData;
use crate::model::keplerian_shape;
use crate::random::{standard_normal, stream_rng, SimRng};

/// One simulated data set.
#[derive(Debug, Clone, PartialEq)]
pub struct SimulatedTrial {
    /// Trial index.
    pub trial: u64,
    /// Its grid cell.
    pub cell: GridCell,
    /// Injected ω [rad].
    pub omega: f64,
    /// Injected mean anomaly at the reference epoch [rad].
    pub mean_anomaly: f64,
    /// Simulated velocities at the design's epochs, with the total σ (stated ⊕ jitter).
    pub data: FitData,
}

/// The result of one estimator output on one trial.
#[derive(Debug, Clone, PartialEq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Outcome {
    /// An estimate.
    Estimate(EccentricityEstimate),
    /// The estimator failed; the reason in words.
    Failed(String),
    /// The estimator was not run on this trial (an extra trial for another estimator's
    /// calibration); counted neither as an estimate nor as a failure.
    Skipped,
}

impl Outcome {
    /// The estimate, if any.
    pub fn estimate(&self) -> Option<&EccentricityEstimate> {
        match self {
            Outcome::Estimate(e) => Some(e),
            Outcome::Failed(_) | Outcome::Skipped => None,
        }
    }

    /// The estimate when it may be counted in a statistic: present and, for an output with a
    /// convergence flag (`converged`, from [`OutputInfo::converged_index`]), from a run that
    /// met its convergence rule. A number from a run that did not is never quoted.
    ///
    /// [`OutputInfo::converged_index`]: super::estimators::OutputInfo::converged_index
    pub fn counted(&self, converged: Option<usize>) -> Option<&EccentricityEstimate> {
        self.estimate().filter(|e| !is_unconverged(e, converged))
    }

    /// True for an estimate from a run that did not meet its convergence rule.
    pub fn is_unconverged(&self, converged: Option<usize>) -> bool {
        self.estimate()
            .is_some_and(|e| is_unconverged(e, converged))
    }
}

fn is_unconverged(e: &EccentricityEstimate, converged: Option<usize>) -> bool {
    converged.is_some_and(|i| e.extra.get(i).is_some_and(|&flag| flag == 0.0))
}

/// Everything kept of one trial: the injected orbit and each output's outcome.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct TrialRecord {
    /// Trial index.
    pub trial: u64,
    /// Grid cell index.
    pub cell: usize,
    /// Injected eccentricity.
    pub eccentricity: f64,
    /// Injected semi-amplitude [m/s].
    pub semi_amplitude: f64,
    /// Injected ω [rad].
    pub omega: f64,
    /// Injected mean anomaly at the reference epoch [rad].
    pub mean_anomaly: f64,
    /// One outcome per estimator output, in the order of [`super::estimators::all_outputs`].
    pub outcomes: Vec<Outcome>,
}

/// Simulates trial `trial` of `design`.
///
/// From [`stream_rng`]`(design.seed, trial)`, in this order: ω uniform in [0, 2π) (only when the
/// design has no ω axis), the mean anomaly at the reference epoch uniform in [0, 2π), then one
/// standard normal deviate per epoch (Marsaglia & Bray 1964 polar method), scaled by
/// [`InjectionDesign::simulation_sigmas`] (√(σ_i² + jitter² + s_j²), s_j the fitted jitter of
/// the epoch's instrument). The velocity is the Keplerian of the cell plus the design's
/// background (the other companions, trend and offsets at their fitted values; zero when
/// absent) plus that noise; the data carry the uncertainties of
/// [`InjectionDesign::noise_sigmas`]. Returns the trial and the generator, positioned after
/// these draws.
pub fn simulate_trial(
    design: &InjectionDesign,
    trial: u64,
) -> Result<(SimulatedTrial, SimRng), InjectError> {
    if !design.has_trial(trial) {
        return Err(InjectError::TrialOutOfRange {
            trial,
            n_trials: design.n_trials(),
        });
    }
    let cell = design.cell(design.cell_of_trial(trial));
    let mut rng = stream_rng(design.seed, trial);
    let omega = match cell.omega {
        Some(w) => w,
        None => random_angle(&mut rng),
    };
    let mean_anomaly = random_angle(&mut rng);
    let t_ref = design.reference_time();
    let shifted: Vec<f64> = design.sampling.times.iter().map(|t| t - t_ref).collect();
    let mut shape = vec![0.0; shifted.len()];
    if !keplerian_shape(
        &shifted,
        design.period,
        cell.eccentricity,
        omega,
        mean_anomaly + omega,
        &mut shape,
    ) {
        return Err(InjectError::Model {
            period: design.period,
            eccentricity: cell.eccentricity,
        });
    }
    let sigmas = design.noise_sigmas();
    let noise = design.simulation_sigmas();
    let background = &design.model.background;
    let velocities: Vec<f64> = shape
        .iter()
        .zip(&noise)
        .enumerate()
        .map(|(i, (s, sigma))| {
            let signal = match background.get(i) {
                Some(b) => cell.semi_amplitude * s + b,
                None => cell.semi_amplitude * s,
            };
            signal + sigma * standard_normal(&mut rng)
        })
        .collect();
    let data = FitData::new(
        &design.sampling.times,
        &velocities,
        &sigmas,
        &design.sampling.instruments,
        &design.sampling.instrument_names,
    );
    Ok((
        SimulatedTrial {
            trial,
            cell,
            omega,
            mean_anomaly,
            data,
        },
        rng,
    ))
}

/// Runs every estimator on trial `trial`. Estimator `k` gets its own generator,
/// [`stream_rng`]`(s, k)` with `s` the next 64-bit draw of the trial's generator, so adding an
/// estimator changes no other estimator's numbers.
pub fn run_trial(
    design: &InjectionDesign,
    estimators: &[&dyn Estimator],
    trial: u64,
) -> Result<TrialRecord, InjectError> {
    let (simulated, mut rng) = simulate_trial(design, trial)?;
    let estimator_seed: u64 = rng.random();
    let mut outcomes = Vec::new();
    for (k, estimator) in estimators.iter().enumerate() {
        let n_outputs = estimator.outputs().len();
        let mut own_rng = stream_rng(estimator_seed, k as u64);
        match estimator.estimate(&simulated.data, design, &mut own_rng) {
            Ok(estimates) if estimates.len() == n_outputs => {
                outcomes.extend(estimates.into_iter().map(Outcome::Estimate));
            }
            Ok(estimates) => {
                let message = format!(
                    "estimator {} returned {} estimates for {} outputs",
                    estimator.name(),
                    estimates.len(),
                    n_outputs
                );
                outcomes.extend((0..n_outputs).map(|_| Outcome::Failed(message.clone())));
            }
            Err(err) => {
                outcomes.extend((0..n_outputs).map(|_| Outcome::Failed(err.to_string())));
            }
        }
    }
    Ok(TrialRecord {
        trial,
        cell: simulated.cell.index,
        eccentricity: simulated.cell.eccentricity,
        semi_amplitude: simulated.cell.semi_amplitude,
        omega: simulated.omega,
        mean_anomaly: simulated.mean_anomaly,
        outcomes,
    })
}

/// Runs the trials of `trial_range` in order, calling `observer` after each (for progress
/// reports or streaming), and returns their records. A range of base trials is clipped to the
/// design's base trials (a range of extra trials must lie inside one cell's block). The same
/// index always gives the same record, whatever the chunking.
pub fn run_trials(
    design: &InjectionDesign,
    estimators: &[&dyn Estimator],
    trial_range: Range<u64>,
    observer: &mut dyn FnMut(&TrialRecord),
) -> Result<Vec<TrialRecord>, InjectError> {
    design.validate()?;
    let end = if trial_range.start < design.n_trials() {
        trial_range.end.min(design.n_trials())
    } else {
        trial_range.end
    };
    let mut records = Vec::with_capacity(end.saturating_sub(trial_range.start) as usize);
    for trial in trial_range.start..end {
        let record = run_trial(design, estimators, trial)?;
        observer(&record);
        records.push(record);
    }
    Ok(records)
}

/// FNV-1a 64-bit hash (Fowler, Noll & Vo; common practice), stable across platforms.
fn fnv1a(bytes: &[u8]) -> u64 {
    let mut hash: u64 = 0xcbf2_9ce4_8422_2325;
    for &b in bytes {
        hash ^= u64::from(b);
        hash = hash.wrapping_mul(0x0000_0100_0000_01b3);
    }
    hash
}

/// A fingerprint of every setting that decides the trials' numbers: the design and each
/// estimator's settings, as 16 hex digits. A resumed run must have the same fingerprint.
pub fn settings_fingerprint(design: &InjectionDesign, estimators: &[&dyn Estimator]) -> String {
    let mut text = design.settings_text();
    for e in estimators {
        text.push('|');
        text.push_str(e.name());
        text.push(':');
        text.push_str(&e.settings_text());
    }
    format!("{:016x}", fnv1a(text.as_bytes()))
}

#[cfg(test)]
pub(crate) mod tests {
    use super::*;
    use crate::inject::design::{Sampling, Schedule, Spacing};
    use crate::inject::estimators::LeastSquaresEstimator;

    /// A small schedule design (24 random epochs, two cells, three trials each) shared by the
    /// engine's and the trial file's tests.
    pub(crate) fn design() -> InjectionDesign {
        InjectionDesign {
            sampling: Sampling::from_schedule(
                &Schedule {
                    n_epochs: 24,
                    baseline: 200.0,
                    start_time: 1000.0,
                    spacing: Spacing::Random,
                    uncertainty: 3.0,
                },
                11,
            )
            .unwrap(),
            period: 13.7,
            eccentricities: vec![0.0, 0.4],
            semi_amplitudes: vec![30.0],
            omegas: vec![],
            jitter: 1.0,
            trials_per_cell: 3,
            seed: 99,
            model: crate::inject::TrialModel::default(),
        }
    }

    #[test]
    fn chunks_give_the_same_records_as_one_run() {
        let d = design();
        let lsq = LeastSquaresEstimator::default();
        let estimators: [&dyn Estimator; 1] = [&lsq];
        let mut seen = 0;
        let whole = run_trials(&d, &estimators, 0..6, &mut |_| seen += 1).unwrap();
        assert_eq!(seen, 6);
        let mut parts = run_trials(&d, &estimators, 4..6, &mut |_| {}).unwrap();
        let mut first = run_trials(&d, &estimators, 0..4, &mut |_| {}).unwrap();
        first.append(&mut parts);
        assert_eq!(whole, first);
        // Ranges past the end are clipped.
        assert_eq!(
            run_trials(&d, &estimators, 5..100, &mut |_| {})
                .unwrap()
                .len(),
            1
        );
    }

    #[test]
    fn simulated_noise_has_the_stated_scatter() {
        // Residuals about the injected model are σ_total · N(0, 1): over 400 trials × 24 epochs
        // the mean square of the normalised residuals is 1 within √(2/9600) = 0.0144 (normal
        // theory, common practice); tolerance four standard errors.
        let mut d = design();
        d.trials_per_cell = 200;
        let t_ref = d.reference_time();
        let shifted: Vec<f64> = d.sampling.times.iter().map(|t| t - t_ref).collect();
        let sigmas = d.noise_sigmas();
        let (mut sum_sq, mut n) = (0.0, 0);
        for trial in 0..d.n_trials() {
            let (sim, _) = simulate_trial(&d, trial).unwrap();
            let mut shape = vec![0.0; shifted.len()];
            assert!(keplerian_shape(
                &shifted,
                d.period,
                sim.cell.eccentricity,
                sim.omega,
                sim.mean_anomaly + sim.omega,
                &mut shape
            ));
            for ((v, s), sigma) in sim.data.velocities().iter().zip(&shape).zip(&sigmas) {
                let z = (v - sim.cell.semi_amplitude * s) / sigma;
                sum_sq += z * z;
                n += 1;
            }
        }
        let mean_sq = sum_sq / n as f64;
        assert!(
            (mean_sq - 1.0).abs() < 4.0 * libm::sqrt(2.0 / n as f64),
            "{mean_sq}"
        );
        // Extra trials of a cell are valid; indices beyond every cell's block are not.
        assert!(simulate_trial(&d, d.n_trials()).is_ok());
        let beyond = d.n_trials() + d.n_cells() as u64 * crate::inject::design::EXTRA_BLOCK;
        assert!(simulate_trial(&d, beyond).is_err());
    }

    #[test]
    fn fingerprint_changes_with_any_setting() {
        let d = design();
        let lsq = LeastSquaresEstimator::default();
        let a = settings_fingerprint(&d, &[&lsq]);
        assert_eq!(a, settings_fingerprint(&d.clone(), &[&lsq]));
        let mut d2 = d.clone();
        d2.seed += 1;
        assert_ne!(a, settings_fingerprint(&d2, &[&lsq]));
        let mut lsq2 = lsq.clone();
        lsq2.settings.n_omega_starts = 3;
        assert_ne!(a, settings_fingerprint(&d, &[&lsq2]));
        assert_eq!(a.len(), 16);
    }
}
