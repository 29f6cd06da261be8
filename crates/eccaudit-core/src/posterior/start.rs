//! Where the walkers start: the least-squares optimum, a ball from its formal errors, and the
//! eccentricity moved inside the prior's truncation when the optimum lies outside it; other
//! least-squares local optima worth keeping (other periodogram peaks, other eccentricities)
//! as the centres of further ensembles ([`add_other_optima`]).

use serde::{Deserialize, Serialize};

use crate::fit::{fit_from_start, FitData, FitOptions, FitReport, Solution, StartPoint};
use crate::priors::EccentricityPrior;
use crate::random::{standard_normal, stream_rng};
use crate::sampler::LogDensity;

use super::target::{PosteriorSettings, RvPosterior};
use super::PosteriorError;

/// Start point and initial-ball scales for [`crate::sampler::EnsembleState::new`], in the
/// parameter order of [`super::RvPosterior`].
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PosteriorStart {
    /// The centre of the walker ball.
    pub point: Vec<f64>,
    /// One standard deviation of the ball per parameter.
    pub scales: Vec<f64>,
    /// True when the least-squares eccentricity lay outside the prior's truncation and the start
    /// was moved inside.
    pub eccentricity_moved: bool,
    /// True when the least-squares e says little (it sits within 10 % of e_max, or its formal
    /// error exceeds 0.15 or is unknown): the walkers then draw (√e cos ω, √e sin ω) from the
    /// prior instead of a ball around the optimum, so that a low-S/N optimum at the e = 0.99
    /// edge does not pin every walker there.
    #[serde(default)]
    pub disperse_eccentricity: bool,
    /// Other least-squares local optima (best first), each the centre of some ensembles'
    /// walkers (see [`ensemble_starts`]); empty when the fit found one optimum only.
    #[serde(default)]
    pub optima: Vec<StartOptimum>,
}

/// A least-squares local optimum other than the best, found by refitting from a start of the
/// multi-start fit that ended elsewhere (another periodogram peak, another eccentricity).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct StartOptimum {
    /// The point in the full layout of [`super::RvPosterior`] (companions, offsets, trend,
    /// jitters; the jitters those of the best optimum).
    pub point: Vec<f64>,
    /// The companion whose start differed (0-based).
    pub companion: usize,
    /// That companion's period at this optimum [d].
    pub period: f64,
    /// That companion's eccentricity at this optimum.
    pub eccentricity: f64,
    /// χ² at this optimum (stated uncertainties only).
    pub chi_squared: f64,
}

impl PosteriorStart {
    /// The mean longitudes of the start (centres of the λ windows of [`super::RvPosterior`]).
    pub fn lambda_centres(&self, settings: &PosteriorSettings, n_instruments: usize) -> Vec<f64> {
        let layout = settings.layout(n_instruments);
        (0..layout.n_companions())
            .map(|c| self.point[layout.lambda_index(c)])
            .collect()
    }
}

/// Fraction of the formal error used as the ball's scale: the stretch move widens a small ball
/// to the posterior's width in a few tens of steps, while a ball as wide as the posterior can put
/// walkers in distant low-probability corners that take long to return (common practice).
const BALL_FRACTION: f64 = 0.5;

/// The start from a least-squares report: the eccentric solution (the circular one when the
/// prior is circular and the report has it), converted to (h, k) = (√e cos ω, √e sin ω), the
/// fitted jitters (or a tenth of the median uncertainty when none was fitted) and the ball from
/// the formal errors with floors: P ≥ 10⁻⁶ P, K ≥ 10⁻³ K + 0.01 m/s, λ ∈ [10⁻³, 0.5] rad,
/// γ ≥ 10⁻³ of the median uncertainty, h and k ∈ [0.005, 0.1], jitter a tenth of the median
/// uncertainty. When e lies outside `[e_min, e_max]` of `prior`, (h, k) is moved along ω to
/// e = 0.9 e_max (above) or e_min + 0.1 (e_max − e_min) (below).
pub fn start_from_fit(
    report: &FitReport,
    settings: &PosteriorSettings,
    prior: &EccentricityPrior,
    uncertainties: &[f64],
    n_instruments: usize,
) -> Result<PosteriorStart, PosteriorError> {
    let layout = settings.layout(n_instruments);
    let solution: &Solution = if prior.is_circular() {
        report.circular.as_ref().unwrap_or(&report.eccentric)
    } else {
        &report.eccentric
    };
    if solution.companions.len() != layout.n_companions() {
        return Err(PosteriorError::CompanionCount {
            fitted: solution.companions.len(),
            sampled: layout.n_companions(),
        });
    }
    let mut sorted = uncertainties.to_vec();
    sorted.sort_by(f64::total_cmp);
    let median_sigma = sorted.get(sorted.len() / 2).copied().unwrap_or(1.0);
    let n_params = solution.parameters.len();
    let sigma = |i: usize| -> Option<f64> {
        solution
            .covariance
            .as_ref()
            .map(|c| libm::sqrt(c[i * n_params + i].max(0.0)))
            .filter(|s| s.is_finite() && *s > 0.0)
    };
    let dim = layout.n_params() + if settings.jitter { n_instruments } else { 0 };
    let mut point = vec![0.0; dim];
    let mut scales = vec![0.0; dim];
    let mut moved = false;
    let mut disperse = false;
    let (e_min, e_max) = prior.bounds();
    // Index into the solution's own parameter vector (E coordinates, its own circular flags).
    let mut from = 0usize;
    for c in 0..layout.n_companions() {
        let fitted = &solution.companions[c];
        let to = layout.companion_start(c);
        let period = fitted.period.value;
        let k = fitted.semi_amplitude.value;
        point[to] = period;
        scales[to] = (BALL_FRACTION * sigma(from).unwrap_or(1e-4 * period)).max(1e-6 * period);
        point[to + 1] = k;
        scales[to + 1] =
            (BALL_FRACTION * sigma(from + 1).unwrap_or(0.05 * k + 0.1)).max(1e-3 * k + 0.01);
        let fitted_len = if fitted.held_circular { 3 } else { 5 };
        let lambda_from = from + fitted_len - 1;
        let lambda = solution.parameters[lambda_from];
        let lambda_to = layout.lambda_index(c);
        point[lambda_to] = lambda;
        scales[lambda_to] = (BALL_FRACTION * sigma(lambda_from).unwrap_or(0.05)).clamp(1e-3, 0.5);
        if !layout.circular[c] {
            let (x, y, sxy) = if fitted.held_circular {
                (0.0, 0.0, None)
            } else {
                let s = match (sigma(from + 2), sigma(from + 3)) {
                    (Some(a), Some(b)) => Some(a.max(b)),
                    _ => None,
                };
                (
                    solution.parameters[from + 2],
                    solution.parameters[from + 3],
                    s,
                )
            };
            let e_fit = libm::hypot(x, y);
            let (cos_w, sin_w) = if e_fit > 0.0 {
                (x / e_fit, y / e_fit)
            } else {
                (1.0, 0.0)
            };
            let e_error = fitted.eccentricity.error.filter(|s| s.is_finite());
            if !fitted.held_circular && (e_fit >= 0.9 * e_max || e_error.is_none_or(|s| s > 0.15)) {
                disperse = true;
            }
            let mut e = e_fit;
            if e > e_max || e >= 0.95 * e_max {
                e = 0.9 * e_max;
                moved |= e_fit > e_max;
            }
            if e < e_min || (e_min > 0.0 && e <= e_min) {
                e = e_min + 0.1 * (e_max - e_min);
                moved = true;
            }
            let root = libm::sqrt(e);
            point[to + 2] = root * cos_w;
            point[to + 3] = root * sin_w;
            // σ_h ≈ σ_x / (2√e) away from 0 (h = x/√e); floor √σ near 0.
            let s = sxy.unwrap_or(0.05);
            let hk_scale = BALL_FRACTION * s / (2.0 * libm::sqrt(e.max(s)));
            scales[to + 2] = hk_scale.clamp(0.005, 0.1);
            scales[to + 3] = hk_scale.clamp(0.005, 0.1);
        }
        from += fitted_len;
    }
    let offsets_to = layout.offsets_start();
    for j in 0..n_instruments {
        point[offsets_to + j] = solution.parameters[from + j];
        scales[offsets_to + j] =
            (BALL_FRACTION * sigma(from + j).unwrap_or(median_sigma)).max(1e-3 * median_sigma);
    }
    from += n_instruments;
    if let Some(t) = layout.trend_index() {
        let (value, s) = match &solution.trend {
            Some(estimate) => (estimate.value, sigma(from)),
            None => (0.0, None),
        };
        point[t] = value;
        scales[t] = (BALL_FRACTION * s.unwrap_or(1e-3)).max(1e-9);
    }
    if settings.jitter {
        let start = layout.n_params();
        for j in 0..n_instruments {
            let fitted = solution
                .instruments
                .get(j)
                .and_then(|i| i.jitter)
                .unwrap_or(0.0);
            point[start + j] = fitted.max(0.1 * median_sigma);
            scales[start + j] = 0.1 * median_sigma;
        }
    }
    check_inside(settings, &point)?;
    Ok(PosteriorStart {
        point,
        scales,
        eccentricity_moved: moved,
        disperse_eccentricity: disperse && !layout.circular.iter().all(|c| *c),
        optima: Vec::new(),
    })
}

/// Most refits from distinct start outcomes tried by [`add_other_optima`].
const MAX_REFITS: usize = 6;

/// Most other optima kept (with the best, one centre per ensemble of the default four).
pub const MAX_OTHER_OPTIMA: usize = 3;

/// Two optima are the same when every companion's period agrees within 10⁻³ (relative) and its
/// e within 0.05 (stated choice: finer than any posterior width worth a separate start).
fn same_optimum(a: &[(f64, f64)], b: &[(f64, f64)]) -> bool {
    a.iter()
        .zip(b)
        .all(|(x, y)| (x.0 - y.0).abs() <= 1e-3 * x.0.abs() && (x.1 - y.1).abs() <= 0.05)
}

/// Adds to `start` the other least-squares local optima of `report` (the multi-start fit of
/// `data` with `options`): the start outcomes whose optimum differs from the best (another
/// period, or an eccentricity more than 0.05 away, e.g. the e-edge optimum of a low
/// signal-to-noise table), best χ² first, each refitted by Levenberg–Marquardt
/// ([`fit_from_start`]) with the other companions started at their best-fit elements. At most
/// [`MAX_REFITS`] refits; at most [`MAX_OTHER_OPTIMA`] distinct optima are kept, and
/// [`ensemble_starts`] drops those far less probable than the best. Optima outside the period
/// prior are skipped. Deterministic (no random numbers).
pub fn add_other_optima(
    start: &mut PosteriorStart,
    data: &FitData,
    report: &FitReport,
    options: &FitOptions,
    settings: &PosteriorSettings,
) {
    let layout = settings.layout(data.n_instruments());
    let best = &report.eccentric;
    if layout.circular.iter().any(|c| *c) || best.companions.len() != layout.n_companions() {
        return;
    }
    let summary_of = |params: &[f64]| -> Vec<(f64, f64)> {
        (0..layout.n_companions())
            .map(|c| {
                let i = layout.companion_start(c);
                (
                    params[i],
                    params[i + 2] * params[i + 2] + params[i + 3] * params[i + 3],
                )
            })
            .collect()
    };
    let best_summary: Vec<(f64, f64)> = best
        .companions
        .iter()
        .map(|c| (c.period.value, c.eccentricity.value))
        .collect();
    let mut candidates: Vec<&crate::fit::StartOutcome> = report
        .starts
        .iter()
        .filter(|s| s.chi_squared.is_finite() && s.companion >= 1)
        .filter(|s| s.companion <= layout.n_companions())
        .filter(|s| {
            let b = best_summary[s.companion - 1];
            !same_optimum(&[b], &[(s.period, s.eccentricity)])
        })
        .collect();
    candidates.sort_by(|a, b| a.chi_squared.total_cmp(&b.chi_squared));
    let mut tried: Vec<(usize, f64, f64)> = Vec::new();
    let mut found: Vec<Vec<(f64, f64)>> = vec![best_summary.clone()];
    let jitter_values: Vec<f64> = start.point[layout.n_params()..].to_vec();
    let (p_min, p_max) = settings.priors.period.bounds();
    for s in candidates {
        if tried.len() >= MAX_REFITS || start.optima.len() >= MAX_OTHER_OPTIMA {
            break;
        }
        if tried.iter().any(|&(c, p, e)| {
            c == s.companion && same_optimum(&[(p, e)], &[(s.period, s.eccentricity)])
        }) {
            continue;
        }
        tried.push((s.companion, s.period, s.eccentricity));
        let starts: Vec<StartPoint> = best
            .companions
            .iter()
            .enumerate()
            .map(|(c, fitted)| {
                if c + 1 == s.companion {
                    StartPoint {
                        period: s.start_period,
                        eccentricity: s.start_eccentricity,
                        omega: s.start_omega_deg.to_radians(),
                    }
                } else {
                    StartPoint {
                        period: fitted.period.value,
                        eccentricity: fitted.eccentricity.value.min(0.9),
                        omega: fitted.omega_deg.value.to_radians(),
                    }
                }
            })
            .collect();
        let Ok(refit) = fit_from_start(data, options, &starts) else {
            continue;
        };
        if !refit.chi_squared.is_finite() || refit.params.len() != layout.n_params() {
            continue;
        }
        let mut params = refit.params.clone();
        for c in 0..layout.n_companions() {
            // A negative K is the same orbit as |K| with ω and λ turned by π.
            let i = layout.companion_start(c);
            if params[i + 1] < 0.0 {
                params[i + 1] = -params[i + 1];
                params[i + 2] = -params[i + 2];
                params[i + 3] = -params[i + 3];
                params[layout.lambda_index(c)] += core::f64::consts::PI;
            }
        }
        let summary = summary_of(&params);
        if found.iter().any(|f| same_optimum(f, &summary))
            || summary.iter().any(|&(p, _)| !(p >= p_min && p <= p_max))
        {
            continue;
        }
        let c = s.companion - 1;
        start.optima.push(StartOptimum {
            point: params.iter().chain(&jitter_values).copied().collect(),
            companion: c,
            period: summary[c].0,
            eccentricity: summary[c].1,
            chi_squared: refit.chi_squared,
        });
        found.push(summary);
    }
}

/// Most draws per walker of [`ensemble_starts`] before giving up.
const MAX_START_DRAWS: usize = 1000;

/// Walker positions (sampled coordinates of `target`) for `n_ensembles` independent ensembles
/// of `n_walkers` each, ensemble m on random stream 1000 + m of `seed`: a Gaussian ball around
/// its centre whose scales grow with m (1, 2, 3, 4 … times `start.scales`, i.e. ½ to 2
/// formal errors), so that the ensembles start apart as the between-chain check requires
/// (Gelman & Rubin 1992, Stat. Sci. 7, 457: over-dispersed starts, one chain per mode). The
/// centres are `start.point` and the optima of `start.optima` kept by [`start_centres`]. With several centres, every ensemble
/// has walkers in every mode: the even walkers of ensemble m start around centre m mod
/// (number of centres), the odd ones around each centre in turn, so the ensembles start with
/// different shares of walkers per mode (over-dispersed in the modes' weights; 3:1 and 1:3 for
/// two centres) and agree only once walkers have crossed between the modes — by the mode jumps
/// of [`RvPosterior::set_mode_jumps`]; modes the walkers do not cross keep the ensembles apart
/// and the run is not called converged. With
/// `start.disperse_eccentricity`, each walker's (√e cos ω, √e sin ω) of every companion is
/// drawn from the eccentricity prior with ω uniform instead. Draws with a non-finite density
/// are redrawn, up to 1000 times per walker.
pub fn ensemble_starts(
    start: &PosteriorStart,
    target: &RvPosterior<'_>,
    n_ensembles: usize,
    n_walkers: usize,
    seed: u64,
) -> Result<Vec<Vec<f64>>, PosteriorError> {
    let layout = target.layout().clone();
    let prior = *target.eccentricity_prior();
    let (centres, _) = start_centres(start, target);
    let mut out = Vec::with_capacity(n_ensembles);
    let mut full = vec![0.0; start.point.len()];
    for m in 0..n_ensembles {
        let mut rng = stream_rng(seed, 1000 + m as u64);
        let widen = (m + 1) as f64;
        let n_centres = centres.len();
        let mut positions = Vec::with_capacity(n_walkers * target.dim());
        for walker in 0..n_walkers {
            // Half of the walkers around the ensemble's own centre, the rest in turn around
            // every centre.
            let index = if walker % 2 == 0 {
                m % n_centres
            } else {
                (m + walker / 2) % n_centres
            };
            let centre = &centres[index];
            let mut found = false;
            for _ in 0..MAX_START_DRAWS {
                for ((f, &c), &s) in full.iter_mut().zip(centre).zip(&start.scales) {
                    *f = c + widen * s * standard_normal(&mut rng);
                }
                if start.disperse_eccentricity {
                    for c in 0..layout.n_companions() {
                        if layout.circular[c] {
                            continue;
                        }
                        let i = layout.companion_start(c) + 2;
                        let e = prior.draw(&mut rng);
                        let u: f64 = rand::RngExt::random(&mut rng);
                        let (sin_w, cos_w) = libm::sincos(crate::kepler::TWO_PI * u);
                        full[i] = libm::sqrt(e) * cos_w;
                        full[i + 1] = libm::sqrt(e) * sin_w;
                    }
                }
                // Jitters stay positive: reflect at 0.
                if let Some(j) = target.jitter_start() {
                    let first_jitter = full.len() - (target.dim() - j);
                    for s in &mut full[first_jitter..] {
                        *s = s.abs();
                    }
                }
                let x = target.sampled_point(&full);
                if target.log_density(&x).is_finite() {
                    positions.extend_from_slice(&x);
                    found = true;
                    break;
                }
            }
            if !found {
                return Err(crate::sampler::SamplerError::NoValidStart {
                    walker,
                    attempts: MAX_START_DRAWS,
                }
                .into());
            }
        }
        out.push(positions);
    }
    Ok(out)
}

/// The gap (nats) below the best centre's peak log-posterior within which another optimum was a
/// centre of its own before the Laplace mass rule ([`MASS_GAP`]); still the rule where a mass
/// cannot be computed (a singular Fisher information). ln 5: a peak density at least a fifth of
/// the best's.
pub const KEEP_GAP: f64 = 1.609_437_912_434_100_3;

/// The gap (nats) below the best optimum's posterior mass within which another optimum is a
/// centre of its own: ln 50, i.e. a mode holding at least a fiftieth of the best mode's mass
/// by Laplace's method ([`RvPosterior::laplace_log_mass`]). Stated choice, on the inclusive
/// side: a kept mode costs only run length (walkers cross by mode jumps), a left-out mode biases
/// the quantiles of e; and on the demo table velka17 Laplace's method put the 4.77 d side lobe
/// about 0.8 nats below the share the sampler measured (10 % against 18 % under the Rayleigh
/// prior), so ln 50 keeps every mode likely to hold a few per cent of the mass. Lower optima are
/// reported with their mass below the best ([`OptimumNote`]), not used: velka17's side lobe at
/// 4.77 d lies 2.2–3.2 nats below its best in mass under the default priors (kept) and its
/// one-day alias at 1.26 d 9–12 nats below (not kept).
pub const MASS_GAP: f64 = 3.912_023_005_428_146;

/// What became of one other least-squares optimum at the start of a run.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct OptimumNote {
    /// The companion whose start differed (0-based).
    pub companion: usize,
    /// Its period at this optimum [d].
    pub period: f64,
    /// Its eccentricity at this optimum.
    pub eccentricity: f64,
    /// Log-posterior of the best centre minus this optimum's [nats] (the ratio of peak
    /// densities is exp(−this)).
    pub log_density_below_best: f64,
    /// Laplace log-mass of the best centre's mode minus this one's [nats] (the ratio of masses
    /// is exp(−this); NaN when not computable, and then the peak rule [`KEEP_GAP`] decided).
    #[serde(default = "not_computed")]
    pub log_mass_below_best: f64,
    /// Whether some ensemble starts around it.
    pub used: bool,
}

fn not_computed() -> f64 {
    f64::NAN
}

/// The centres of [`ensemble_starts`] (full layout): `start.point` first, then the optima of
/// `start.optima` whose Laplace mass lies within [`MASS_GAP`] of the best's (within
/// [`KEEP_GAP`] in peak log-posterior where a mass cannot be computed), each with its mean
/// longitudes moved by whole turns into the target's λ windows; and a note on every other
/// optimum.
pub fn start_centres(
    start: &PosteriorStart,
    target: &RvPosterior<'_>,
) -> (Vec<Vec<f64>>, Vec<OptimumNote>) {
    let mut centres = vec![start.point.clone()];
    let mut notes = Vec::new();
    if start.optima.is_empty() {
        return (centres, notes);
    }
    let layout = target.layout();
    let best = target.log_density(&target.sampled_point(&start.point));
    let best_mass = target.laplace_log_mass_given(&start.point, best);
    for optimum in &start.optima {
        if optimum.point.len() != start.point.len() {
            continue;
        }
        let mut point = optimum.point.clone();
        for c in 0..layout.n_companions() {
            let i = layout.lambda_index(c);
            let centre = start.point[i];
            let turn = crate::kepler::TWO_PI;
            point[i] = centre + (point[i] - centre + 0.5 * turn).rem_euclid(turn) - 0.5 * turn;
        }
        let value = target.log_density(&target.sampled_point(&point));
        let below = best - value;
        let mass_below = best_mass - target.laplace_log_mass_given(&point, value);
        let used = value.is_finite()
            && if mass_below.is_finite() {
                mass_below <= MASS_GAP
            } else {
                below.is_nan() || below <= KEEP_GAP
            };
        notes.push(OptimumNote {
            companion: optimum.companion,
            period: optimum.period,
            eccentricity: optimum.eccentricity,
            log_density_below_best: below,
            log_mass_below_best: mass_below,
            used,
        });
        if used {
            centres.push(point);
        }
    }
    (centres, notes)
}

/// Fails with a readable error when the start lies outside a scalar prior's bounds.
fn check_inside(settings: &PosteriorSettings, point: &[f64]) -> Result<(), PosteriorError> {
    let layout = settings.layout(0);
    for c in 0..layout.n_companions() {
        let start = layout.companion_start(c);
        for (name, prior, value) in [
            ("period [d]", settings.priors.period, point[start]),
            (
                "semi-amplitude K [m/s]",
                settings.priors.semi_amplitude,
                point[start + 1],
            ),
        ] {
            let (min, max) = prior.bounds();
            if !(value >= min && value <= max) {
                return Err(PosteriorError::StartOutsidePrior {
                    parameter: name,
                    value,
                    min,
                    max,
                });
            }
        }
    }
    Ok(())
}
