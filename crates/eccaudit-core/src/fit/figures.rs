//! Numbers behind the least-squares fit's figures: the period search's periodogram, the fitted
//! solution as an [`RvModel`], and the phase fold of one companion with its residuals.
//!
//! The plot crate only draws; everything a figure shows that is computed (phases, velocities
//! with the other terms removed, model curves, residuals) is computed here, once, for the
//! command line and the page alike.

use serde::Serialize;
use thiserror::Error;

use super::multistart::centred_velocities;
use super::report::Solution;
use super::FitData;
use super::FitOptions;
use crate::kepler::reduce_angle_signed;
use crate::model::RvModel;
use crate::model::{decode_companion, EccentricityCoordinates, ParameterLayout};
use crate::orbit::OrbitalElements;
use crate::periodogram::{
    periodogram, GridOptions, Periodogram, PeriodogramError, PeriodogramOptions,
};

/// Fewest points accepted for a model curve.
pub const MIN_CURVE_POINTS: usize = 2;

/// What can go wrong while preparing a figure of a fit.
#[derive(Debug, Clone, PartialEq, Error)]
pub enum FigureError {
    /// The companion asked for is not in the solution.
    #[error("companion {companion} does not exist: the fit has {n_companions} companion(s)")]
    NoSuchCompanion {
        /// 1-based companion number asked for.
        companion: usize,
        /// Companions in the solution.
        n_companions: usize,
    },
    /// The solution was not fitted to these data (instrument count or parameter count differ).
    #[error("the solution does not belong to these data: {what}")]
    Mismatch {
        /// What differs.
        what: String,
    },
    /// The fitted elements cannot be evaluated (e.g. a non-finite value).
    #[error("the fitted elements of companion {companion} cannot be evaluated: {reason}")]
    Elements {
        /// 1-based companion number (0 for the offsets and trend).
        companion: usize,
        /// Why.
        reason: String,
    },
    /// Too few points asked for in a model curve.
    #[error("a model curve needs at least {MIN_CURVE_POINTS} points, {n_points} asked for")]
    CurveTooShort {
        /// Points asked for.
        n_points: usize,
    },
    /// The periodogram could not be computed.
    #[error("periodogram: {0}")]
    Periodogram(PeriodogramError),
}

// The message above already prints the inner error, so it is not also reported as `source()`
// (which would make a printed chain say it twice).
impl From<PeriodogramError> for FigureError {
    fn from(err: PeriodogramError) -> Self {
        Self::Periodogram(err)
    }
}

/// The generalised Lomb–Scargle periodogram (Zechmeister & Kürster 2009, A&A 496, 577) that the
/// fit's period search for the first companion examines: velocities minus each instrument's
/// weighted mean, on the grid set by `options.limits` and `options.oversampling`, with Baluev
/// (2008, MNRAS 385, 1279) false-alarm levels. Its best peak is the `best_period` of the report's
/// first period-search summary.
pub fn search_periodogram(
    data: &FitData,
    options: &FitOptions,
) -> Result<Periodogram, FigureError> {
    let values = centred_velocities(data);
    let pg_options = PeriodogramOptions {
        grid: GridOptions {
            limits: options.limits,
            oversampling: options.oversampling,
            ..GridOptions::default()
        },
        n_top_peaks: options.n_peaks.max(1),
    };
    Ok(periodogram(
        data.times(),
        &values,
        data.uncertainties(),
        &pg_options,
    )?)
}

/// The layout that `solution.parameters` follow.
fn layout_of(solution: &Solution) -> Result<ParameterLayout, FigureError> {
    let mut layout = ParameterLayout::new(
        solution.companions.len(),
        solution.instruments.len(),
        solution.trend.is_some(),
    );
    layout.circular = solution
        .companions
        .iter()
        .map(|c| c.held_circular)
        .collect();
    if layout.n_params() != solution.parameters.len() {
        return Err(FigureError::Mismatch {
            what: format!(
                "{} parameters stored, {} expected from the companions, instruments and trend",
                solution.parameters.len(),
                layout.n_params()
            ),
        });
    }
    Ok(layout)
}

/// Each companion's elements from a solution's parameter vector (e cos ω, e sin ω coordinates,
/// mean longitude λ at `reference_time`), with T_p = t_ref − M₀ P / 2π and M₀ = λ − ω reduced to
/// (−π, π]: the time of periastron nearest t_ref, as in the report.
pub fn solution_elements(
    solution: &Solution,
    reference_time: f64,
) -> Result<Vec<OrbitalElements>, FigureError> {
    let layout = layout_of(solution)?;
    (0..layout.n_companions())
        .map(|c| {
            let comp =
                decode_companion(&layout, EccentricityCoordinates::E, &solution.parameters, c);
            let omega = comp.omega();
            OrbitalElements::from_mean_anomaly_at_epoch(
                comp.period,
                comp.semi_amplitude.abs(),
                comp.eccentricity,
                omega,
                reduce_angle_signed(comp.mean_longitude - omega),
                reference_time,
            )
            .map_err(|err| FigureError::Elements {
                companion: c + 1,
                reason: err.to_string(),
            })
        })
        .collect()
}

/// The fitted solution as an [`RvModel`]: its companions, one γ per instrument (in the order of
/// the data's instruments), and the trend about `reference_time` (the report's t_ref).
pub fn solution_model(solution: &Solution, reference_time: f64) -> Result<RvModel, FigureError> {
    let elements = solution_elements(solution, reference_time)?;
    let offsets = solution
        .instruments
        .iter()
        .map(|i| i.offset.value)
        .collect();
    let trend = solution.trend.map_or(0.0, |t| t.value);
    RvModel::new(elements, offsets, trend, reference_time).map_err(|err| FigureError::Elements {
        companion: 0,
        reason: err.to_string(),
    })
}

/// Where phase 0 of a fold lies.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum PhaseZero {
    /// At the time of periastron T_p.
    Periastron,
    /// For an orbit held circular: at the time of maximum velocity (T_p with the convention ω = 0).
    MaximumVelocity,
}

/// One companion's signal folded on its fitted period.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PhaseFold {
    /// 1-based companion number.
    pub companion: usize,
    /// Fitted period P [d].
    pub period: f64,
    /// Epoch of phase 0 [d] (T_p).
    pub zero_epoch: f64,
    /// What phase 0 is.
    pub zero: PhaseZero,
    /// Phase of each epoch, (t − T_p)/P modulo 1, in [0, 1).
    pub phases: Vec<f64>,
    /// Each velocity minus its instrument's γ, the trend and the other companions [m/s].
    pub velocities: Vec<f64>,
    /// Error bar of each velocity: √(σ² + jitter²) with the instrument's fitted jitter (σ alone
    /// when no jitter was fitted) [m/s].
    pub errors: Vec<f64>,
    /// Instrument index of each epoch.
    pub instruments: Vec<usize>,
    /// Residual of each epoch from the full model [m/s].
    pub residuals: Vec<f64>,
    /// Phases of the model curve, evenly spaced over [0, 1].
    pub curve_phases: Vec<f64>,
    /// This companion's model velocity at `curve_phases` [m/s].
    pub curve_velocities: Vec<f64>,
}

/// Folds `data` on companion `companion` (1-based) of `solution`: each velocity with its
/// instrument's γ, the trend and the other companions' Keplerian velocities removed, at phase
/// (t − T_p)/P mod 1; the residuals from the full model; and the companion's model curve at
/// `n_curve` evenly spaced phases. Phase folding is common practice.
pub fn phase_fold(
    data: &FitData,
    solution: &Solution,
    reference_time: f64,
    companion: usize,
    n_curve: usize,
) -> Result<PhaseFold, FigureError> {
    let n_companions = solution.companions.len();
    if companion == 0 || companion > n_companions {
        return Err(FigureError::NoSuchCompanion {
            companion,
            n_companions,
        });
    }
    if n_curve < MIN_CURVE_POINTS {
        return Err(FigureError::CurveTooShort { n_points: n_curve });
    }
    if data.n_instruments() != solution.instruments.len() {
        return Err(FigureError::Mismatch {
            what: format!(
                "{} instrument(s) in the data, {} in the solution",
                data.n_instruments(),
                solution.instruments.len()
            ),
        });
    }
    let elements = solution_elements(solution, reference_time)?;
    let full = solution_model(solution, reference_time)?;
    let model_error = |err: crate::model::ModelError| FigureError::Elements {
        companion,
        reason: err.to_string(),
    };
    let own = RvModel::new(
        vec![elements[companion - 1]],
        vec![0.0],
        0.0,
        reference_time,
    )
    .map_err(model_error)?;
    let others: Vec<OrbitalElements> = elements
        .iter()
        .enumerate()
        .filter(|&(c, _)| c + 1 != companion)
        .map(|(_, el)| *el)
        .collect();
    let others = RvModel::new(others, vec![0.0], 0.0, reference_time).map_err(model_error)?;
    let this = elements[companion - 1];
    let (period, zero_epoch) = (this.period(), this.time_of_periastron());
    let phase_of = |t: f64| {
        let cycles = (t - zero_epoch) / period;
        let phase = cycles - libm::floor(cycles);
        // Rounding can give exactly 1 for a tiny negative fraction.
        if phase >= 1.0 {
            0.0
        } else {
            phase
        }
    };
    let trend = solution.trend.map_or(0.0, |t| t.value);
    let n = data.n_points();
    let (mut phases, mut velocities, mut errors, mut residuals) = (
        Vec::with_capacity(n),
        Vec::with_capacity(n),
        Vec::with_capacity(n),
        Vec::with_capacity(n),
    );
    for i in 0..n {
        let t = data.times()[i];
        let instrument = data.instruments()[i];
        let fitted = &solution.instruments[instrument];
        let v = data.velocities()[i];
        phases.push(phase_of(t));
        velocities.push(
            v - fitted.offset.value - trend * (t - reference_time) - others.keplerian_velocity(t),
        );
        let sigma = data.uncertainties()[i];
        let jitter = fitted.jitter.unwrap_or(0.0);
        errors.push(libm::sqrt(sigma * sigma + jitter * jitter));
        residuals.push(v - full.velocity(t, instrument).map_err(model_error)?);
    }
    let curve_phases: Vec<f64> = (0..n_curve)
        .map(|k| k as f64 / (n_curve - 1) as f64)
        .collect();
    let curve_times: Vec<f64> = curve_phases
        .iter()
        .map(|phase| zero_epoch + phase * period)
        .collect();
    let mut curve_velocities = vec![0.0; n_curve];
    own.velocities_one_instrument(&curve_times, 0, &mut curve_velocities)
        .map_err(model_error)?;
    Ok(PhaseFold {
        companion,
        period,
        zero_epoch,
        zero: if solution.companions[companion - 1].held_circular {
            PhaseZero::MaximumVelocity
        } else {
            PhaseZero::Periastron
        },
        phases,
        velocities,
        errors,
        instruments: data.instruments().to_vec(),
        residuals,
        curve_phases,
        curve_velocities,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::fit::fit_orbit;
    use crate::table::{parse_table, ReadOptions};
    use approx::assert_relative_eq;

    fn corvin4() -> FitData {
        let text = include_str!("../../../../demo-data/corvin4-eccentric.tsv");
        let options = ReadOptions {
            source_name: "corvin4-eccentric.tsv".into(),
            velocity_unit: None,
            time: None,
            delimiter: None,
        };
        FitData::from_table(&parse_table(text, &options).unwrap())
    }

    /// Noise-free velocities of two companions seen by two instruments, with a trend.
    fn two_companions() -> (FitData, [OrbitalElements; 2]) {
        let inner = OrbitalElements::new(11.7, 30.0, 0.3, 1.2, 2_460_002.0).unwrap();
        let outer = OrbitalElements::new(83.0, 12.0, 0.1, -2.0, 2_460_040.0).unwrap();
        let model = RvModel::new(vec![inner, outer], vec![-5.0, 40.0], 0.02, 2_460_150.0).unwrap();
        let n = 70;
        let times: Vec<f64> = (0..n)
            .map(|i| 2_460_000.0 + 300.0 * (i as f64 + 0.37 * ((i * 7) % 5) as f64) / n as f64)
            .collect();
        let instruments: Vec<usize> = (0..n).map(|i| usize::from(i % 3 == 0)).collect();
        let mut velocities = vec![0.0; n];
        model
            .velocities(&times, &instruments, &mut velocities)
            .unwrap();
        let data = FitData::new(
            &times,
            &velocities,
            &vec![1.0; n],
            &instruments,
            &["north".into(), "south".into()],
        );
        (data, [inner, outer])
    }

    #[test]
    fn periodogram_best_peak_is_the_reports_first_search_period() {
        let data = corvin4();
        let options = FitOptions::default();
        let report = fit_orbit(&data, &options).unwrap();
        let pg = search_periodogram(&data, &options).unwrap();
        // Same grid and values as the search: the very same number.
        assert_eq!(
            Some(pg.best_peak.period),
            report.period_search[0].best_period
        );
        assert_eq!(
            Some(pg.best_peak.false_alarm_probability),
            report.period_search[0].false_alarm_probability
        );
        assert!(!pg.fap_thresholds.is_empty());
    }

    #[test]
    fn fold_residuals_reproduce_the_reported_rms() {
        // The residuals of the fold come from `solution_model`, the report's rms from the
        // fit's own model code: they must agree to rounding (relative 1e-9).
        let data = corvin4();
        let report = fit_orbit(&data, &FitOptions::default()).unwrap();
        let solution = report.adopted_solution();
        let fold = phase_fold(&data, solution, report.reference_time, 1, 200).unwrap();
        let rms = libm::sqrt(
            fold.residuals.iter().map(|r| r * r).sum::<f64>() / fold.residuals.len() as f64,
        );
        assert_relative_eq!(rms, solution.rms, max_relative = 1e-9);
        assert_eq!(fold.phases.len(), data.n_points());
        assert!(fold.phases.iter().all(|p| (0.0..1.0).contains(p)));
        assert_eq!(fold.zero, PhaseZero::Periastron);
        // Phase 0 is the report's own T_p (the periastron nearest t_ref), to rounding.
        assert_relative_eq!(
            fold.zero_epoch,
            solution.companions[0].time_of_periastron.value,
            max_relative = 1e-12
        );
        // With one companion and one instrument, folded velocity = model + residual.
        let own = solution_elements(solution, report.reference_time).unwrap()[0];
        for i in 0..data.n_points() {
            let t = data.times()[i];
            assert_relative_eq!(
                fold.velocities[i],
                own.radial_velocity(t) + fold.residuals[i],
                epsilon = 1e-9
            );
        }
    }

    #[test]
    fn fold_of_noise_free_two_companion_data_recovers_each_signal() {
        let (data, truth) = two_companions();
        let options = FitOptions {
            n_companions: 2,
            trend: true,
            ..FitOptions::default()
        };
        let report = fit_orbit(&data, &options).unwrap();
        let solution = &report.eccentric;
        for (c, el) in truth.iter().enumerate() {
            let fold = phase_fold(&data, solution, report.reference_time, c + 1, 401).unwrap();
            // Noise-free data: every residual vanishes (to the fit's tolerance, 1e-6 m/s) and
            // each folded velocity is that companion's true velocity alone.
            for i in 0..data.n_points() {
                assert!(fold.residuals[i].abs() < 1e-6, "{}", fold.residuals[i]);
                assert_relative_eq!(
                    fold.velocities[i],
                    el.radial_velocity(data.times()[i]),
                    epsilon = 1e-6
                );
            }
            // At phase 0 (periastron, ν = 0) the star's velocity is K (1 + e) cos ω:
            // v = K [cos(ν + ω) + e cos ω] (common practice; the textbook RV equation).
            let e = el.eccentricity().value();
            let at_periastron = el.semi_amplitude() * (1.0 + e) * libm::cos(el.omega());
            assert_relative_eq!(fold.curve_velocities[0], at_periastron, epsilon = 1e-6);
            assert_relative_eq!(fold.curve_velocities[400], at_periastron, epsilon = 1e-6);
            assert_eq!(fold.curve_phases[200], 0.5);
        }
    }

    #[test]
    fn bad_requests_are_typed_errors() {
        let (data, _) = two_companions();
        let report = fit_orbit(
            &data,
            &FitOptions {
                n_companions: 2,
                trend: true,
                ..FitOptions::default()
            },
        )
        .unwrap();
        let solution = &report.eccentric;
        assert_eq!(
            phase_fold(&data, solution, report.reference_time, 3, 100).unwrap_err(),
            FigureError::NoSuchCompanion {
                companion: 3,
                n_companions: 2
            }
        );
        assert_eq!(
            phase_fold(&data, solution, report.reference_time, 1, 1).unwrap_err(),
            FigureError::CurveTooShort { n_points: 1 }
        );
        let one_instrument = FitData::new(
            data.times(),
            data.velocities(),
            data.uncertainties(),
            &vec![0; data.n_points()],
            &["only".into()],
        );
        assert!(matches!(
            phase_fold(&one_instrument, solution, report.reference_time, 1, 100),
            Err(FigureError::Mismatch { .. })
        ));
    }
}
