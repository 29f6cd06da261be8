//! What a fit returns: elements with formal errors, offsets, χ² statistics, the Lucy–Sweeney
//! test, the starts, and a readable text table.

use std::fmt;

use serde::{Deserialize, Serialize};

use super::goodness::chi_squared_p_value;
use super::jitter::JitterMethod;
use super::lucy_sweeney::{eccentricity_error, lucy_sweeney_wald, LucySweeney};
use super::{FitData, RvProblem};
use crate::constants::{ASTRONOMICAL_UNIT, JUPITER_MASS_IN_SOLAR_MASSES};
use crate::kepler::{reduce_angle, reduce_angle_signed, TWO_PI};
use crate::lsq::{
    covariance_from_jacobian, CovarianceEstimate, CovarianceStatus, DMatrix, LeastSquaresProblem,
    Termination,
};
use crate::model::{decode_companion, EccentricityCoordinates, ParameterLayout};
use crate::orbit::OrbitalElements;

const DEG: f64 = 180.0 / core::f64::consts::PI;

/// A value with its formal (1σ) error, when one could be computed.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Estimate {
    /// The value.
    pub value: f64,
    /// Its 1σ formal error from the covariance (delta method for derived quantities).
    pub error: Option<f64>,
}

/// One companion's fitted elements.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct CompanionFit {
    /// Period P [d].
    pub period: Estimate,
    /// Semi-amplitude K [m/s] (≥ 0).
    pub semi_amplitude: Estimate,
    /// Eccentricity e (0 when held circular).
    pub eccentricity: Estimate,
    /// Argument of periastron of the star ω [deg] in (−180, 180] (0 when circular).
    pub omega_deg: Estimate,
    /// e cos ω.
    pub e_cos_omega: Estimate,
    /// e sin ω.
    pub e_sin_omega: Estimate,
    /// Mean longitude λ = M₀ + ω at the reference epoch [deg].
    pub mean_longitude_deg: Estimate,
    /// Mean anomaly M₀ at the reference epoch [deg] in (−180, 180].
    pub mean_anomaly_deg: Estimate,
    /// Time of periastron T_p [d] nearest the reference epoch (for a circular orbit, with the
    /// convention ω = 0: the time of maximum velocity).
    pub time_of_periastron: Estimate,
    /// True when the orbit was held circular.
    pub held_circular: bool,
    /// The Lucy–Sweeney test (eccentric solutions only).
    pub lucy_sweeney: Option<LucySweeney>,
    /// Mass function f(m) [M_sun].
    pub mass_function: f64,
    /// a₁ sin i of the star [AU].
    pub star_a_sin_i_au: f64,
    /// m sin i [M_sun], when a stellar mass was given.
    pub minimum_mass_msun: Option<f64>,
    /// m sin i [Jupiter masses], when a stellar mass was given.
    pub minimum_mass_mjup: Option<f64>,
    /// Semi-major axis of the relative orbit for m = m sin i [AU], when a stellar mass was given.
    pub semi_major_axis_au: Option<f64>,
}

/// One instrument's offset, jitter and scatter.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct InstrumentFit {
    /// Name from the table.
    pub name: String,
    /// Epochs.
    pub n_points: usize,
    /// Offset γ [m/s].
    pub offset: Estimate,
    /// Jitter [m/s] when fitted (method in [`Solution::jitter_method`]).
    pub jitter: Option<f64>,
    /// Unweighted rms of the residuals [m/s].
    pub rms: f64,
}

/// One least-squares solution (eccentric or circular).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Solution {
    /// The companions.
    pub companions: Vec<CompanionFit>,
    /// The instruments.
    pub instruments: Vec<InstrumentFit>,
    /// Linear trend [m/s/d] about the reference epoch, when fitted.
    pub trend: Option<Estimate>,
    /// χ² = Σ ((v − model)/σ)² with σ including jitter.
    pub chi_squared: f64,
    /// Fitted parameters (orbit, offsets, trend; plus jitters when fitted).
    pub n_params: usize,
    /// Degrees of freedom N − n_params.
    pub dof: usize,
    /// χ²/dof.
    pub reduced_chi_squared: Option<f64>,
    /// P(χ²_dof ≥ χ²): the χ² goodness-of-fit p-value ([`chi_squared_p_value`]); None when
    /// dof = 0. With fitted jitters χ² is close to dof by construction, so a small p then means
    /// the model itself misses something.
    pub chi_squared_p: Option<f64>,
    /// How the jitters were estimated, when fitted.
    pub jitter_method: Option<JitterMethod>,
    /// Unweighted rms of all residuals [m/s].
    pub rms: f64,
    /// True when the final Levenberg–Marquardt run met a convergence test (or stopped at machine
    /// precision) and the jitter iteration, if any, converged.
    pub converged: bool,
    /// Why the final Levenberg–Marquardt run stopped.
    pub termination: Termination,
    /// Jitter iterations used (when fitted).
    pub jitter_iterations: Option<usize>,
    /// State of the covariance.
    pub covariance_status: CovarianceStatus,
    /// Names of the parameters of `parameters` / `covariance`, in order.
    pub parameter_names: Vec<String>,
    /// Parameter vector with eccentricities as (e cos ω, e sin ω), angles in radians.
    pub parameters: Vec<f64>,
    /// Covariance (row-major) of `parameters`, conditional on the jitter.
    pub covariance: Option<Vec<f64>>,
}

/// The starting period candidates of one companion.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PeriodSearchSummary {
    /// 1-based companion number.
    pub companion: usize,
    /// True when the starting period was given by the user.
    pub given: bool,
    /// Highest periodogram peak [d] (of the residuals of the previous companions).
    pub best_period: Option<f64>,
    /// Its normalised power.
    pub best_power: Option<f64>,
    /// Its Baluev (2008) false-alarm probability.
    pub false_alarm_probability: Option<f64>,
    /// Periods used as starts [d].
    pub candidate_periods: Vec<f64>,
}

/// The outcome of one start.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct StartOutcome {
    /// 1-based companion number being searched.
    pub companion: usize,
    /// Starting period [d].
    pub start_period: f64,
    /// Starting eccentricity.
    pub start_eccentricity: f64,
    /// Starting ω [deg].
    pub start_omega_deg: f64,
    /// χ² reached (NaN if the start could not be fitted).
    pub chi_squared: f64,
    /// Period reached [d].
    pub period: f64,
    /// Eccentricity reached.
    pub eccentricity: f64,
    /// Whether LM met a convergence test.
    pub converged: bool,
    /// Whether it reached the best χ² of its stage (within [`super::multistart::SAME_MINIMUM`]).
    pub reached_best: bool,
}

/// Which solution the Lucy–Sweeney test adopts.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Adopted {
    /// All eccentricities significant.
    Eccentric,
    /// At least one companion kept circular.
    Circular,
}

/// The complete result of [`super::fit_orbit`].
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct FitReport {
    /// Epochs.
    pub n_points: usize,
    /// Reference epoch of λ, M₀ and the trend [d].
    pub reference_time: f64,
    /// Period search per companion.
    pub period_search: Vec<PeriodSearchSummary>,
    /// The minimum-χ² solution with all eccentricities free.
    pub eccentric: Solution,
    /// The refit with insignificant eccentricities held at 0, when any.
    pub circular: Option<Solution>,
    /// Which solution the Lucy–Sweeney test adopts.
    pub adopted: Adopted,
    /// Starts run (all stages).
    pub n_starts: usize,
    /// Starts of the last stage that reached its best χ².
    pub n_reached_best: usize,
    /// Starts of the last stage.
    pub n_starts_last_stage: usize,
    /// Every start.
    pub starts: Vec<StartOutcome>,
    /// Things the user should know (non-convergence, singular covariance, …).
    pub warnings: Vec<String>,
}

impl FitReport {
    /// The adopted solution.
    pub fn adopted_solution(&self) -> &Solution {
        match (&self.adopted, &self.circular) {
            (Adopted::Circular, Some(c)) => c,
            _ => &self.eccentric,
        }
    }
}

/// Flips K < 0 to K > 0 (ω → ω + π, λ → λ + π: the same curve), in E coordinates.
pub(crate) fn normalise_signs(layout: &ParameterLayout, params: &mut [f64]) {
    for c in 0..layout.n_companions() {
        let start = layout.companion_start(c);
        if params[start + 1] < 0.0 {
            params[start + 1] = -params[start + 1];
            if !layout.circular[c] {
                params[start + 2] = -params[start + 2];
                params[start + 3] = -params[start + 3];
            }
            let l = layout.lambda_index(c);
            params[l] = reduce_angle_signed(params[l] + core::f64::consts::PI);
        } else {
            let l = layout.lambda_index(c);
            params[l] = reduce_angle_signed(params[l]);
        }
    }
}

/// Inputs of [`build_solution`] beyond the parameters.
pub(crate) struct SolutionContext<'a> {
    pub data: &'a FitData,
    pub layout: &'a ParameterLayout,
    pub jitter: Option<&'a [f64]>,
    pub jitter_iterations: Option<usize>,
    pub jitter_converged: bool,
    pub jitter_method: JitterMethod,
    pub termination: Termination,
    pub stellar_mass: Option<f64>,
    pub lucy_sweeney_threshold: f64,
    pub singular_tolerance: f64,
}

/// Builds a [`Solution`] from parameters in E coordinates, in named stages: the residuals,
/// χ² and covariance at the optimum ([`AtOptimum`]: `(JᵀJ)⁻¹` of the analytic Jacobian, see
/// [`covariance_from_jacobian`], in (P, K, e cos ω, e sin ω, λ, γ…, trend)); each companion's
/// elements with errors by the delta method, σ_e from
/// [`eccentricity_error`], the Lucy–Sweeney test in the 2-D Wald form ([`lucy_sweeney_wald`]) ([`companion_fit`]); each instrument's offset, jitter and scatter
/// ([`instrument_fits`]); then the counts and the χ² test.
pub(crate) fn build_solution(ctx: &SolutionContext, params_in: &[f64]) -> Solution {
    let layout = ctx.layout;
    let data = ctx.data;
    let mut params = params_in.to_vec();
    normalise_signs(layout, &mut params);
    let at = AtOptimum::new(ctx, &params);
    let errors = Errors {
        covariance: at.estimate.covariance.as_deref(),
        n_params: layout.n_params(),
        params: &params,
    };
    let mut names = Vec::new();
    let companions = (0..layout.n_companions())
        .map(|c| companion_fit(ctx, &errors, c, &mut names))
        .collect();
    let instruments = instrument_fits(ctx, &errors, &at.raw_residuals, &mut names);
    let trend = layout.trend_index().map(|t| {
        names.push("trend".into());
        errors.estimate(t)
    });
    let n_jitter = if ctx.jitter.is_some() {
        data.n_instruments()
    } else {
        0
    };
    let total_params = layout.n_params() + n_jitter;
    let dof = data.n_points().saturating_sub(total_params);
    let converged = (ctx.termination.converged() || ctx.termination.at_machine_precision())
        && ctx.jitter_converged;
    let chi_squared = at.chi_squared;
    Solution {
        companions,
        instruments,
        trend,
        chi_squared,
        n_params: total_params,
        dof,
        reduced_chi_squared: (dof > 0).then(|| chi_squared / dof as f64),
        chi_squared_p: chi_squared_p_value(chi_squared, dof),
        jitter_method: ctx.jitter.map(|_| ctx.jitter_method),
        rms: rms(&at.raw_residuals),
        converged,
        termination: ctx.termination,
        jitter_iterations: ctx.jitter_iterations,
        covariance_status: at.estimate.status,
        parameter_names: names,
        parameters: params,
        covariance: at.estimate.covariance,
    }
}

/// The fit at its optimum: χ² of the weighted residuals, the raw residuals v − model [m/s] and
/// the covariance estimate.
struct AtOptimum {
    chi_squared: f64,
    raw_residuals: Vec<f64>,
    estimate: CovarianceEstimate,
}

impl AtOptimum {
    fn new(ctx: &SolutionContext, params: &[f64]) -> Self {
        let data = ctx.data;
        let mut problem = RvProblem::new(data, ctx.layout.clone(), EccentricityCoordinates::E);
        if let Some(j) = ctx.jitter {
            problem.set_jitter(j);
        }
        let n = data.n_points();
        let mut residuals = vec![0.0; n];
        problem.residuals(params, &mut residuals);
        let chi_squared: f64 = residuals.iter().map(|r| r * r).sum();
        let mut model = vec![0.0; n];
        problem.model_velocities(params, &mut model);
        let raw_residuals = data
            .velocities()
            .iter()
            .zip(&model)
            .map(|(v, m)| v - m)
            .collect();
        let mut jacobian = DMatrix::zeros(n, ctx.layout.n_params());
        problem.jacobian(params, &mut jacobian);
        Self {
            chi_squared,
            raw_residuals,
            estimate: covariance_from_jacobian(&jacobian, ctx.singular_tolerance),
        }
    }
}

/// Parameter values with their errors from the covariance (row-major, `n_params`²), when
/// there is one.
struct Errors<'a> {
    covariance: Option<&'a [f64]>,
    n_params: usize,
    params: &'a [f64],
}

impl Errors<'_> {
    fn variance(&self, i: usize) -> Option<f64> {
        self.covariance.map(|c| c[i * self.n_params + i])
    }

    fn covariance(&self, i: usize, j: usize) -> Option<f64> {
        self.covariance.map(|c| c[i * self.n_params + j])
    }

    /// σ of a derived quantity with gradient `grad` (index, ∂/∂p) by the delta method.
    fn delta(&self, grad: &[(usize, f64)]) -> Option<f64> {
        let c = self.covariance?;
        let mut s = 0.0;
        for &(i, gi) in grad {
            for &(j, gj) in grad {
                s += gi * gj * c[i * self.n_params + j];
            }
        }
        Some(libm::sqrt(s.max(0.0)))
    }

    /// Parameter `i` with its σ.
    fn estimate(&self, i: usize) -> Estimate {
        Estimate {
            value: self.params[i],
            error: self.variance(i).map(|v| libm::sqrt(v.max(0.0))),
        }
    }
}

/// Companion `c`'s reported elements (appending its parameter names to `names`): P, K,
/// e and ω with σ_e from [`eccentricity_error`] and the Lucy–Sweeney test, λ, M₀ and
/// T_p = t_ref − M₀ P / 2π with errors by the delta method, and the physical quantities.
fn companion_fit(
    ctx: &SolutionContext,
    errors: &Errors,
    c: usize,
    names: &mut Vec<String>,
) -> CompanionFit {
    let layout = ctx.layout;
    let params = errors.params;
    let start = layout.companion_start(c);
    let comp = decode_companion(layout, EccentricityCoordinates::E, params, c);
    let label = c + 1;
    names.push(format!("period_{label}"));
    names.push(format!("semi_amplitude_{label}"));
    if !layout.circular[c] {
        names.push(format!("e_cos_omega_{label}"));
        names.push(format!("e_sin_omega_{label}"));
    }
    names.push(format!("mean_longitude_{label}"));
    let l = layout.lambda_index(c);
    let period = comp.period;
    let omega = if layout.circular[c] {
        0.0
    } else {
        comp.omega()
    };
    let mean_anomaly = reduce_angle_signed(comp.mean_longitude - omega);
    let e = comp.eccentricity;
    let (cw, sw) = (comp.cos_omega, comp.sin_omega);
    let (eccentricity, omega_est, ecw, esw, lucy, m0_grad) = if layout.circular[c] {
        let zero = Estimate {
            value: 0.0,
            error: None,
        };
        (zero, zero, zero, zero, None, vec![(l, 1.0)])
    } else {
        let (ix, iy) = (start + 2, start + 3);
        let sigma_e = match (
            errors.variance(ix),
            errors.covariance(ix, iy),
            errors.variance(iy),
        ) {
            (Some(sxx), Some(sxy), Some(syy)) => {
                Some(eccentricity_error(params[ix], params[iy], sxx, sxy, syy))
            }
            _ => None,
        };
        let omega_error = if e > 0.0 {
            errors.delta(&[(ix, -sw / e), (iy, cw / e)])
        } else {
            None
        };
        // Lucy–Sweeney in the 2-D Wald form, from the full (e cos ω, e sin ω) covariance.
        let lucy = match (
            errors.variance(ix),
            errors.covariance(ix, iy),
            errors.variance(iy),
        ) {
            (Some(sxx), Some(sxy), Some(syy)) => Some(lucy_sweeney_wald(
                params[ix],
                params[iy],
                sxx,
                sxy,
                syy,
                ctx.lucy_sweeney_threshold,
            )),
            _ => None,
        };
        let m0_grad = if e > 0.0 {
            vec![(l, 1.0), (ix, sw / e), (iy, -cw / e)]
        } else {
            vec![(l, 1.0)]
        };
        (
            Estimate {
                value: e,
                error: sigma_e,
            },
            // Reported in [0°, 360°).
            Estimate {
                value: reduce_angle(omega) * DEG,
                error: omega_error.map(|v| v * DEG),
            },
            errors.estimate(ix),
            errors.estimate(iy),
            lucy,
            m0_grad,
        )
    };
    let m0_error = errors.delta(&m0_grad);
    // T_p = t_ref − M₀ P / 2π.
    let mut tp_grad: Vec<(usize, f64)> = m0_grad
        .iter()
        .map(|&(i, g)| (i, -g * period / TWO_PI))
        .collect();
    tp_grad.push((start, -mean_anomaly / TWO_PI));
    let tp = ctx.data.reference_time() - mean_anomaly * period / TWO_PI;
    let elements = OrbitalElements::new(
        period,
        comp.semi_amplitude.abs(),
        e.min(super::MAX_ECCENTRICITY),
        omega,
        tp,
    );
    let physical = Physical::of(elements.ok().as_ref(), ctx.stellar_mass);
    CompanionFit {
        period: errors.estimate(start),
        semi_amplitude: errors.estimate(start + 1),
        eccentricity,
        omega_deg: omega_est,
        e_cos_omega: ecw,
        e_sin_omega: esw,
        mean_longitude_deg: Estimate {
            value: comp.mean_longitude * DEG,
            error: errors.variance(l).map(|v| libm::sqrt(v.max(0.0)) * DEG),
        },
        mean_anomaly_deg: Estimate {
            value: mean_anomaly * DEG,
            error: m0_error.map(|v| v * DEG),
        },
        time_of_periastron: Estimate {
            value: tp,
            error: errors.delta(&tp_grad),
        },
        held_circular: layout.circular[c],
        lucy_sweeney: lucy,
        mass_function: physical.mass_function,
        star_a_sin_i_au: physical.a_sin_i_au,
        minimum_mass_msun: physical.minimum_mass_msun,
        minimum_mass_mjup: physical
            .minimum_mass_msun
            .map(|m| m / JUPITER_MASS_IN_SOLAR_MASSES),
        semi_major_axis_au: physical.semi_major_axis_au,
    }
}

/// A companion's physical quantities from its elements (NaN / None when the elements are not
/// valid; the masses and separation only with a stellar mass [M☉]).
struct Physical {
    mass_function: f64,
    a_sin_i_au: f64,
    minimum_mass_msun: Option<f64>,
    semi_major_axis_au: Option<f64>,
}

impl Physical {
    fn of(elements: Option<&OrbitalElements>, stellar_mass: Option<f64>) -> Self {
        match elements {
            Some(el) => {
                let m_min = stellar_mass.and_then(|m| el.minimum_companion_mass(m).ok());
                let a_rel = stellar_mass.and_then(|m| el.relative_semi_major_axis_edge_on(m).ok());
                Physical {
                    mass_function: el.mass_function(),
                    a_sin_i_au: el.star_semi_major_axis_sin_i() / ASTRONOMICAL_UNIT,
                    minimum_mass_msun: m_min,
                    semi_major_axis_au: a_rel.map(|a| a / ASTRONOMICAL_UNIT),
                }
            }
            None => Physical {
                mass_function: f64::NAN,
                a_sin_i_au: f64::NAN,
                minimum_mass_msun: None,
                semi_major_axis_au: None,
            },
        }
    }
}

/// Each instrument's offset with its σ, fitted jitter and rms of its residuals (appending the
/// offsets' parameter names to `names`).
fn instrument_fits(
    ctx: &SolutionContext,
    errors: &Errors,
    raw_residuals: &[f64],
    names: &mut Vec<String>,
) -> Vec<InstrumentFit> {
    let data = ctx.data;
    let offsets = ctx.layout.offsets_start();
    let mut instruments = Vec::new();
    for (j, name) in data.instrument_names().iter().enumerate() {
        names.push(format!("offset_{name}"));
        let own: Vec<f64> = raw_residuals
            .iter()
            .zip(data.instruments())
            .filter(|(_, &i)| i == j)
            .map(|(r, _)| *r)
            .collect();
        instruments.push(InstrumentFit {
            name: name.clone(),
            n_points: own.len(),
            offset: errors.estimate(offsets + j),
            jitter: ctx.jitter.map(|s| s[j]),
            rms: rms(&own),
        });
    }
    instruments
}

fn rms(values: &[f64]) -> f64 {
    if values.is_empty() {
        return f64::NAN;
    }
    libm::sqrt(values.iter().map(|v| v * v).sum::<f64>() / values.len() as f64)
}

struct Shown(Estimate, usize);

impl fmt::Display for Shown {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let p = self.1;
        match self.0.error {
            Some(e) => write!(f, "{:.p$} ± {:.p$}", self.0.value, e),
            None => write!(f, "{:.p$}", self.0.value),
        }
    }
}

impl fmt::Display for Solution {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        for (c, comp) in self.companions.iter().enumerate() {
            let tag = if comp.held_circular {
                " (held circular)"
            } else {
                ""
            };
            writeln!(f, "  companion {}{tag}", c + 1)?;
            writeln!(f, "    P      [d]     {}", Shown(comp.period, 6))?;
            writeln!(f, "    K      [m/s]   {}", Shown(comp.semi_amplitude, 3))?;
            if !comp.held_circular {
                writeln!(f, "    e              {}", Shown(comp.eccentricity, 4))?;
                writeln!(f, "    omega  [deg]   {}", Shown(comp.omega_deg, 2))?;
                writeln!(f, "    e cos w        {}", Shown(comp.e_cos_omega, 4))?;
                writeln!(f, "    e sin w        {}", Shown(comp.e_sin_omega, 4))?;
            }
            writeln!(
                f,
                "    Tp     [d]     {}",
                Shown(comp.time_of_periastron, 4)
            )?;
            writeln!(f, "    M0     [deg]   {}", Shown(comp.mean_anomaly_deg, 2))?;
            writeln!(
                f,
                "    lambda [deg]   {}",
                Shown(comp.mean_longitude_deg, 2)
            )?;
            writeln!(f, "    f(m)   [Msun]  {:.4e}", comp.mass_function)?;
            writeln!(f, "    a1 sin i [AU]  {:.4e}", comp.star_a_sin_i_au)?;
            if let (Some(ms), Some(mj)) = (comp.minimum_mass_msun, comp.minimum_mass_mjup) {
                writeln!(f, "    m sin i        {ms:.5} Msun = {mj:.4} Mjup")?;
            }
            if let Some(a) = comp.semi_major_axis_au {
                writeln!(f, "    a (m sin i) [AU] {a:.5}")?;
            }
            if let Some(ls) = &comp.lucy_sweeney {
                writeln!(
                    f,
                    "    Lucy-Sweeney   e = {:.4}, sigma_e = {:.4}, p = {:.3e} -> {}",
                    ls.eccentricity,
                    ls.eccentricity_error,
                    ls.probability,
                    if ls.significant {
                        "eccentricity significant"
                    } else {
                        "not significant (p > threshold): keep circular"
                    }
                )?;
            }
        }
        writeln!(
            f,
            "  instrument      n   gamma [m/s]              jitter [m/s]  rms [m/s]"
        )?;
        for inst in &self.instruments {
            let jitter = inst
                .jitter
                .map_or_else(|| "-".to_string(), |j| format!("{j:.3}"));
            writeln!(
                f,
                "  {:<12} {:>4}   {:<24} {:>12}  {:>9.3}",
                inst.name,
                inst.n_points,
                Shown(inst.offset, 3).to_string(),
                jitter,
                inst.rms
            )?;
        }
        if let Some(t) = self.trend {
            writeln!(f, "  trend [m/s/d]  {}", Shown(t, 5))?;
        }
        let reduced = self
            .reduced_chi_squared
            .map_or_else(|| "-".to_string(), |r| format!("{r:.4}"));
        let p = self
            .chi_squared_p
            .map_or_else(|| "-".to_string(), |p| format!("{p:.3e}"));
        writeln!(
            f,
            "  chi2 = {:.4}, dof = {}, reduced chi2 = {reduced}, chi2 p = {p}, rms = {:.3} m/s, parameters = {}",
            self.chi_squared, self.dof, self.rms, self.n_params
        )?;
        if let Some(method) = self.jitter_method {
            writeln!(f, "  jitter: {}", method.label())?;
        }
        writeln!(
            f,
            "  convergence: {} ({}); covariance: {}",
            if self.converged {
                "converged"
            } else {
                "NOT CONVERGED (best point found shown)"
            },
            self.termination,
            self.covariance_status
        )
    }
}

impl fmt::Display for FitReport {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        writeln!(
            f,
            "Least-squares orbit fit: {} epochs, reference epoch t_ref = {:.5} d",
            self.n_points, self.reference_time
        )?;
        for s in &self.period_search {
            if s.given {
                writeln!(
                    f,
                    "  companion {}: starting period given: {:.6} d",
                    s.companion, s.candidate_periods[0]
                )?;
            } else if let (Some(p), Some(fap)) = (s.best_period, s.false_alarm_probability) {
                let list: Vec<String> = s
                    .candidate_periods
                    .iter()
                    .map(|p| format!("{p:.5}"))
                    .collect();
                writeln!(
                    f,
                    "  companion {}: periodogram best P = {p:.6} d, FAP = {fap:.3e}; starting periods {} d",
                    s.companion,
                    list.join(", ")
                )?;
            }
        }
        writeln!(
            f,
            "  starts: {} in all; {} of the {} in the last stage reached the best chi2",
            self.n_starts, self.n_reached_best, self.n_starts_last_stage
        )?;
        writeln!(f)?;
        writeln!(f, "Eccentric solution (minimum chi2):")?;
        write!(f, "{}", self.eccentric)?;
        if let Some(c) = &self.circular {
            writeln!(f)?;
            writeln!(
                f,
                "Circular refit (Lucy & Sweeney 1971: eccentricity not significant):"
            )?;
            write!(f, "{c}")?;
        }
        writeln!(f)?;
        writeln!(
            f,
            "Adopted: {} solution",
            match self.adopted {
                Adopted::Eccentric => "eccentric",
                Adopted::Circular => "circular",
            }
        )?;
        for w in &self.warnings {
            writeln!(f, "warning: {w}")?;
        }
        Ok(())
    }
}
