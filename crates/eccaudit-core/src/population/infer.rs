//! The population inference: the posterior of a Beta(a, b) population and of a histogram population with a smoothness prior, each sampled by the project's ensemble sampler until its convergence rule holds; derived quantities (mean e, share below 0.1, share of stars consistent with circular) with credible intervals and Monte-Carlo errors; the naive histograms of least-squares e and posterior medians beside them.

use serde::Serialize;

use crate::priors::EccentricityShape;
use crate::random::{standard_normal, stream_rng};
use crate::sampler::{
    diagnose_ensembles, quantile_sorted, run_until_converged, Chains, ConvergenceThresholds,
    DensityFn, Diagnostics, RunLength, SamplerSettings, Steer,
};
use crate::stats::regularized_incomplete_beta;

use super::likelihood::{Bins, PreparedStar};
use super::samples::{thin_to_ess, EccentricitySamples};
use super::PopulationError;

/// Settings of a population inference (every default a stated choice).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PopulationSettings {
    /// Walkers per ensemble, burn-in, steps before the first check, seed (defaults: 8 walkers
    /// — raised to 2·dim + 2 for the histogram —, 200 burn-in, 500 steps, seed 1; the run then
    /// extends itself until converged).
    pub sampler: SamplerSettings,
    /// Ensembles and budget (4 ensembles, until converged, 4·10⁶ evaluations).
    pub length: RunLength,
    /// Draws used per star (default 256; a file with more is thinned evenly). The likelihood
    /// costs one exponential per draw and star.
    pub max_draws_per_star: usize,
    /// Beta population hyperprior: a and b log-uniform on this range (default [0.05, 50]).
    pub beta_range: [f64; 2],
    /// Equal bins of the histogram population on [0, 1) (default 10).
    pub bins: usize,
    /// Smoothness of the histogram population: the log bin heights follow a Gaussian random
    /// walk, ln h_{j+1} − ln h_j ~ N(0, s²) with this s (default 1: neighbouring heights
    /// differ by a factor e^{±1} at one standard deviation).
    pub smoothness: f64,
    /// A star is "consistent with circular" under a population when its population-informed
    /// posterior puts at least `circular_probability` on e < `circular_e` (defaults 0.05 and
    /// 0.05: circularity not excluded at the 95 % level, with the project's "nearly circular"
    /// threshold of P(e < 0.05)).
    pub circular_e: f64,
    /// See [`Self::circular_e`].
    pub circular_probability: f64,
    /// The "low e" threshold of the share reported (default 0.1).
    pub low_e: f64,
    /// A star whose importance weights have fewer effective draws than this under the
    /// population's posterior median is reported as degenerate (default 20).
    pub min_weight_ess: f64,
    /// Population draws used for the derived quantities and the bands (default 1000).
    pub derived_draws: usize,
}

impl Default for PopulationSettings {
    fn default() -> Self {
        PopulationSettings {
            sampler: SamplerSettings {
                n_walkers: 8,
                n_steps: 500,
                n_burn: 200,
                seed: 1,
                ..SamplerSettings::default()
            },
            length: RunLength::default(),
            max_draws_per_star: 256,
            beta_range: [0.05, 50.0],
            bins: 10,
            smoothness: 1.0,
            circular_e: 0.05,
            circular_probability: 0.05,
            low_e: 0.1,
            min_weight_ess: 20.0,
            derived_draws: 1000,
        }
    }
}

/// A quantity's posterior: median, 68 % and 95 % central intervals, the 95 % upper bound, and
/// the Monte-Carlo error of the median.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Quantity {
    /// Posterior median.
    pub median: f64,
    /// 16th percentile.
    pub lower68: f64,
    /// 84th percentile.
    pub upper68: f64,
    /// 2.5th percentile.
    pub lower95: f64,
    /// 97.5th percentile.
    pub upper95: f64,
    /// 95th percentile (the one-sided 95 % upper limit).
    pub upper_limit95: f64,
    /// Monte-Carlo error of the median: 1.2533 σ / √ESS (the standard error of a median of
    /// a normal sample, √(π/2) σ/√n; common practice), ESS of the run.
    pub mc_error: f64,
}

impl Quantity {
    fn of(values: &mut [f64], ess: f64) -> Quantity {
        values.sort_by(f64::total_cmp);
        let n = values.len() as f64;
        let mean = values.iter().sum::<f64>() / n;
        let sd = libm::sqrt(
            values.iter().map(|v| (v - mean) * (v - mean)).sum::<f64>() / (n - 1.0).max(1.0),
        );
        Quantity {
            median: quantile_sorted(values, 0.5),
            lower68: quantile_sorted(values, 0.16),
            upper68: quantile_sorted(values, 0.84),
            lower95: quantile_sorted(values, 0.025),
            upper95: quantile_sorted(values, 0.975),
            upper_limit95: quantile_sorted(values, 0.95),
            mc_error: 1.2533 * sd / libm::sqrt(ess.max(1.0)),
        }
    }
}

/// What the population says, for either model.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Derived {
    /// Population mean of e.
    pub mean_e: Quantity,
    /// Share of the population with e < `low_e`.
    pub share_below: Quantity,
    /// Share of the stars used that are consistent with circular (see
    /// [`PopulationSettings::circular_e`]).
    pub consistent_with_circular: Quantity,
}

/// The density of the population on a grid, with its credible band.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct DensityBand {
    /// Grid of e (bin centres of 100 equal bins).
    pub e: Vec<f64>,
    /// Posterior median of the density.
    pub median: Vec<f64>,
    /// 16th and 84th percentiles.
    pub lower68: Vec<f64>,
    /// See `lower68`.
    pub upper68: Vec<f64>,
    /// 2.5th and 97.5th percentiles.
    pub lower95: Vec<f64>,
    /// See `lower95`.
    pub upper95: Vec<f64>,
}

/// The result of one population model's run.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ModelResult {
    /// `beta` or `histogram`.
    pub model: String,
    /// True when the run met the convergence rule; nothing of an unconverged run is quoted.
    pub converged: bool,
    /// The plain-text verdict.
    pub verdict: String,
    /// Smallest bulk ESS over the sampled parameters (used for the Monte-Carlo errors).
    pub ess: f64,
    /// Log-density evaluations.
    pub evaluations: u64,
    /// The parameters' posteriors (Beta: a, b; histogram: the bin heights as densities).
    pub parameters: Vec<(String, Quantity)>,
    /// Derived quantities.
    pub derived: Derived,
    /// Density with its band.
    pub density: DensityBand,
    /// Posterior draws of the parameters for figures (Beta: (a, b) pairs; at most
    /// `derived_draws`).
    pub draws: Vec<Vec<f64>>,
}

/// The naive histogram of one point estimate per star (least-squares e, posterior median).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct NaiveHistogram {
    /// What was histogrammed.
    pub label: String,
    /// Stars with a value.
    pub n: usize,
    /// Mean of the values.
    pub mean: f64,
    /// Its standard error, sd/√n.
    pub standard_error: f64,
    /// Counts in the histogram population's bins.
    pub counts: Vec<usize>,
}

/// One star (companion) read for the population.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct StarEntry {
    /// Table.
    pub table: String,
    /// Companion (1-based).
    pub companion: usize,
    /// Prior the draws were made under.
    pub prior: String,
    /// Draws in the file.
    pub n_draws: usize,
    /// Draws used.
    pub n_used: usize,
    /// Whether the star's run converged.
    pub converged: bool,
    /// True when the star enters the population.
    pub used: bool,
    /// Why not, when not.
    pub excluded_because: Option<String>,
    /// Effective draws of its importance weights under the Beta population's posterior median
    /// (NaN when not computed).
    pub weight_ess: f64,
    /// True when `weight_ess` is below the settings' `min_weight_ess`.
    pub degenerate_weights: bool,
    /// Least-squares e.
    pub least_squares_e: Option<f64>,
    /// Posterior median under the saved prior.
    pub posterior_median: f64,
    /// Histogram of its draws (density in the report's 20 equal bins), for the figure.
    pub draw_density: Vec<f64>,
}

/// The population report.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PopulationReport {
    /// Every star read, used or not.
    pub stars: Vec<StarEntry>,
    /// Stars used.
    pub n_used: usize,
    /// The Beta population.
    pub beta: ModelResult,
    /// The histogram population.
    pub histogram: ModelResult,
    /// Bin edges of the histogram population and the naive histograms.
    pub bin_edges: Vec<f64>,
    /// Naive histogram of least-squares e.
    pub naive_least_squares: NaiveHistogram,
    /// Naive histogram of posterior medians.
    pub naive_posterior_median: NaiveHistogram,
    /// Notes the summary must open with (excluded stars, degenerate weights, truncated priors).
    pub notes: Vec<String>,
    /// Methods in words.
    pub methods: Vec<String>,
    /// Settings used.
    pub settings: PopulationSettings,
}

/// Kipping's (2013, MNRAS 434, L51) Beta fits, for the (a, b) figure: (label, a, b), from
/// [`EccentricityShape`]'s constants.
pub fn kipping_2013_marks() -> Vec<(String, f64, f64)> {
    [
        ("Kipping 2013, all", EccentricityShape::KIPPING_2013_ALL),
        (
            "Kipping 2013, P < 382.3 d",
            EccentricityShape::KIPPING_2013_SHORT_PERIOD,
        ),
        (
            "Kipping 2013, P > 382.3 d",
            EccentricityShape::KIPPING_2013_LONG_PERIOD,
        ),
    ]
    .into_iter()
    .filter_map(|(label, shape)| match shape {
        EccentricityShape::Beta { a, b } => Some((label.to_string(), a, b)),
        _ => None,
    })
    .collect()
}

/// The methods, in words.
pub fn population_methods(settings: &PopulationSettings) -> Vec<String> {
    vec![
        "Likelihood of a population f: Π_k (1/N_k) Σ_n f(e_kn)/p₀(e_kn) over the stars k and each star's posterior draws e_kn made under its prior p₀ (importance sampling; Hogg, Myers & Bovy 2010, ApJ 725, 2166), in log-sum-exp form.".into(),
        format!("Beta population: a and b log-uniform on [{}, {}]; histogram population: {} equal bins on [0, 1), log heights a Gaussian random walk with step s = {} (plus a unit normal on their mean, which fixes the scale the normalisation leaves free).", settings.beta_range[0], settings.beta_range[1], settings.bins, settings.smoothness),
        "Each posterior sampled by independent affine-invariant ensembles until the convergence rule holds (the project's sampler); numbers are quoted only from converged runs.".into(),
        format!("Consistent with circular: a star whose posterior under the population as prior gives P(e < {}) ≥ {}; the share is over the stars used, per population draw.", settings.circular_e, settings.circular_probability),
        "Intervals: central 68 % and 95 % of the population draws; upper limit = 95th percentile; Monte-Carlo error of a median = 1.2533 σ/√ESS with the run's smallest bulk ESS.".into(),
        "Naive histograms: least-squares e and posterior medians of the same stars, mean ± sd/√n; they show the bias a point estimate per star carries.".into(),
    ]
}

/// Number of bins of each star's draw histogram in the report.
const STAR_DENSITY_BINS: usize = 20;

fn naive(label: &str, values: &[f64], bins: &Bins) -> NaiveHistogram {
    let n = values.len();
    let mean = values.iter().sum::<f64>() / n.max(1) as f64;
    let var = if n > 1 {
        values.iter().map(|v| (v - mean) * (v - mean)).sum::<f64>() / (n as f64 - 1.0)
    } else {
        f64::NAN
    };
    let mut counts = vec![0; bins.len()];
    for &v in values {
        counts[bins.index(v.clamp(0.0, 1.0))] += 1;
    }
    NaiveHistogram {
        label: label.into(),
        n,
        mean,
        standard_error: libm::sqrt(var / n as f64),
        counts,
    }
}

/// The prepared stars of a survey and the settings: the posterior densities of both models.
#[derive(Debug, Clone)]
pub struct PopulationData {
    stars: Vec<PreparedStar>,
    bins: Bins,
    beta_range: [f64; 2],
    smoothness: f64,
}

impl PopulationData {
    /// From the draws of the stars used, each thinned to at most `settings.max_draws_per_star`.
    pub fn new(samples: &[&EccentricitySamples], settings: &PopulationSettings) -> Self {
        let bins = Bins::equal(settings.bins);
        let stars = samples
            .iter()
            .map(|s| {
                let draws = thin_to_ess(&s.draws, f64::INFINITY, settings.max_draws_per_star);
                let ln_p0: Vec<f64> = draws.iter().map(|&e| s.prior.log_density(e)).collect();
                PreparedStar::new(&draws, &ln_p0, &bins)
            })
            .collect();
        PopulationData {
            stars,
            bins,
            beta_range: settings.beta_range,
            smoothness: settings.smoothness,
        }
    }

    /// The prepared stars.
    pub fn stars(&self) -> &[PreparedStar] {
        &self.stars
    }

    /// ln posterior of the Beta population at (ln a, ln b), up to a constant: the flat
    /// hyperprior in (ln a, ln b) on the range, times the likelihood.
    pub fn beta_ln_posterior(&self, ln_a: f64, ln_b: f64) -> f64 {
        let (lo, hi) = (libm::log(self.beta_range[0]), libm::log(self.beta_range[1]));
        if !(ln_a >= lo && ln_a <= hi && ln_b >= lo && ln_b <= hi) {
            return f64::NEG_INFINITY;
        }
        let (a, b) = (libm::exp(ln_a), libm::exp(ln_b));
        self.stars.iter().map(|s| s.ln_likelihood_beta(a, b)).sum()
    }

    /// ln bin masses from free log heights θ (softmax).
    fn ln_masses(theta: &[f64]) -> Vec<f64> {
        let norm = super::likelihood::log_sum_exp(theta.iter().copied());
        theta.iter().map(|t| t - norm).collect()
    }

    /// ln posterior of the histogram population at log heights θ, up to a constant: the
    /// random-walk smoothness prior Σ_j −(θ_{j+1} − θ_j)²/2s², a unit normal on the mean of θ
    /// (the softmax leaves it free), times the likelihood.
    pub fn histogram_ln_posterior(&self, theta: &[f64]) -> f64 {
        if theta.iter().any(|t| !t.is_finite() || t.abs() > 50.0) {
            return f64::NEG_INFINITY;
        }
        let s2 = self.smoothness * self.smoothness;
        let walk: f64 = theta
            .windows(2)
            .map(|w| -(w[1] - w[0]) * (w[1] - w[0]) / (2.0 * s2))
            .sum();
        let mean = theta.iter().sum::<f64>() / theta.len() as f64;
        let ln_mass = Self::ln_masses(theta);
        walk - 0.5 * mean * mean
            + self
                .stars
                .iter()
                .map(|s| s.ln_likelihood_histogram(&ln_mass, &self.bins))
                .sum::<f64>()
    }
}

/// A converged-or-not run of one population model.
struct Sampled {
    chains: Chains,
    diagnostics: Diagnostics,
    evaluations: u64,
}

fn sample(
    dim: usize,
    centre: &[f64],
    scale: f64,
    density: &dyn Fn(&[f64]) -> f64,
    settings: &PopulationSettings,
    stream: u64,
    observer: &mut dyn FnMut() -> Steer,
) -> Result<Sampled, PopulationError> {
    let wanted = settings.sampler.n_walkers.max(2 * dim + 2);
    let sampler = SamplerSettings {
        n_walkers: wanted + wanted % 2,
        seed: settings.sampler.seed.wrapping_add(stream),
        ..settings.sampler
    };
    crate::limits::check_sampler_counts(
        sampler.n_walkers,
        sampler.n_burn,
        sampler.n_steps,
        sampler.thin,
    )
    .map_err(|e| PopulationError::Sampler(e.into()))?;
    let n_ensembles = settings.length.n_ensembles.max(2);
    // Ensemble m starts in a ball of radius scale·(1 + m) around the centre (increasingly
    // dispersed, as the RV posterior's starts), resampled until the density is finite.
    let mut starts = Vec::with_capacity(n_ensembles);
    for m in 0..n_ensembles {
        let mut rng = stream_rng(sampler.seed, 1_000 + m as u64);
        let mut positions = Vec::with_capacity(sampler.n_walkers * dim);
        for _ in 0..sampler.n_walkers {
            let mut tries = 0;
            loop {
                let x: Vec<f64> = centre
                    .iter()
                    .map(|&c| c + scale * (1.0 + m as f64) * standard_normal(&mut rng))
                    .collect();
                tries += 1;
                if density(&x).is_finite() || tries > 1000 {
                    positions.extend(x);
                    break;
                }
            }
        }
        starts.push(positions);
    }
    let target = DensityFn {
        dim,
        log_density: |x: &[f64]| density(x),
    };
    let thresholds = ConvergenceThresholds::default();
    let mut judge = |ensembles: &[&Chains]| diagnose_ensembles(ensembles, &thresholds);
    let length = RunLength {
        n_ensembles,
        ..settings.length
    };
    let run = run_until_converged(&target, &starts, &sampler, &length, &mut judge, &mut |_| {
        observer()
    })?;
    Ok(Sampled {
        chains: run.merged(),
        diagnostics: run.diagnostics,
        evaluations: run.evaluations,
    })
}

/// Up to `n` draws of the merged chains, evenly spaced in step-major order.
fn thinned_draws(chains: &Chains, n: usize) -> Vec<Vec<f64>> {
    let total = chains.n_stored_steps * chains.n_walkers;
    let n = n.min(total).max(1);
    (0..n)
        .map(|i| {
            let flat = i * total / n;
            chains
                .sample(flat / chains.n_walkers, flat % chains.n_walkers)
                .to_vec()
        })
        .collect()
}

fn band(grid: &[f64], curves: &[Vec<f64>]) -> DensityBand {
    let at = |i: usize, p: f64| {
        let mut v: Vec<f64> = curves.iter().map(|c| c[i]).collect();
        v.sort_by(f64::total_cmp);
        quantile_sorted(&v, p)
    };
    let column = |p: f64| (0..grid.len()).map(|i| at(i, p)).collect();
    DensityBand {
        e: grid.to_vec(),
        median: column(0.5),
        lower68: column(0.16),
        upper68: column(0.84),
        lower95: column(0.025),
        upper95: column(0.975),
    }
}

/// Infers the population from the samples of a survey: stars whose run did not converge are
/// excluded (and listed), the Beta and histogram populations sampled, derived quantities,
/// naive histograms. `observer` is called every 50 sampler steps and may cancel.
pub fn infer_population(
    samples: &[EccentricitySamples],
    settings: &PopulationSettings,
    observer: &mut dyn FnMut() -> Steer,
) -> Result<PopulationReport, PopulationError> {
    if settings.bins < 2 || settings.bins > 100 {
        return Err(PopulationError::Setting(format!(
            "bins = {}: choose 2 to 100",
            settings.bins
        )));
    }
    if !(settings.smoothness > 0.0 && settings.smoothness.is_finite()) {
        return Err(PopulationError::Setting(format!(
            "smoothness = {}: must be positive",
            settings.smoothness
        )));
    }
    let [lo, hi] = settings.beta_range;
    if !(lo > 0.0 && hi > lo && hi.is_finite()) {
        return Err(PopulationError::Setting(format!(
            "beta range [{lo}, {hi}]: need 0 < min < max"
        )));
    }
    if settings.max_draws_per_star == 0 || settings.derived_draws < 10 {
        return Err(PopulationError::Setting(
            "max draws per star ≥ 1 and derived draws ≥ 10".into(),
        ));
    }
    crate::limits::check_count(
        "population derived draws",
        settings.derived_draws as u64,
        crate::limits::MAX_STORED_DRAWS,
    )
    .map_err(|e| PopulationError::Setting(e.to_string()))?;
    let bins = Bins::equal(settings.bins);
    let mut notes = Vec::new();
    let mut stars: Vec<StarEntry> = samples
        .iter()
        .map(|s| {
            let excluded = if !s.converged {
                Some("its posterior run did not meet the convergence rule".to_string())
            } else {
                None
            };
            let width = 1.0 / STAR_DENSITY_BINS as f64;
            let mut density = vec![0.0; STAR_DENSITY_BINS];
            for &e in &s.draws {
                density[((e / width) as usize).min(STAR_DENSITY_BINS - 1)] += 1.0;
            }
            for d in &mut density {
                *d /= s.draws.len() as f64 * width;
            }
            StarEntry {
                table: s.table.clone(),
                companion: s.companion,
                prior: s.prior_spec.clone(),
                n_draws: s.draws.len(),
                n_used: s.draws.len().min(settings.max_draws_per_star),
                converged: s.converged,
                used: excluded.is_none(),
                excluded_because: excluded,
                weight_ess: f64::NAN,
                degenerate_weights: false,
                least_squares_e: s.least_squares_e,
                posterior_median: s.posterior_median,
                draw_density: density,
            }
        })
        .collect();
    let used: Vec<&EccentricitySamples> = samples
        .iter()
        .zip(&stars)
        .filter(|(_, e)| e.used)
        .map(|(s, _)| s)
        .collect();
    let n_excluded = samples.len() - used.len();
    if n_excluded > 0 {
        notes.push(format!(
            "{n_excluded} of {} companions excluded: their posterior runs did not meet the convergence rule (listed below)",
            samples.len()
        ));
    }
    if used.len() < 2 {
        return Err(PopulationError::TooFewStars {
            used: used.len(),
            read: samples.len(),
        });
    }
    let truncated = used
        .iter()
        .filter(|s| s.prior.bounds().1 < 0.99 || s.prior.bounds().0 > 0.0)
        .count();
    if truncated > 0 {
        notes.push(format!(
            "{truncated} companions were sampled under priors truncated inside [0, 0.99]: the population is constrained only where each prior has support"
        ));
    }
    let data = PopulationData::new(&used, settings);

    // Beta population in (ln a, ln b).
    let beta_density = |x: &[f64]| data.beta_ln_posterior(x[0], x[1]);
    let beta_run = sample(
        2,
        &[0.0, libm::log(3.0)],
        0.1,
        &beta_density,
        settings,
        0,
        observer,
    )?;
    let beta_ess = min_ess(&beta_run.diagnostics);
    let beta_draws: Vec<Vec<f64>> = thinned_draws(&beta_run.chains, settings.derived_draws)
        .into_iter()
        .map(|x| vec![libm::exp(x[0]), libm::exp(x[1])])
        .collect();
    let grid: Vec<f64> = (0..100).map(|i| (i as f64 + 0.5) / 100.0).collect();
    let beta_curves: Vec<Vec<f64>> = beta_draws
        .iter()
        .map(|p| {
            let ln_b = super::likelihood::ln_beta_function(p[0], p[1]);
            grid.iter()
                .map(|&e| {
                    libm::exp(
                        (p[0] - 1.0) * libm::log(e) + (p[1] - 1.0) * libm::log(1.0 - e) - ln_b,
                    )
                })
                .collect()
        })
        .collect();
    let consistent = |prob: &dyn Fn(&PreparedStar) -> f64| -> f64 {
        let n = data
            .stars()
            .iter()
            .filter(|s| prob(s) >= settings.circular_probability)
            .count();
        n as f64 / data.stars().len() as f64
    };
    let beta_derived = derived(
        &beta_draws,
        beta_ess,
        |p| p[0] / (p[0] + p[1]),
        |p| regularized_incomplete_beta(p[0], p[1], settings.low_e),
        |p| {
            consistent(&|s: &PreparedStar| {
                s.probability_below_beta(p[0], p[1], settings.circular_e)
            })
        },
    );
    let mut a_values: Vec<f64> = beta_draws.iter().map(|p| p[0]).collect();
    let mut b_values: Vec<f64> = beta_draws.iter().map(|p| p[1]).collect();
    let a_q = Quantity::of(&mut a_values, beta_ess);
    let b_q = Quantity::of(&mut b_values, beta_ess);
    // Weight degeneracy under the posterior median (a, b).
    let mut degenerate = 0;
    for (entry, star) in stars.iter_mut().filter(|e| e.used).zip(data.stars()) {
        entry.weight_ess = star.weight_ess_beta(a_q.median, b_q.median);
        entry.degenerate_weights = entry.weight_ess < settings.min_weight_ess;
        degenerate += usize::from(entry.degenerate_weights);
    }
    if degenerate > 0 {
        notes.push(format!(
            "{degenerate} companions have fewer than {} effective draws behind their importance sums under the median Beta population (listed below): their factors of the likelihood are noisy; save more draws or use a prior closer to the population",
            settings.min_weight_ess
        ));
    }
    let beta = ModelResult {
        model: "beta".into(),
        converged: beta_run.diagnostics.converged,
        verdict: beta_run.diagnostics.verdict(),
        ess: beta_ess,
        evaluations: beta_run.evaluations,
        parameters: vec![("a".into(), a_q), ("b".into(), b_q)],
        derived: beta_derived,
        density: band(&grid, &beta_curves),
        draws: beta_draws,
    };

    // Histogram population in free log heights θ.
    let j = settings.bins;
    let hist_density = |x: &[f64]| data.histogram_ln_posterior(x);
    let hist_run = sample(j, &vec![0.0; j], 0.1, &hist_density, settings, 1, observer)?;
    let hist_ess = min_ess(&hist_run.diagnostics);
    let masses: Vec<Vec<f64>> = thinned_draws(&hist_run.chains, settings.derived_draws)
        .into_iter()
        .map(|theta| {
            PopulationData::ln_masses(&theta)
                .into_iter()
                .map(libm::exp)
                .collect()
        })
        .collect();
    let hist_curves: Vec<Vec<f64>> = masses
        .iter()
        .map(|m| {
            grid.iter()
                .map(|&e| {
                    let i = bins.index(e);
                    m[i] / bins.width(i)
                })
                .collect()
        })
        .collect();
    let below = |m: &[f64], x: f64| -> f64 {
        (0..bins.len())
            .map(|i| m[i] * ((x - bins.edges[i]) / bins.width(i)).clamp(0.0, 1.0))
            .sum()
    };
    let hist_derived = derived(
        &masses,
        hist_ess,
        |m| {
            (0..bins.len())
                .map(|i| m[i] * 0.5 * (bins.edges[i] + bins.edges[i + 1]))
                .sum()
        },
        |m| below(m, settings.low_e),
        |m| {
            let ln_m: Vec<f64> = m.iter().map(|&v| libm::log(v)).collect();
            consistent(&|s: &PreparedStar| {
                s.probability_below_histogram(&ln_m, &bins, settings.circular_e)
            })
        },
    );
    let heights: Vec<(String, Quantity)> = (0..j)
        .map(|i| {
            let mut v: Vec<f64> = masses.iter().map(|m| m[i] / bins.width(i)).collect();
            (
                format!("density {}..{}", bins.edges[i], bins.edges[i + 1]),
                Quantity::of(&mut v, hist_ess),
            )
        })
        .collect();
    let histogram = ModelResult {
        model: "histogram".into(),
        converged: hist_run.diagnostics.converged,
        verdict: hist_run.diagnostics.verdict(),
        ess: hist_ess,
        evaluations: hist_run.evaluations,
        parameters: heights,
        derived: hist_derived,
        density: band(&grid, &hist_curves),
        draws: masses,
    };
    let ls: Vec<f64> = used.iter().filter_map(|s| s.least_squares_e).collect();
    let medians: Vec<f64> = used.iter().map(|s| s.posterior_median).collect();
    Ok(PopulationReport {
        n_used: used.len(),
        stars,
        beta,
        histogram,
        bin_edges: bins.edges.clone(),
        naive_least_squares: naive("least-squares e", &ls, &bins),
        naive_posterior_median: naive("posterior median of e", &medians, &bins),
        notes,
        methods: population_methods(settings),
        settings: settings.clone(),
    })
}

fn min_ess(diagnostics: &Diagnostics) -> f64 {
    diagnostics
        .parameters
        .iter()
        .map(|p| p.ess_bulk)
        .fold(f64::INFINITY, f64::min)
}

fn derived(
    draws: &[Vec<f64>],
    ess: f64,
    mean: impl Fn(&[f64]) -> f64,
    share: impl Fn(&[f64]) -> f64,
    circular: impl Fn(&[f64]) -> f64,
) -> Derived {
    let mut m: Vec<f64> = draws.iter().map(|p| mean(p)).collect();
    let mut s: Vec<f64> = draws.iter().map(|p| share(p)).collect();
    let mut c: Vec<f64> = draws.iter().map(|p| circular(p)).collect();
    Derived {
        mean_e: Quantity::of(&mut m, ess),
        share_below: Quantity::of(&mut s, ess),
        consistent_with_circular: Quantity::of(&mut c, ess),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::posterior::parse_prior_spec;
    use crate::priors::{EccentricityPriorSettings, EccentricityShape};
    use rand::RngExt;

    /// A toy survey with a known answer: star k's true e_k ~ Beta(a, b), its data are n_k
    /// Bernoulli trials with success probability e_k (s_k successes), so its posterior under a
    /// uniform prior is Beta(1 + s_k, 1 + n_k − s_k) (conjugacy; derivation in
    /// `likelihood.rs`' analytic test). Draws from those posteriors feed the population.
    fn toy_survey(a: f64, b: f64, n_stars: usize, seed: u64) -> Vec<EccentricitySamples> {
        let mut rng = stream_rng(seed, 0);
        let truth = EccentricityPriorSettings {
            shape: EccentricityShape::Beta { a, b },
            e_min: 0.0,
            e_max: 1.0,
        }
        .validate()
        .unwrap();
        let prior = parse_prior_spec("uniform:0..1")
            .unwrap()
            .validate()
            .unwrap();
        (0..n_stars)
            .map(|k| {
                let e = truth.draw(&mut rng);
                let n = 4 + (k % 5) * 6;
                let s = (0..n).filter(|_| rng.random::<f64>() < e).count();
                let post = EccentricityPriorSettings {
                    shape: EccentricityShape::Beta {
                        a: 1.0 + s as f64,
                        b: 1.0 + (n - s) as f64,
                    },
                    e_min: 0.0,
                    e_max: 1.0,
                }
                .validate()
                .unwrap();
                let mut draws: Vec<f64> = (0..400).map(|_| post.draw(&mut rng)).collect();
                draws.sort_by(f64::total_cmp);
                let median = draws[200];
                EccentricitySamples {
                    table: format!("toy-{k}"),
                    companion: 1,
                    prior_spec: "uniform:0..1".into(),
                    prior,
                    converged: k != 0,
                    ess: 400.0,
                    least_squares_e: Some(s as f64 / n as f64),
                    posterior_median: median,
                    draws,
                }
            })
            .collect()
    }

    /// The HPD-region test: the truth lies inside the 95 % highest-posterior-density region
    /// of (a, b) when fewer than 95 % of the posterior draws have a higher density than the
    /// truth (common practice).
    #[test]
    fn toy_survey_covers_the_true_beta_and_excludes_unconverged_stars() {
        let (a, b) = (1.5, 4.0);
        let samples = toy_survey(a, b, 60, 15);
        let settings = PopulationSettings::default();
        let report = infer_population(&samples, &settings, &mut || Steer::Continue).unwrap();
        assert!(report.beta.converged, "{}", report.beta.verdict);
        assert!(report.histogram.converged, "{}", report.histogram.verdict);
        assert_eq!(report.n_used, 59);
        assert!(!report.stars[0].used);
        assert!(report.notes[0].starts_with("1 of 60 companions excluded"));
        let used: Vec<&EccentricitySamples> = samples[1..].iter().collect();
        let data = PopulationData::new(&used, &settings);
        let at_truth = data.beta_ln_posterior(libm::log(a), libm::log(b));
        let higher = report
            .beta
            .draws
            .iter()
            .filter(|p| data.beta_ln_posterior(libm::log(p[0]), libm::log(p[1])) > at_truth)
            .count();
        let share = higher as f64 / report.beta.draws.len() as f64;
        // 1000 draws: the share's Monte-Carlo error is ≤ 0.016 (binomial, at ESS ≥ 1000 it is
        // the plain binomial; fewer effective draws widen it), far from the 0.95 boundary
        // unless the truth lies on the region's edge.
        assert!(
            share < 0.95,
            "truth outside the 95% HPD region: share {share}"
        );
        // Population mean a/(a+b) = 0.2727: inside the 95 % interval of both models.
        let truth_mean = a / (a + b);
        for m in [&report.beta, &report.histogram] {
            let q = m.derived.mean_e;
            assert!(
                q.lower95 < truth_mean && truth_mean < q.upper95,
                "{}: {q:?}",
                m.model
            );
        }
    }

    #[test]
    fn settings_out_of_range_are_refused() {
        let samples = toy_survey(1.0, 3.0, 5, 1);
        let bad = PopulationSettings {
            bins: 1,
            ..PopulationSettings::default()
        };
        assert!(infer_population(&samples, &bad, &mut || Steer::Continue).is_err());
        let err = infer_population(&samples[..1], &PopulationSettings::default(), &mut || {
            Steer::Continue
        })
        .unwrap_err();
        assert!(matches!(
            err,
            PopulationError::TooFewStars { used: 0, read: 1 }
        ));
    }
}
