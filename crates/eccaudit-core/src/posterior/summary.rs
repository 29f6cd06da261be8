//! What one posterior run says about e: median, mean, mode, equal-tailed and highest-density
//! intervals, P(e < 0.05), the information gain prior → posterior, the Savage–Dickey Bayes
//! factor, and density curves for plotting — each with its Monte-Carlo error and stated method.

use serde::{Deserialize, Serialize};

use crate::priors::{EccentricityPrior, EccentricityPriorSettings};
use crate::sampler::{quantile_sorted, Diagnostics, ParameterDiagnostics};

use super::bayes::{savage_dickey, SavageDickey};

/// The threshold of the reported "nearly circular" probability.
pub const NEARLY_CIRCULAR: f64 = 0.05;

/// Bins of the histogram on which the information gain is estimated.
pub const KL_BINS: usize = 50;

/// Points of the plotting grid: e = 0, 0.005, …, 1.
pub const DENSITY_GRID_POINTS: usize = 201;

/// Width of the fine bins of the binned kernel density estimate.
const KDE_BIN_WIDTH: f64 = 1e-3;

/// Kullback–Leibler divergence KL(posterior ‖ prior) of e, estimated on a histogram.
///
/// Method: [`KL_BINS`] equal bins on the prior's support [e_min, e_max]; posterior bin masses
/// p̂_b are sample fractions, prior masses q_b exact from the prior's CDF;
/// plug-in KL = Σ p̂_b ln(p̂_b/q_b) in nats. Two biases, stated: (1) the plug-in estimate is
/// biased upward by about (m − 1)/(2 N_eff) for m occupied bins (the Miller–Madow term for
/// entropy, Paninski 2003, Neural Computation 15, 1191, §3, from memory), which is subtracted;
/// (2) binning can only lower a divergence (coarse-graining, Cover & Thomas 2006, Elements of
/// Information Theory, 2nd ed., §2.8 data-processing inequality), so the binned value is a lower
/// bound of the continuous one, close when the posterior is wider than a few bins
/// (bin width (e_max − e_min)/50).
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct KlEstimate {
    /// Bias-corrected estimate [nats].
    pub nats: f64,
    /// Plug-in estimate before the correction [nats].
    pub plug_in: f64,
    /// The subtracted (m − 1)/(2 N_eff).
    pub bias_correction: f64,
    /// Monte-Carlo standard error, √(Var_p̂[ln(p̂/q)]/N_eff).
    pub standard_error: f64,
    /// Bins used.
    pub n_bins: usize,
    /// Occupied bins.
    pub n_occupied: usize,
}

impl KlEstimate {
    /// Not computed (every figure NaN, no bins): the prior's marginal on e is unknown.
    pub fn undefined() -> Self {
        KlEstimate {
            nats: f64::NAN,
            plug_in: f64::NAN,
            bias_correction: f64::NAN,
            standard_error: f64::NAN,
            n_bins: 0,
            n_occupied: 0,
        }
    }
}

/// KL(posterior ‖ prior) of e on [`KL_BINS`] equal bins over the prior's support (see
/// [`KlEstimate`]); `effective_sample_size` ≤ samples.
pub fn kl_divergence_histogram(
    e_samples: &[f64],
    effective_sample_size: f64,
    prior: &EccentricityPrior,
) -> KlEstimate {
    let (lo, hi) = prior.bounds();
    kl_divergence_binned(e_samples, effective_sample_size, lo, hi, KL_BINS, |e| {
        prior.cdf(e)
    })
}

/// The estimator of [`KlEstimate`] for any prior on [lo, hi] given by its CDF.
pub fn kl_divergence_binned(
    samples: &[f64],
    effective_sample_size: f64,
    lo: f64,
    hi: f64,
    n_bins: usize,
    prior_cdf: impl Fn(f64) -> f64,
) -> KlEstimate {
    let n = samples.len() as f64;
    let ess = effective_sample_size.clamp(1.0, n.max(1.0));
    let width = (hi - lo) / n_bins as f64;
    let mut counts = vec![0usize; n_bins];
    for &x in samples {
        if x >= lo && x <= hi {
            let b = (((x - lo) / width) as usize).min(n_bins - 1);
            counts[b] += 1;
        }
    }
    let (mut kl, mut second, mut occupied) = (0.0, 0.0, 0usize);
    for (b, &count) in counts.iter().enumerate() {
        if count == 0 {
            continue;
        }
        occupied += 1;
        let p = count as f64 / n;
        let edge_lo = lo + b as f64 * width;
        let edge_hi = if b + 1 == n_bins { hi } else { edge_lo + width };
        let q = prior_cdf(edge_hi) - prior_cdf(edge_lo);
        let log_ratio = libm::log(p / q);
        kl += p * log_ratio;
        second += p * log_ratio * log_ratio;
    }
    let bias = (occupied.max(1) - 1) as f64 / (2.0 * ess);
    KlEstimate {
        nats: kl - bias,
        plug_in: kl,
        bias_correction: bias,
        standard_error: libm::sqrt(((second - kl * kl) / ess).max(0.0)),
        n_bins,
        n_occupied: occupied,
    }
}

/// Posterior and prior densities of e on a fixed grid, for plotting.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct DensityCurves {
    /// The grid: [`DENSITY_GRID_POINTS`] values 0, 0.005, …, 1.
    pub e: Vec<f64>,
    /// Posterior density: Gaussian kernel estimate with reflection at the prior's bounds (see
    /// [`EccentricitySummary::mode`]); 0 outside the support.
    pub posterior: Vec<f64>,
    /// Prior density, analytic (0 outside the support; the value at an infinite density, e.g.
    /// Beta with a < 1 at e = 0, is replaced by the value at the next grid point).
    pub prior: Vec<f64>,
}

/// The cost of a run.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct SamplerCost {
    /// Walkers.
    pub n_walkers: usize,
    /// Steps per walker, burn-in included.
    pub n_steps_total: usize,
    /// Stored samples (walkers × stored steps).
    pub n_samples: usize,
    /// Log-density evaluations, initial ball included.
    pub log_density_evaluations: u64,
    /// Independent ensembles.
    pub n_ensembles: usize,
    /// Why the run stopped.
    pub stop: crate::sampler::StopReason,
    /// Convergence checks made.
    pub checks: usize,
    /// Walkers moved at the end of burn-in, stranded far below the others.
    pub relocated_walkers: usize,
    /// Steps after burn-in divided by the largest autocorrelation time of the last check.
    pub autocorrelation_times: f64,
}

/// What one posterior run says about the eccentricity of one companion.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct EccentricitySummary {
    /// The eccentricity prior as sampled (e_max lowered to the model's domain if needed).
    pub prior: EccentricityPriorSettings,
    /// Its label.
    pub prior_label: String,
    /// Posterior samples used.
    pub n_samples: usize,
    /// Effective sample size of e: bulk ESS (Vehtari et al. 2021, Bayesian Analysis 16, 667) for
    /// a full diagnosis, N/τ for the quick one of injection trials (see
    /// [`crate::sampler::DiagnosisDepth`]); it also sets the KDE bandwidth of the mode.
    pub ess_bulk: f64,
    /// Tail effective sample size of e (same source; N/τ again for the quick diagnosis).
    pub ess_tail: f64,
    /// Posterior median of e.
    pub median: f64,
    /// Its Monte-Carlo error, √(¼/ESS)/f̂(median) (asymptotic variance of a sample quantile,
    /// common practice; f̂ the kernel density).
    pub median_mc_error: f64,
    /// Posterior mean of e.
    pub mean: f64,
    /// Its Monte-Carlo error, sd/√ESS.
    pub mean_mc_error: f64,
    /// Posterior standard deviation of e.
    pub sd: f64,
    /// Posterior mode of e: the maximum of a Gaussian kernel density estimate with reflection at
    /// e_min and e_max (so a pile of mass at e = 0 gives mode 0 instead of a spurious dip),
    /// bandwidth by Silverman's rule 0.9 min(sd, IQR/1.34) ESS^(−1/5) (Silverman 1986, Density
    /// Estimation, eq. 3.31), evaluated on a grid of step 0.001 from samples binned at 0.001.
    pub mode: f64,
    /// Kernel bandwidth used.
    pub kde_bandwidth: f64,
    /// Equal-tailed 68.27 % interval (quantiles 0.1587, 0.8413).
    pub interval_68: [f64; 2],
    /// Equal-tailed 95 % interval (quantiles 0.025, 0.975).
    pub interval_95: [f64; 2],
    /// Highest-density 68.27 % interval: the shortest interval of the samples (Chen & Shao
    /// 1999, J. Comput. Graph. Stat. 8, 69), or the upper limit [e_min, q₀.₆₈₂₇] when the
    /// highest-density region reaches the lower bound (see [`Self::hdi_68_is_upper_limit`]).
    pub hdi_68: [f64; 2],
    /// True when `hdi_68` is an upper limit: the kernel density at e_min is at least the density
    /// at the shortest interval's lower end, so the region {e : f(e) ≥ c} holding 68.27 % of
    /// the mass starts at e_min, and the interval is [e_min, the 68.27 % quantile].
    pub hdi_68_is_upper_limit: bool,
    /// Highest-density 95 % interval (same rule as `hdi_68`).
    pub hdi_95: [f64; 2],
    /// True when `hdi_95` is an upper limit [e_min, q₀.₉₅].
    pub hdi_95_is_upper_limit: bool,
    /// True when the kernel density peaks at e_min itself: the mode is then the boundary, not
    /// an interior maximum, and is reported as e_min with this flag set.
    pub mode_at_boundary: bool,
    /// P(e < 0.05 | D).
    pub p_nearly_circular: f64,
    /// Its Monte-Carlo error √(p(1−p)/ESS_tail).
    pub p_nearly_circular_mc_error: f64,
    /// Information gain prior → posterior.
    pub information_gain: KlEstimate,
    /// Circular versus eccentric.
    pub bayes_factor: SavageDickey,
    /// Densities for plotting.
    pub density: DensityCurves,
    /// Did every parameter's chain pass the convergence checks?
    pub converged: bool,
    /// The plain-text verdict of [`crate::sampler::diagnose`].
    pub verdict: String,
    /// The cost of the run.
    pub cost: SamplerCost,
}

/// Sorts `values` ascending in the order of [`f64::total_cmp`] (the same result as
/// `sort_unstable_by(f64::total_cmp)`), by a least-significant-digit radix sort of the bit
/// patterns mapped to unsigned integers of the same order (sign bit flipped for positives, all
/// bits for negatives; common practice): six passes of 11 bits instead of n log n comparisons,
/// for the tens of thousands of draws of every posterior run.
fn sort_total_order(values: &mut [f64]) {
    const BITS: u32 = 11;
    const BUCKETS: usize = 1 << BITS;
    if values.len() < 256 {
        values.sort_unstable_by(f64::total_cmp);
        return;
    }
    let key = |x: f64| {
        let bits = x.to_bits();
        if bits >> 63 == 0 {
            bits ^ (1 << 63)
        } else {
            !bits
        }
    };
    let unkey = |k: u64| {
        if k >> 63 == 1 {
            f64::from_bits(k ^ (1 << 63))
        } else {
            f64::from_bits(!k)
        }
    };
    let mut keys: Vec<u64> = values.iter().map(|&x| key(x)).collect();
    let mut spare = vec![0u64; keys.len()];
    let mut shift = 0;
    while shift < 64 {
        let mut counts = [0usize; BUCKETS];
        for &k in &keys {
            counts[((k >> shift) as usize) & (BUCKETS - 1)] += 1;
        }
        // All keys in one bucket: this digit is the same everywhere, nothing to move.
        if counts.contains(&keys.len()) {
            shift += BITS;
            continue;
        }
        let mut next = 0;
        for c in counts.iter_mut() {
            let here = *c;
            *c = next;
            next += here;
        }
        for &k in &keys {
            let bucket = ((k >> shift) as usize) & (BUCKETS - 1);
            spare[counts[bucket]] = k;
            counts[bucket] += 1;
        }
        std::mem::swap(&mut keys, &mut spare);
        shift += BITS;
    }
    for (v, &k) in values.iter_mut().zip(&keys) {
        *v = unkey(k);
    }
}

/// The shortest interval holding `mass` of the sorted samples (Chen & Shao 1999).
fn highest_density_interval(sorted: &[f64], mass: f64) -> [f64; 2] {
    let n = sorted.len();
    let span = ((mass * n as f64).ceil() as usize).clamp(1, n) - 1;
    let mut best = [sorted[0], sorted[span]];
    for i in 0..n - span {
        if sorted[i + span] - sorted[i] < best[1] - best[0] {
            best = [sorted[i], sorted[i + span]];
        }
    }
    best
}

/// Binned Gaussian KDE with reflection at `lo` and `hi`.
struct ReflectedKde {
    lo: f64,
    hi: f64,
    counts: Vec<f64>,
    n: f64,
    bandwidth: f64,
}

impl ReflectedKde {
    fn new(samples: &[f64], lo: f64, hi: f64, bandwidth: f64) -> Self {
        let n_bins = (((hi - lo) / KDE_BIN_WIDTH).ceil() as usize).max(1);
        let mut counts = vec![0.0; n_bins];
        for &x in samples {
            let b = (((x - lo) / KDE_BIN_WIDTH).max(0.0) as usize).min(n_bins - 1);
            counts[b] += 1.0;
        }
        Self {
            lo,
            hi,
            counts,
            n: samples.len() as f64,
            bandwidth,
        }
    }

    fn density(&self, x: f64) -> f64 {
        if !(x >= self.lo && x <= self.hi) {
            return 0.0;
        }
        let h = self.bandwidth;
        let reach = 6.0 * h;
        let norm = 1.0 / (self.n * h * libm::sqrt(2.0 * core::f64::consts::PI));
        let kernel = |u: f64| libm::exp(-0.5 * u * u);
        let first = (((x - reach - self.lo) / KDE_BIN_WIDTH).floor().max(0.0)) as usize;
        let last =
            ((((x + reach - self.lo) / KDE_BIN_WIDTH).ceil()) as usize).min(self.counts.len());
        let mut sum = 0.0;
        for b in first..last {
            let c = self.counts[b];
            if c == 0.0 {
                continue;
            }
            let centre = (self.lo + (b as f64 + 0.5) * KDE_BIN_WIDTH).min(self.hi);
            sum += c * kernel((x - centre) / h);
        }
        // Reflections: mirror images 2lo − x_i and 2hi − x_i, only within reach of the bounds.
        if x - self.lo < reach {
            let last = ((reach - (x - self.lo)) / KDE_BIN_WIDTH).ceil() as usize;
            for b in 0..last.min(self.counts.len()) {
                let centre = self.lo + (b as f64 + 0.5) * KDE_BIN_WIDTH;
                sum += self.counts[b] * kernel((x - (2.0 * self.lo - centre)) / h);
            }
        }
        if self.hi - x < reach {
            let n = self.counts.len();
            let span = ((reach - (self.hi - x)) / KDE_BIN_WIDTH).ceil() as usize;
            for b in n.saturating_sub(span)..n {
                let centre = (self.lo + (b as f64 + 0.5) * KDE_BIN_WIDTH).min(self.hi);
                sum += self.counts[b] * kernel((x - (2.0 * self.hi - centre)) / h);
            }
        }
        sum * norm
    }

    /// The density at every point lo + i·w, i = 0..=H, of the bin grid (w = the bin width), when
    /// hi − lo is a whole number H of bins; `None` otherwise. Grid points and bin centres are then
    /// half a bin apart, also for the mirror images, so the kernel depends only on the whole
    /// number of bins between them and is tabulated once: a few hundred exponentials instead of
    /// one per point and bin. Same estimate as [`Self::density`] (kernels cut at 6h), to rounding.
    fn density_on_bin_grid(&self) -> Option<Vec<f64>> {
        let w = KDE_BIN_WIDTH;
        let n_bins = self.counts.len();
        let span = (self.hi - self.lo) / w;
        if (span - n_bins as f64).abs() > 1e-6 {
            return None;
        }
        let h = self.bandwidth;
        // Kernel at (j + ½) bins, for every j whose offset lies within 6h.
        let table: Vec<f64> = (0..)
            .map(|j| (j as f64 + 0.5) * w / h)
            .take_while(|u| *u <= 6.0)
            .map(|u| libm::exp(-0.5 * u * u))
            .collect();
        let reach = table.len();
        let norm = 1.0 / (self.n * h * libm::sqrt(2.0 * core::f64::consts::PI));
        let mut density = vec![0.0; n_bins + 1];
        for (b, &count) in self.counts.iter().enumerate() {
            if count == 0.0 {
                continue;
            }
            // Direct: centre b + ½ bins, points i ≤ b at j = b − i, points i > b at j = i − b − 1.
            let first = b.saturating_sub(reach - 1);
            let last = (b + reach).min(n_bins);
            for (i, d) in density.iter_mut().enumerate().take(last + 1).skip(first) {
                let j = if i <= b { b - i } else { i - b - 1 };
                *d += count * table[j];
            }
            // Mirror at lo (−(b + ½) bins): j = i + b.
            let mirrored = reach.saturating_sub(b);
            for (d, &k) in density
                .iter_mut()
                .zip(&table[b.min(reach)..])
                .take(mirrored)
            {
                *d += count * k;
            }
            // Mirror at hi (2H − b − ½ bins): j = 2H − b − i − 1 for i ≥ 2H − b − reach.
            let first = (2 * n_bins).saturating_sub(b + reach);
            for (i, d) in density.iter_mut().enumerate().skip(first) {
                let j = 2 * n_bins - b - i - 1;
                *d += count * table[j];
            }
        }
        for d in &mut density {
            *d *= norm;
        }
        Some(density)
    }
}

/// Summarises posterior draws of e. `traces` holds one trace of e per walker, `e_diagnostics`
/// their diagnostics (for the effective sample sizes); `diagnostics` and `cost` describe the
/// whole run.
pub fn summarise_eccentricity(
    traces: &[Vec<f64>],
    prior: &EccentricityPrior,
    e_diagnostics: &ParameterDiagnostics,
    diagnostics: &Diagnostics,
    cost: SamplerCost,
) -> EccentricitySummary {
    let mut sorted: Vec<f64> = traces.iter().flatten().copied().collect();
    sort_total_order(&mut sorted);
    let n = sorted.len().max(1);
    let nf = n as f64;
    let (lo, hi) = prior.bounds();
    let (bulk, tail) = if traces.len() > 1 {
        (e_diagnostics.ess_bulk, e_diagnostics.ess_tail)
    } else {
        (nf, nf)
    };
    // A constant trace (e.g. circular prior) has undefined ESS: fall back to the draw count.
    let finite_or = |v: f64| {
        if v.is_finite() && v > 0.0 {
            v.min(nf)
        } else {
            nf
        }
    };
    let (bulk, tail) = (finite_or(bulk), finite_or(tail));
    if sorted.is_empty() {
        sorted.push(0.0);
    }
    let mean = sorted.iter().sum::<f64>() / nf;
    let variance =
        sorted.iter().map(|e| (e - mean) * (e - mean)).sum::<f64>() / (nf - 1.0).max(1.0);
    let sd = libm::sqrt(variance);
    let median = quantile_sorted(&sorted, 0.5);
    let iqr = quantile_sorted(&sorted, 0.75) - quantile_sorted(&sorted, 0.25);
    let spread = if iqr > 0.0 { sd.min(iqr / 1.34) } else { sd };
    let bandwidth = (0.9 * spread * libm::pow(bulk, -0.2)).max(2.0 * KDE_BIN_WIDTH);
    let kde = ReflectedKde::new(&sorted, lo, hi, bandwidth);
    let n_mode = ((hi - lo) / KDE_BIN_WIDTH).round() as usize;
    let on_grid = kde.density_on_bin_grid();
    let mut mode = lo;
    let mut best = f64::NEG_INFINITY;
    for i in 0..=n_mode {
        let x = (lo + i as f64 * KDE_BIN_WIDTH).min(hi);
        let d = match &on_grid {
            Some(grid) => grid[i],
            None => kde.density(x),
        };
        if d > best {
            best = d;
            mode = x;
        }
    }
    let median_density = kde.density(median).max(1e-300);
    let mode_at_boundary = mode <= lo;
    let density_at_lo = kde.density(lo);
    let hdi = |mass: f64| {
        let shortest = highest_density_interval(&sorted, mass);
        if density_at_lo >= kde.density(shortest[0]) {
            ([lo, quantile_sorted(&sorted, mass)], true)
        } else {
            (shortest, false)
        }
    };
    let (hdi_68, hdi_95) = (hdi(0.682_689_492_137_086), hdi(0.95));
    let p_low = sorted.partition_point(|&e| e < NEARLY_CIRCULAR) as f64 / nf;
    let grid: Vec<f64> = (0..DENSITY_GRID_POINTS)
        .map(|i| i as f64 / (DENSITY_GRID_POINTS - 1) as f64)
        .collect();
    let posterior_curve = grid.iter().map(|&e| kde.density(e)).collect();
    // Under the Jeffreys prior the marginal prior of e depends on the data and is not
    // computed: no prior curve, no KL, no Savage–Dickey ratio (which needs it near e = 0).
    let jeffreys = prior.settings().shape == crate::priors::EccentricityShape::Jeffreys;
    let mut prior_curve: Vec<f64> = if jeffreys {
        Vec::new()
    } else {
        grid.iter().map(|&e| prior.density(e)).collect()
    };
    for i in 0..prior_curve.len() {
        if !prior_curve[i].is_finite() {
            prior_curve[i] = prior_curve.get(i + 1).copied().unwrap_or(0.0);
        }
    }
    let quantiles = |a: f64, b: f64| [quantile_sorted(&sorted, a), quantile_sorted(&sorted, b)];
    EccentricitySummary {
        prior: *prior.settings(),
        prior_label: prior_label(prior.settings()),
        n_samples: n,
        ess_bulk: bulk,
        ess_tail: tail,
        median,
        median_mc_error: libm::sqrt(0.25 / bulk) / median_density,
        mean,
        mean_mc_error: sd / libm::sqrt(bulk),
        sd,
        mode,
        kde_bandwidth: bandwidth,
        interval_68: quantiles(0.158_655_253_931_457_05, 0.841_344_746_068_543),
        interval_95: quantiles(0.025, 0.975),
        hdi_68: hdi_68.0,
        hdi_68_is_upper_limit: hdi_68.1,
        hdi_95: hdi_95.0,
        hdi_95_is_upper_limit: hdi_95.1,
        mode_at_boundary,
        p_nearly_circular: p_low,
        p_nearly_circular_mc_error: libm::sqrt(p_low * (1.0 - p_low) / tail),
        information_gain: if jeffreys {
            KlEstimate::undefined()
        } else {
            kl_divergence_histogram(&sorted, bulk, prior)
        },
        bayes_factor: if jeffreys {
            super::bayes::SavageDickey::undefined(
                "undefined: the Jeffreys prior's marginal on e depends on the data and is not \
                 computed, so the Savage–Dickey ratio has no prior mass near e = 0 to divide by"
                    .into(),
            )
        } else {
            savage_dickey(&sorted, bulk.min(tail), prior)
        },
        density: DensityCurves {
            e: grid,
            posterior: posterior_curve,
            prior: prior_curve,
        },
        converged: diagnostics.converged,
        verdict: diagnostics.verdict(),
        cost,
    }
}

/// A label with the truncation, e.g. `uniform on [0, 0.5]`.
pub fn prior_label(settings: &EccentricityPriorSettings) -> String {
    if settings.shape == crate::priors::EccentricityShape::Circular {
        return settings.shape.label();
    }
    format!(
        "{} on [{}, {}]",
        settings.shape.label(),
        settings.e_min,
        settings.e_max
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The radix sort gives exactly the order of `f64::total_cmp` (its definition), on values
    /// of both signs, zeros of both signs, repeated values, infinities and subnormals.
    #[test]
    fn radix_sort_equals_the_total_order_sort() {
        let mut values: Vec<f64> = (0..5000)
            .map(|i| {
                let x = libm::sin(i as f64 * 12.9898) * 43758.5453;
                x - libm::floor(x) - 0.3
            })
            .collect();
        values.extend([
            0.0,
            -0.0,
            1e-310,
            -1e-310,
            f64::INFINITY,
            f64::NEG_INFINITY,
            0.5,
            0.5,
        ]);
        let mut expected = values.clone();
        expected.sort_by(f64::total_cmp);
        sort_total_order(&mut values);
        assert!(values
            .iter()
            .zip(&expected)
            .all(|(a, b)| a.to_bits() == b.to_bits()));
    }

    #[test]
    fn hdi_of_a_ramp_starts_at_the_top() {
        // Samples of p(x) = 2x on [0, 1] (x = √u on a regular grid): the shortest 50 % interval
        // is [√0.5, 1] (highest density at 1), the equal-tailed one [√0.25, √0.75].
        let n = 10_000;
        let sorted: Vec<f64> = (0..n)
            .map(|i| ((i as f64 + 0.5) / n as f64).sqrt())
            .collect();
        let hdi = highest_density_interval(&sorted, 0.5);
        assert!((hdi[0] - 0.5f64.sqrt()).abs() < 1e-3 && (hdi[1] - 1.0).abs() < 1e-3);
        assert!((quantile_sorted(&sorted, 0.25) - 0.5).abs() < 1e-3);
    }

    #[test]
    fn reflected_kde_integrates_to_one_and_keeps_a_pile_at_zero() {
        // Half-normal(0.05) samples by inversion on a regular grid: the reflected estimate must
        // integrate to 1 on [0, 1] and peak at 0 (the true mode), where an unreflected one halves.
        let n = 20_000;
        let samples: Vec<f64> = (0..n)
            .map(|i| {
                let u = (i as f64 + 0.5) / n as f64;
                0.05 * core::f64::consts::SQRT_2 * inverse_erf(u)
            })
            .collect();
        let kde = ReflectedKde::new(&samples, 0.0, 1.0, 0.01);
        let integral: f64 = (0..1000)
            .map(|i| kde.density((i as f64 + 0.5) / 1000.0))
            .sum::<f64>()
            / 1000.0;
        assert!((integral - 1.0).abs() < 2e-3, "{integral}");
        // True density at 0: 2/(σ√(2π)) = 15.96; smoothing by h = 0.01 lowers it by ~2 %.
        let d0 = kde.density(0.0);
        assert!((d0 - 15.96).abs() < 0.05 * 15.96, "{d0}");
    }

    /// The tabulated bin-grid density equals the point-by-point estimate to rounding (both cut
    /// the kernel at 6h; a bin at the cut may fall on either side, ≤ e^−18 of one kernel), with a
    /// pile at the lower bound and mass at the upper one so that both mirrors count.
    #[test]
    fn bin_grid_density_equals_the_pointwise_estimate() {
        let samples: Vec<f64> = (0..4000)
            .map(|i| {
                let u = (i as f64 + 0.5) / 4000.0;
                if i % 3 == 0 {
                    0.6 + 0.39 * u
                } else {
                    0.05 * u * u
                }
            })
            .collect();
        for bandwidth in [0.002, 0.0137, 0.05] {
            let kde = ReflectedKde::new(&samples, 0.0, 0.99, bandwidth);
            let grid = kde
                .density_on_bin_grid()
                .expect("0.99 is a whole number of bins");
            assert_eq!(grid.len(), 991);
            for (i, &d) in grid.iter().enumerate() {
                let x = (i as f64 * KDE_BIN_WIDTH).min(0.99);
                let direct = kde.density(x);
                assert!(
                    (d - direct).abs() <= 1e-7 * direct.max(1.0),
                    "h {bandwidth}, x {x}: {d} vs {direct}"
                );
            }
        }
        // Not a whole number of bins: no grid.
        assert!(ReflectedKde::new(&samples, 0.0, 0.9905, 0.01)
            .density_on_bin_grid()
            .is_none());
    }

    fn inverse_erf(y: f64) -> f64 {
        // Bisection on libm::erf (monotone) to 1e-15.
        let (mut lo, mut hi) = (0.0, 10.0);
        for _ in 0..200 {
            let mid = 0.5 * (lo + hi);
            if libm::erf(mid) < y {
                lo = mid;
            } else {
                hi = mid;
            }
        }
        0.5 * (lo + hi)
    }
}
