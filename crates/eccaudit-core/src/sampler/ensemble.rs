//! The affine-invariant ensemble sampler with the stretch move: settings, resumable state, stored chains and the one-call driver.

use std::ops::ControlFlow;

use rand::RngExt;
use serde::{Deserialize, Serialize};
use thiserror::Error;

use crate::random::{standard_normal, stream_rng, SimRng};

/// A target density known up to a constant.
pub trait LogDensity {
    /// Number of parameters.
    fn dim(&self) -> usize;
    /// The log-density at `x` (`x.len() == dim()`), −∞ outside the support.
    /// NaN is treated as −∞.
    fn log_density(&self, x: &[f64]) -> f64;
    /// Translations between known, separated modes of the density, `dim()` entries each,
    /// concatenated (default: none). When there are some, [`MODE_JUMP_FRACTION`] of the
    /// walker updates are mode jumps (see [`EnsembleState`]'s step).
    fn mode_jumps(&self) -> &[f64] {
        &[]
    }
}

impl<T: LogDensity + ?Sized> LogDensity for &T {
    fn dim(&self) -> usize {
        (**self).dim()
    }
    fn log_density(&self, x: &[f64]) -> f64 {
        (**self).log_density(x)
    }
    fn mode_jumps(&self) -> &[f64] {
        (**self).mode_jumps()
    }
}

/// Share of the walker updates that are mode jumps when the target has
/// [`LogDensity::mode_jumps`] (stated choice: one in ten, the share of ter Braak's γ = 1 jumps
/// inside the DE move).
pub const MODE_JUMP_FRACTION: f64 = 0.1;

/// A closure used as a [`LogDensity`].
#[derive(Debug, Clone, Copy)]
pub struct DensityFn<F> {
    /// Number of parameters.
    pub dim: usize,
    /// The log-density.
    pub log_density: F,
}

impl<F: Fn(&[f64]) -> f64> LogDensity for DensityFn<F> {
    fn dim(&self) -> usize {
        self.dim
    }
    fn log_density(&self, x: &[f64]) -> f64 {
        (self.log_density)(x)
    }
}

/// Settings of an ensemble run. Total steps taken: `n_burn + n_steps`; of
/// the last `n_steps`, every `thin`-th is stored.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(default)]
pub struct SamplerSettings {
    /// Number of walkers: even and at least twice the dimension (default 32).
    pub n_walkers: usize,
    /// Steps after burn-in (default 2000).
    pub n_steps: usize,
    /// Burn-in steps, discarded (default 500).
    pub n_burn: usize,
    /// Keep every `thin`-th step after burn-in (default 1).
    pub thin: usize,
    /// Stretch-move scale a > 1 (default 2, Goodman & Weare 2010).
    pub stretch_a: f64,
    /// Seed of the random stream.
    pub seed: u64,
    /// Fraction of walker updates made by the differential-evolution move instead of the
    /// stretch move (0 = stretch only; default 0.25). See [`EnsembleState`]'s step.
    pub de_fraction: f64,
    /// Fraction of walker updates made by the ensemble Gaussian independence move (0 = none;
    /// default 0.5); `de_fraction + gaussian_fraction ≤ 1`, the rest are stretch moves. Used
    /// only when the complementary half has at least two walkers per parameter (otherwise its
    /// share goes to DE and stretch in their ratio). See
    /// [`EnsembleState`]'s step.
    pub gaussian_fraction: f64,
}

impl Default for SamplerSettings {
    fn default() -> Self {
        SamplerSettings {
            n_walkers: 32,
            n_steps: 2000,
            n_burn: 500,
            thin: 1,
            stretch_a: 2.0,
            seed: 1,
            de_fraction: DEFAULT_DE_FRACTION,
            gaussian_fraction: DEFAULT_GAUSSIAN_FRACTION,
        }
    }
}

/// Default share of differential-evolution updates: a quarter, beside a quarter of stretch moves
/// (robust to scale, affine invariant) and half ensemble Gaussian moves
/// ([`DEFAULT_GAUSSIAN_FRACTION`]); the DE move brings the optimal random-walk scale for
/// Gaussian-like targets and, through γ = 1 jumps, mode hopping. A stated choice, measured on
/// the posterior of `bench --ess` (DEVELOPERS.md § Performance).
pub const DEFAULT_DE_FRACTION: f64 = 0.25;

/// Default share of ensemble Gaussian independence updates (see [`EnsembleState`]'s step):
/// half. On nearly Gaussian posteriors (well-measured orbits) an accepted independence proposal
/// decorrelates a walker in one step; the stretch and DE moves keep the kernel robust where the
/// posterior is far from Gaussian. A stated choice, measured on the posterior of `bench --ess`
/// (DEVELOPERS.md § Performance).
pub const DEFAULT_GAUSSIAN_FRACTION: f64 = 0.5;

/// Scale of the ensemble Gaussian proposal relative to the complementary half's sample
/// covariance: 1.2 in standard deviation, so that the proposal's tails reach past a covariance
/// estimated from few walkers (an independence proposal should be wider than the target;
/// Tierney 1994, §2.3.3; the value is a stated choice, measured with `bench --ess`).
const GAUSSIAN_SCALE: f64 = 1.2;

/// Errors of the ensemble sampler.
#[derive(Debug, Clone, PartialEq, Error)]
pub enum SamplerError {
    /// The target has no parameters.
    #[error("the target has no parameters")]
    NoParameters,
    /// Too few walkers for the dimension, or an odd number.
    #[error(
        "{n_walkers} walkers for {dim} parameters: the stretch move needs an even number \
         of walkers, at least {minimum} (twice the number of parameters)"
    )]
    WalkerCount {
        /// Walkers asked for.
        n_walkers: usize,
        /// Parameters of the target.
        dim: usize,
        /// Smallest acceptable even count.
        minimum: usize,
    },
    /// A count is above its bound in [`crate::limits`].
    #[error(transparent)]
    TooLarge(#[from] crate::limits::LimitError),
    /// DE fraction outside [0, 1].
    #[error("de_fraction = {de_fraction} must lie in [0, 1]")]
    DeFraction {
        /// Value given.
        de_fraction: f64,
    },
    /// Gaussian-move fraction outside [0, 1], or with the DE fraction above 1.
    #[error(
        "gaussian_fraction = {gaussian_fraction} with de_fraction = {de_fraction}: each must \
         lie in [0, 1] and their sum may not exceed 1"
    )]
    MoveFractions {
        /// Value given.
        gaussian_fraction: f64,
        /// DE fraction given.
        de_fraction: f64,
    },
    /// Initial positions of the wrong length.
    #[error("{got} initial coordinates given for {n_walkers} walkers of {dim} parameters")]
    Positions {
        /// Coordinates given.
        got: usize,
        /// Walkers.
        n_walkers: usize,
        /// Parameters.
        dim: usize,
    },
    /// Stretch scale not above 1.
    #[error("stretch_a = {stretch_a} must be a finite number above 1 (2 is usual)")]
    StretchScale {
        /// Value given.
        stretch_a: f64,
    },
    /// No steps to keep, or thinning of zero.
    #[error("n_steps = {n_steps} and thin = {thin}: need n_steps ≥ thin ≥ 1 to store anything")]
    NothingStored {
        /// Steps after burn-in.
        n_steps: usize,
        /// Thinning.
        thin: usize,
    },
    /// Start point or scales of the wrong length.
    #[error("{what} has {got} entries, the target has {expected} parameters")]
    Length {
        /// `start` or `scales`.
        what: &'static str,
        /// Entries given.
        got: usize,
        /// Entries expected.
        expected: usize,
    },
    /// A start coordinate is not finite.
    #[error("start[{index}] = {value} is not finite")]
    NonFiniteStart {
        /// Parameter index.
        index: usize,
        /// Value given.
        value: f64,
    },
    /// An initial-ball scale is not a positive finite number.
    #[error("scales[{index}] = {value}: every initial-ball scale must be positive and finite")]
    BadScale {
        /// Parameter index.
        index: usize,
        /// Value given.
        value: f64,
    },
    /// No point of finite density was found around the start.
    #[error(
        "walker {walker}: no point with finite log-density in {attempts} draws around the start; \
         start inside the prior support or shrink the scales"
    )]
    NoValidStart {
        /// Walker index.
        walker: usize,
        /// Draws tried.
        attempts: usize,
    },
    /// The state was advanced with a target of another dimension.
    #[error("target has {got} parameters but the ensemble was started with {expected}")]
    TargetDimension {
        /// Parameters of the target given now.
        got: usize,
        /// Parameters at the start.
        expected: usize,
    },
    /// The observer asked to stop.
    #[error("cancelled after {steps_done} of {total_steps} steps")]
    Cancelled {
        /// Steps completed (burn-in included).
        steps_done: usize,
        /// Steps planned.
        total_steps: usize,
    },
}

/// Progress report after each step.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Progress {
    /// Steps done so far, burn-in included.
    pub steps_done: usize,
    /// Steps planned, `n_burn + n_steps`.
    pub total_steps: usize,
    /// True while still in burn-in.
    pub in_burn_in: bool,
    /// Fraction of proposals accepted so far (all steps).
    pub acceptance_fraction: f64,
}

/// The stored samples of a run.
///
/// Layout is **step-major**: sample `(step, walker)` occupies
/// `samples[(step * n_walkers + walker) * dim ..][..dim]` and its
/// log-density is `log_densities[step * n_walkers + walker]`; `step` counts
/// stored (thinned, post-burn-in) steps.
#[derive(Debug, Clone, Default, PartialEq, Serialize)]
pub struct Chains {
    /// Number of walkers.
    pub n_walkers: usize,
    /// Number of parameters.
    pub dim: usize,
    /// Thinning used (stored step `s` is step `n_burn + (s + 1)·thin`).
    pub thin: usize,
    /// Number of stored steps.
    pub n_stored_steps: usize,
    /// The samples, step-major.
    pub samples: Vec<f64>,
    /// The log-densities, step-major.
    pub log_densities: Vec<f64>,
    /// Accepted proposals per walker over all post-burn-in steps.
    pub accepted: Vec<u64>,
    /// Proposals per walker over all post-burn-in steps.
    pub proposals_per_walker: u64,
}

impl Chains {
    /// The position of `walker` at stored step `step`.
    pub fn sample(&self, step: usize, walker: usize) -> &[f64] {
        let start = (step * self.n_walkers + walker) * self.dim;
        &self.samples[start..start + self.dim]
    }

    /// The trace of parameter `param` for one walker, in step order.
    pub fn walker_trace(&self, walker: usize, param: usize) -> Vec<f64> {
        (0..self.n_stored_steps)
            .map(|step| self.samples[(step * self.n_walkers + walker) * self.dim + param])
            .collect()
    }

    /// The traces of parameter `param` for all walkers (one `Vec` per walker).
    pub fn parameter_traces(&self, param: usize) -> Vec<Vec<f64>> {
        (0..self.n_walkers)
            .map(|walker| self.walker_trace(walker, param))
            .collect()
    }

    /// All stored values of parameter `param`, step-major.
    pub fn flat_parameter(&self, param: usize) -> Vec<f64> {
        self.samples
            .iter()
            .skip(param)
            .step_by(self.dim)
            .copied()
            .collect()
    }

    /// Positions of all walkers at the last stored step (walker-major, `dim` each).
    pub fn last_positions(&self) -> &[f64] {
        let per_step = self.n_walkers * self.dim;
        &self.samples[self.samples.len() - per_step..]
    }

    /// The walkers of several ensembles of equal length and dimension side by side, as one set
    /// of chains (ensemble 0's walkers first); for summaries and figures of independent
    /// ensembles run together.
    pub fn concat_walkers(ensembles: &[&Chains]) -> Chains {
        let Some(first) = ensembles.first() else {
            return Chains::default();
        };
        let (dim, n) = (first.dim, first.n_stored_steps);
        let n_walkers: usize = ensembles.iter().map(|c| c.n_walkers).sum();
        let mut samples = Vec::with_capacity(n * n_walkers * dim);
        let mut log_densities = Vec::with_capacity(n * n_walkers);
        for step in 0..n {
            for c in ensembles {
                let w = c.n_walkers;
                samples.extend_from_slice(&c.samples[step * w * dim..(step + 1) * w * dim]);
                log_densities.extend_from_slice(&c.log_densities[step * w..(step + 1) * w]);
            }
        }
        Chains {
            n_walkers,
            dim,
            thin: first.thin,
            n_stored_steps: n,
            samples,
            log_densities,
            accepted: ensembles.iter().flat_map(|c| c.accepted.clone()).collect(),
            proposals_per_walker: first.proposals_per_walker,
        }
    }

    /// Acceptance fraction of each walker after burn-in.
    pub fn acceptance_fractions(&self) -> Vec<f64> {
        self.accepted
            .iter()
            .map(|&a| a as f64 / self.proposals_per_walker.max(1) as f64)
            .collect()
    }

    /// Mean acceptance fraction after burn-in.
    pub fn acceptance_fraction(&self) -> f64 {
        let total: u64 = self.accepted.iter().sum();
        total as f64 / (self.proposals_per_walker.max(1) * self.n_walkers as u64) as f64
    }
}

/// A running ensemble that can be advanced in chunks (e.g. from a Web Worker
/// between progress messages); advancing in chunks gives exactly the same
/// chains as one call, because the random stream lives in the state.
#[derive(Debug, Clone)]
pub struct EnsembleState {
    settings: SamplerSettings,
    dim: usize,
    rng: SimRng,
    positions: Vec<f64>,
    log_densities: Vec<f64>,
    steps_done: usize,
    accepted_all: u64,
    proposal: Vec<f64>,
    gaussian: HalfGaussian,
    chains: Chains,
}

/// The Gaussian fitted to the complementary half of the ensemble (mean and the Cholesky factor
/// of the sample covariance times [`GAUSSIAN_SCALE`]²), rebuilt before each half-step; scratch
/// kept in the state so that the step loop does not allocate.
#[derive(Debug, Clone)]
struct HalfGaussian {
    mean: Vec<f64>,
    /// Lower-triangular factor L, row-major d × d.
    factor: Vec<f64>,
    /// d draws or solved values.
    work: Vec<f64>,
    /// False when the covariance is not positive definite (too few or degenerate walkers).
    usable: bool,
}

impl HalfGaussian {
    fn new(dim: usize) -> Self {
        HalfGaussian {
            mean: vec![0.0; dim],
            factor: vec![0.0; dim * dim],
            work: vec![0.0; dim],
            usable: false,
        }
    }

    /// Fits walkers `first..first + count` of `positions` (walker-major, `dim` each).
    fn fit(&mut self, positions: &[f64], dim: usize, first: usize, count: usize) {
        self.usable = false;
        if count <= dim {
            return;
        }
        let walkers = &positions[first * dim..(first + count) * dim];
        self.mean.fill(0.0);
        for x in walkers.chunks_exact(dim) {
            for (m, v) in self.mean.iter_mut().zip(x) {
                *m += v;
            }
        }
        for m in &mut self.mean {
            *m /= count as f64;
        }
        // Covariance (lower triangle) × scale² / (count − 1), then Cholesky in place.
        let f = GAUSSIAN_SCALE * GAUSSIAN_SCALE / (count - 1) as f64;
        self.factor.fill(0.0);
        for x in walkers.chunks_exact(dim) {
            // The deviations once per walker (`work` is free until the moves), then the lower
            // triangle: the same products summed in the same walker order.
            for (d, (xi, mi)) in self.work.iter_mut().zip(x.iter().zip(&self.mean)) {
                *d = xi - mi;
            }
            for (i, row) in self.factor.chunks_exact_mut(dim).enumerate() {
                let di = self.work[i];
                for (f, dj) in row[..=i].iter_mut().zip(&self.work[..=i]) {
                    *f += di * dj;
                }
            }
        }
        for i in 0..dim {
            for j in 0..=i {
                self.factor[i * dim + j] *= f;
            }
        }
        for j in 0..dim {
            let mut diagonal = self.factor[j * dim + j];
            for k in 0..j {
                diagonal -= self.factor[j * dim + k] * self.factor[j * dim + k];
            }
            if !(diagonal > 0.0 && diagonal.is_finite()) {
                return;
            }
            let l_jj = libm::sqrt(diagonal);
            self.factor[j * dim + j] = l_jj;
            for i in j + 1..dim {
                let mut v = self.factor[i * dim + j];
                for k in 0..j {
                    v -= self.factor[i * dim + k] * self.factor[j * dim + k];
                }
                self.factor[i * dim + j] = v / l_jj;
            }
        }
        self.usable = true;
    }

    /// |L⁻¹(x − mean)|² by forward substitution.
    fn mahalanobis_squared(&mut self, x: &[f64]) -> f64 {
        let dim = self.mean.len();
        let mut sum = 0.0;
        for (i, (xi, mi)) in x.iter().zip(&self.mean).enumerate() {
            let mut v = xi - mi;
            for k in 0..i {
                v -= self.factor[i * dim + k] * self.work[k];
            }
            v /= self.factor[i * dim + i];
            self.work[i] = v;
            sum += v * v;
        }
        sum
    }
}

impl EnsembleState {
    /// Checks the settings and places the walkers in a Gaussian ball
    /// `start_i + scales_i · N(0, 1)`, redrawing (up to 1000 times) any walker
    /// that lands where the log-density is not finite.
    pub fn new(
        target: &impl LogDensity,
        start: &[f64],
        scales: &[f64],
        settings: &SamplerSettings,
    ) -> Result<Self, SamplerError> {
        let dim = target.dim();
        check_settings(dim, settings)?;
        for (what, values) in [("start", start), ("scales", scales)] {
            if values.len() != dim {
                return Err(SamplerError::Length {
                    what,
                    got: values.len(),
                    expected: dim,
                });
            }
        }
        if let Some((index, &value)) = start.iter().enumerate().find(|(_, v)| !v.is_finite()) {
            return Err(SamplerError::NonFiniteStart { index, value });
        }
        if let Some((index, &value)) = scales
            .iter()
            .enumerate()
            .find(|(_, v)| !(v.is_finite() && **v > 0.0))
        {
            return Err(SamplerError::BadScale { index, value });
        }

        const MAX_ATTEMPTS: usize = 1000;
        let n_walkers = settings.n_walkers;
        let mut rng = stream_rng(settings.seed, 0);
        let mut positions = vec![0.0; n_walkers * dim];
        let mut log_densities = vec![f64::NEG_INFINITY; n_walkers];
        for walker in 0..n_walkers {
            let x = &mut positions[walker * dim..(walker + 1) * dim];
            let mut attempts = 0;
            loop {
                if attempts == MAX_ATTEMPTS {
                    return Err(SamplerError::NoValidStart {
                        walker,
                        attempts: MAX_ATTEMPTS,
                    });
                }
                attempts += 1;
                for i in 0..dim {
                    x[i] = start[i] + scales[i] * standard_normal(&mut rng);
                }
                let lp = finite_or_minus_infinity(target.log_density(x));
                if lp.is_finite() {
                    log_densities[walker] = lp;
                    break;
                }
            }
        }
        Ok(Self::assemble(settings, dim, rng, positions, log_densities))
    }

    /// Starts from given walker positions (walker-major, `dim` each), e.g. a dispersed set
    /// prepared by the caller, on random stream `stream` of `settings.seed` (so that several
    /// independent ensembles of one seed draw independent numbers). Every position must have a
    /// finite log-density.
    pub fn from_positions(
        target: &impl LogDensity,
        positions: Vec<f64>,
        settings: &SamplerSettings,
        stream: u64,
    ) -> Result<Self, SamplerError> {
        let dim = target.dim();
        check_settings(dim, settings)?;
        if positions.len() != settings.n_walkers * dim {
            return Err(SamplerError::Positions {
                got: positions.len(),
                n_walkers: settings.n_walkers,
                dim,
            });
        }
        let mut log_densities = Vec::with_capacity(settings.n_walkers);
        for (walker, x) in positions.chunks_exact(dim).enumerate() {
            if let Some((index, &value)) = x.iter().enumerate().find(|(_, v)| !v.is_finite()) {
                let _ = walker;
                return Err(SamplerError::NonFiniteStart { index, value });
            }
            let lp = finite_or_minus_infinity(target.log_density(x));
            if !lp.is_finite() {
                return Err(SamplerError::NoValidStart {
                    walker,
                    attempts: 1,
                });
            }
            log_densities.push(lp);
        }
        Ok(Self::assemble(
            settings,
            dim,
            stream_rng(settings.seed, stream),
            positions,
            log_densities,
        ))
    }

    fn assemble(
        settings: &SamplerSettings,
        dim: usize,
        rng: SimRng,
        positions: Vec<f64>,
        log_densities: Vec<f64>,
    ) -> Self {
        let n_walkers = settings.n_walkers;
        let n_stored = settings.n_steps / settings.thin;
        let chains = Chains {
            n_walkers,
            dim,
            thin: settings.thin,
            n_stored_steps: 0,
            samples: Vec::with_capacity(n_stored * n_walkers * dim),
            log_densities: Vec::with_capacity(n_stored * n_walkers),
            accepted: vec![0; n_walkers],
            proposals_per_walker: 0,
        };
        EnsembleState {
            settings: *settings,
            dim,
            rng,
            positions,
            log_densities,
            steps_done: 0,
            accepted_all: 0,
            proposal: vec![0.0; dim],
            gaussian: HalfGaussian::new(dim),
            chains,
        }
    }

    /// The settings (with `n_steps` as extended so far).
    pub fn settings(&self) -> &SamplerSettings {
        &self.settings
    }

    /// Steps done so far, burn-in included.
    pub fn steps_done(&self) -> usize {
        self.steps_done
    }

    /// Plans `extra` more steps after the planned end (run-until-converged extends a run this
    /// way; the chains continue exactly as if the longer run had been planned from the start).
    pub fn extend(&mut self, extra: usize) {
        self.settings.n_steps += extra;
    }

    /// Reserves room for `stored_steps` stored steps in all (one allocation up front instead of
    /// growth by reallocation and copies during the run; the caller bounds the count).
    pub fn reserve_stored_steps(&mut self, stored_steps: usize) {
        let (w, dim) = (self.settings.n_walkers, self.dim);
        let chains = &mut self.chains;
        let samples = stored_steps * w * dim;
        chains
            .samples
            .reserve_exact(samples.saturating_sub(chains.samples.len()));
        let densities = stored_steps * w;
        chains
            .log_densities
            .reserve_exact(densities.saturating_sub(chains.log_densities.len()));
    }

    /// Keeps every second stored step and doubles the thinning, so that a long run holds at most
    /// a bounded number of stored steps: stored step s is step n_burn + (s + 1)·thin, so the
    /// odd-numbered ones are exactly those of the doubled thinning, and later steps are stored
    /// by it.
    pub fn halve_storage(&mut self) {
        let (w, dim) = (self.settings.n_walkers, self.dim);
        let chains = &mut self.chains;
        let kept = chains.n_stored_steps / 2;
        for s in 0..kept {
            let from = 2 * s + 1;
            chains
                .samples
                .copy_within(from * w * dim..(from + 1) * w * dim, s * w * dim);
            chains
                .log_densities
                .copy_within(from * w..(from + 1) * w, s * w);
        }
        chains.samples.truncate(kept * w * dim);
        chains.log_densities.truncate(kept * w);
        chains.n_stored_steps = kept;
        self.settings.thin *= 2;
        chains.thin = self.settings.thin;
    }

    /// Moves every walker whose log-density lies more than `gap` below the median of the
    /// ensemble's onto the position of a randomly chosen walker that does not (drawn from the
    /// state's own stream), and returns the walkers moved. Meant for the end of burn-in only,
    /// whose draws are discarded: it removes walkers stranded in a far lower-probability mode,
    /// which the stretch move hardly ever brings back (Goodman & Weare 2010, §5; a walker in a
    /// mode e^gap times less probable contributes nothing to the posterior). Common practice.
    pub fn relocate_stranded_walkers(&mut self, gap: f64) -> Vec<usize> {
        let n = self.settings.n_walkers;
        let mut sorted = self.log_densities.clone();
        sorted.sort_by(f64::total_cmp);
        let median = sorted[n / 2];
        let stranded: Vec<usize> = (0..n)
            // NaN-safe: a walker whose log-density is not above the cut is stranded.
            .filter(|&k| {
                self.log_densities[k].partial_cmp(&(median - gap))
                    != Some(std::cmp::Ordering::Greater)
                    && self.log_densities[k] != median - gap
            })
            .collect();
        let good: Vec<usize> = (0..n).filter(|k| !stranded.contains(k)).collect();
        if good.is_empty() {
            return Vec::new();
        }
        let dim = self.dim;
        for &k in &stranded {
            let j = good[self.rng.random_range(0..good.len() as u32) as usize];
            let (from, to) = (j * dim, k * dim);
            for i in 0..dim {
                self.positions[to + i] = self.positions[from + i];
            }
            self.log_densities[k] = self.log_densities[j];
        }
        stranded
    }

    /// Steps planned in total (`n_burn + n_steps`).
    pub fn total_steps(&self) -> usize {
        self.settings.n_burn + self.settings.n_steps
    }

    /// True once all steps are done.
    pub fn is_finished(&self) -> bool {
        self.steps_done >= self.total_steps()
    }

    /// Current positions, walker-major (`dim` entries per walker).
    pub fn positions(&self) -> &[f64] {
        &self.positions
    }

    /// Current log-densities, one per walker.
    pub fn log_densities(&self) -> &[f64] {
        &self.log_densities
    }

    /// The progress so far.
    pub fn progress(&self) -> Progress {
        let proposals = (self.steps_done * self.settings.n_walkers).max(1);
        Progress {
            steps_done: self.steps_done,
            total_steps: self.total_steps(),
            in_burn_in: self.steps_done < self.settings.n_burn,
            acceptance_fraction: self.accepted_all as f64 / proposals as f64,
        }
    }

    /// The chains stored so far.
    pub fn chains(&self) -> &Chains {
        &self.chains
    }

    /// Consumes the state and returns the stored chains.
    pub fn into_chains(self) -> Chains {
        self.chains
    }

    /// Advances by up to `n_steps` steps (fewer if the run ends) and returns
    /// the number of steps taken.
    pub fn advance(
        &mut self,
        target: &impl LogDensity,
        n_steps: usize,
    ) -> Result<usize, SamplerError> {
        if target.dim() != self.dim {
            return Err(SamplerError::TargetDimension {
                got: target.dim(),
                expected: self.dim,
            });
        }
        let todo = n_steps.min(self.total_steps() - self.steps_done);
        for _ in 0..todo {
            self.step(target);
        }
        Ok(todo)
    }

    /// One step of the parallel ensemble update (Foreman-Mackey et al. 2013, PASP 125, 306,
    /// Algorithm 3): the first half of the walkers moves using the second half as the
    /// complementary ensemble, then the second half using the updated first half. Each walker
    /// update is, with probability `gaussian_fraction`, an ensemble Gaussian move, with
    /// probability `de_fraction` a differential-evolution move and otherwise a stretch move; a
    /// random choice of valid Metropolis–Hastings kernels independent of the state is itself
    /// valid (a mixture kernel; Tierney 1994, Ann. Stat. 22, 1701, §2.4).
    ///
    /// * Ensemble Gaussian move: an independence proposal (Tierney 1994, §2.3.3)
    ///   `Y ~ N(μ, s² Σ)`, μ and Σ the mean and sample covariance of the complementary half,
    ///   s = 1.2, accepted with probability `min(1, p(Y) q(X_k) / (p(X_k) q(Y)))`. The
    ///   proposal depends only on the complementary walkers, which stay fixed during the
    ///   half-step, so the update leaves the joint ensemble density invariant exactly as the
    ///   stretch move does (the argument of Foreman-Mackey et al. 2013, §2; emcee's `KDEMove`
    ///   is the same construction with a kernel density estimate). Used only when the half has
    ///   more walkers than parameters and Σ is positive definite.
    ///
    /// * Stretch move (Goodman & Weare 2010, CAMCOS 5, 65, eqs. 7 and 9): proposal
    ///   `Y = X_j + z (X_k − X_j)` with `z` drawn from `g(z) ∝ 1/√z` on `[1/a, a]`; accepted
    ///   with probability `min(1, z^(d−1) p(Y)/p(X_k))`.
    /// * Differential-evolution move (ter Braak 2006, Stat. Comput. 16, 239, eq. 2; used for RV
    ///   fits by Nelson, Ford & Payne 2014, ApJS 210, 11): `Y = X_k + γ (X_r1 − X_r2)` with
    ///   r1 ≠ r2 two walkers of the complementary half, γ = 2.38/√(2d) · (1 + 0.1 ξ), ξ ~ N(0, 1)
    ///   (ter Braak's optimal scale for Gaussian targets, jittered), and γ = 1 in one move of
    ///   ten (ter Braak's jump between modes); the proposal is symmetric (the pair (r2, r1) is as
    ///   likely as (r1, r2)), so it is accepted with probability `min(1, p(Y)/p(X_k))`.
    /// * Mode jump, only for targets with [`LogDensity::mode_jumps`], in [`MODE_JUMP_FRACTION`]
    ///   of the updates (decided before the other moves): `Y = X_k ± d_i`, d_i one of the given
    ///   translations between known modes (uniformly chosen, sign ±1 with probability ½), the
    ///   translation of smart darting (Andricioaei, Straub & Voter 2001, J. Chem. Phys. 114,
    ///   6994) and of the mode-jumping proposals of Tjelmeland & Hegstad (2001, Scand. J. Stat.
    ///   28, 205); from memory. The set of translations is fixed and symmetric (Y − X_k and
    ///   X_k − Y are equally likely), so it is accepted with probability `min(1, p(Y)/p(X_k))`.
    fn step(&mut self, target: &impl LogDensity) {
        let n_walkers = self.settings.n_walkers;
        let half = n_walkers / 2;
        let a = self.settings.stretch_a;
        let de_fraction = self.settings.de_fraction;
        let gaussian_fraction = self.settings.gaussian_fraction;
        let dim = self.dim;
        let gamma_0 = 2.38 / libm::sqrt(2.0 * dim as f64);
        let post_burn = self.steps_done >= self.settings.n_burn;
        let jumps = target.mode_jumps();
        let n_jumps = jumps.len() / dim.max(1);
        for (active_start, other_start) in [(0, half), (half, 0)] {
            // The complementary half's Gaussian: it depends on those walkers only, which do not
            // move during this half-step, so the independence proposal is a valid MH kernel.
            // Only with at least two walkers per parameter in the half: fewer estimate the
            // covariance too poorly (measured: with 11 walkers for 10 parameters most proposals
            // were rejected and two-companion trials stopped converging).
            let gaussian_fraction = if gaussian_fraction > 0.0 && half >= 2 * dim {
                self.gaussian.fit(&self.positions, dim, other_start, half);
                if self.gaussian.usable {
                    gaussian_fraction
                } else {
                    0.0
                }
            } else {
                0.0
            };
            // Without the Gaussian move its share goes to DE and stretch in their ratio (the
            // defaults then give the DE/stretch halves of the mixture without it).
            let de_share = if gaussian_fraction == 0.0 && self.settings.gaussian_fraction < 1.0 {
                de_fraction / (1.0 - self.settings.gaussian_fraction)
            } else {
                de_fraction
            };
            for k in active_start..active_start + half {
                // Mode jumps draw from the stream only when the target has some, so runs
                // without them keep their bits.
                if n_jumps > 0 && self.rng.random::<f64>() < MODE_JUMP_FRACTION {
                    let i = self.rng.random_range(0..2 * n_jumps as u32) as usize;
                    let sign = if i.is_multiple_of(2) { 1.0 } else { -1.0 };
                    let d = &jumps[(i / 2) * dim..(i / 2 + 1) * dim];
                    for ((y, &x), &di) in self
                        .proposal
                        .iter_mut()
                        .zip(&self.positions[k * dim..(k + 1) * dim])
                        .zip(d)
                    {
                        *y = x + sign * di;
                    }
                    self.metropolis(target, k, 0.0, post_burn);
                    continue;
                }
                // u32 range sampling is the same on 32- and 64-bit targets. One uniform picks
                // the move: Gaussian below gaussian_fraction, DE in the next de_fraction.
                let (use_gaussian, use_de) =
                    if (de_fraction > 0.0 && half >= 2) || gaussian_fraction > 0.0 {
                        let u: f64 = self.rng.random();
                        if u < gaussian_fraction {
                            (true, false)
                        } else {
                            (false, half >= 2 && u - gaussian_fraction < de_share)
                        }
                    } else {
                        (false, false)
                    };
                let log_jacobian = if use_gaussian {
                    // Y = mean + L z: log q(X_k) − log q(Y) = −½|L⁻¹(X_k − mean)|² + ½|z|²
                    // (the normalisers cancel).
                    let mut z_squared = 0.0;
                    for i in 0..dim {
                        let z = standard_normal(&mut self.rng);
                        self.gaussian.work[i] = z;
                        z_squared += z * z;
                    }
                    for i in 0..dim {
                        let mut v = self.gaussian.mean[i];
                        for j in 0..=i {
                            v += self.gaussian.factor[i * dim + j] * self.gaussian.work[j];
                        }
                        self.proposal[i] = v;
                    }
                    let current = &self.positions[k * dim..(k + 1) * dim];
                    let d_current = self.gaussian.mahalanobis_squared(current);
                    0.5 * (z_squared - d_current)
                } else if use_de {
                    let r1 = other_start + self.rng.random_range(0..half as u32) as usize;
                    let mut r2 = other_start + self.rng.random_range(0..half as u32 - 1) as usize;
                    if r2 >= r1 {
                        r2 += 1;
                    }
                    let jump: f64 = self.rng.random();
                    let gamma = if jump < 0.1 {
                        1.0
                    } else {
                        gamma_0 * (1.0 + 0.1 * standard_normal(&mut self.rng))
                    };
                    for i in 0..dim {
                        let d = self.positions[r1 * dim + i] - self.positions[r2 * dim + i];
                        self.proposal[i] = self.positions[k * dim + i] + gamma * d;
                    }
                    0.0
                } else {
                    let j = other_start + self.rng.random_range(0..half as u32) as usize;
                    let u: f64 = self.rng.random();
                    let z = ((a - 1.0) * u + 1.0) * ((a - 1.0) * u + 1.0) / a;
                    for i in 0..dim {
                        let x_j = self.positions[j * dim + i];
                        let x_k = self.positions[k * dim + i];
                        self.proposal[i] = x_j + z * (x_k - x_j);
                    }
                    (dim as f64 - 1.0) * libm::log(z)
                };
                self.metropolis(target, k, log_jacobian, post_burn);
            }
        }
        self.steps_done += 1;
        if post_burn {
            self.chains.proposals_per_walker += 1;
            let since_burn = self.steps_done - self.settings.n_burn;
            if since_burn.is_multiple_of(self.settings.thin) {
                self.chains.samples.extend_from_slice(&self.positions);
                self.chains
                    .log_densities
                    .extend_from_slice(&self.log_densities);
                self.chains.n_stored_steps += 1;
            }
        }
    }
}

impl EnsembleState {
    /// Accepts `self.proposal` for walker `k` with probability min(1, exp(`log_jacobian` +
    /// ln p(Y) − ln p(X_k))) (Metropolis–Hastings), counting the acceptance.
    fn metropolis(
        &mut self,
        target: &impl LogDensity,
        k: usize,
        log_jacobian: f64,
        post_burn: bool,
    ) {
        let dim = self.dim;
        let lp_new = finite_or_minus_infinity(target.log_density(&self.proposal));
        let log_ratio = log_jacobian + lp_new - self.log_densities[k];
        let u_accept: f64 = self.rng.random();
        // ln u < 0 for u in [0, 1), so a non-negative log ratio accepts without the
        // logarithm (the same decision, and the same draws, as always taking it).
        let accept = log_ratio >= 0.0 || libm::log(u_accept) < log_ratio;
        if lp_new > f64::NEG_INFINITY && accept {
            self.positions[k * dim..(k + 1) * dim].copy_from_slice(&self.proposal);
            self.log_densities[k] = lp_new;
            self.accepted_all += 1;
            if post_burn {
                self.chains.accepted[k] += 1;
            }
        }
    }
}

/// The checks shared by both constructors.
fn check_settings(dim: usize, settings: &SamplerSettings) -> Result<(), SamplerError> {
    if dim == 0 {
        return Err(SamplerError::NoParameters);
    }
    let minimum = 2 * dim;
    if settings.n_walkers < minimum || !settings.n_walkers.is_multiple_of(2) {
        return Err(SamplerError::WalkerCount {
            n_walkers: settings.n_walkers,
            dim,
            minimum,
        });
    }
    if !(settings.stretch_a.is_finite() && settings.stretch_a > 1.0) {
        return Err(SamplerError::StretchScale {
            stretch_a: settings.stretch_a,
        });
    }
    if !(settings.de_fraction >= 0.0 && settings.de_fraction <= 1.0) {
        return Err(SamplerError::DeFraction {
            de_fraction: settings.de_fraction,
        });
    }
    let g = settings.gaussian_fraction;
    if !((0.0..=1.0).contains(&g) && g + settings.de_fraction <= 1.0) {
        return Err(SamplerError::MoveFractions {
            gaussian_fraction: g,
            de_fraction: settings.de_fraction,
        });
    }
    if settings.thin == 0 || settings.n_steps < settings.thin {
        return Err(SamplerError::NothingStored {
            n_steps: settings.n_steps,
            thin: settings.thin,
        });
    }
    crate::limits::check_sampler_counts(
        settings.n_walkers,
        settings.n_burn,
        settings.n_steps,
        settings.thin,
    )?;
    Ok(())
}

fn finite_or_minus_infinity(lp: f64) -> f64 {
    if lp.is_nan() {
        f64::NEG_INFINITY
    } else {
        lp
    }
}

/// Runs the whole ensemble: burn-in, then `n_steps` stored every `thin`.
/// `observer` is called after every step with the [`Progress`]; returning
/// `ControlFlow::Break(())` stops the run with [`SamplerError::Cancelled`].
/// The core reads no clock: an observer that wants to report at most every
/// so many milliseconds keeps its own time.
pub fn run_ensemble(
    target: &impl LogDensity,
    start: &[f64],
    scales: &[f64],
    settings: &SamplerSettings,
    observer: &mut impl FnMut(Progress) -> ControlFlow<()>,
) -> Result<Chains, SamplerError> {
    let mut state = EnsembleState::new(target, start, scales, settings)?;
    while !state.is_finished() {
        state.advance(target, 1)?;
        if observer(state.progress()).is_break() {
            return Err(SamplerError::Cancelled {
                steps_done: state.steps_done,
                total_steps: state.total_steps(),
            });
        }
    }
    Ok(state.into_chains())
}

#[cfg(test)]
mod tests {
    use super::*;

    fn gaussian(dim: usize) -> DensityFn<impl Fn(&[f64]) -> f64> {
        DensityFn {
            dim,
            log_density: |x: &[f64]| -0.5 * x.iter().map(|v| v * v).sum::<f64>(),
        }
    }

    fn small_settings() -> SamplerSettings {
        SamplerSettings {
            n_walkers: 8,
            n_steps: 60,
            n_burn: 20,
            thin: 3,
            stretch_a: 2.0,
            seed: 42,
            de_fraction: 0.5,
            gaussian_fraction: 0.25,
        }
    }

    /// The ensemble Gaussian move keeps a non-Gaussian target invariant: a 2-D target whose
    /// first coordinate is a standard Laplace variable (heavier tails than any Gaussian
    /// proposal: the case where an independence proposal is weakest) and whose second is
    /// N(x₀, 0.5²), sampled with Gaussian moves alone (only the Gaussian move can be wrong here)
    /// and mixed with stretch moves. Moments against the exact ones (E x₀ = 0, Var x₀ = 2,
    /// E x₁ = 0, Var x₁ = 2 + 0.25): within 4 Monte-Carlo standard errors, σ/√ESS for the means
    /// and √((E x⁴ − (E x²)²)/ESS) from the draws for the second moments, ESS = N/τ with the
    /// walker-averaged τ of that coordinate.
    #[test]
    fn gaussian_move_keeps_a_heavy_tailed_target() {
        let target = DensityFn {
            dim: 2,
            log_density: |x: &[f64]| -x[0].abs() - 0.5 * (x[1] - x[0]) * (x[1] - x[0]) / 0.25,
        };
        for gaussian_fraction in [1.0, 0.5] {
            let settings = SamplerSettings {
                n_walkers: 16,
                n_steps: 20_000,
                n_burn: 500,
                thin: 1,
                stretch_a: 2.0,
                seed: 7,
                de_fraction: 0.0,
                gaussian_fraction,
            };
            let chains = run_ensemble(&target, &[0.0; 2], &[1.0; 2], &settings, &mut |_| {
                ControlFlow::Continue(())
            })
            .unwrap();
            for (param, variance) in [(0, 2.0), (1, 2.25)] {
                let traces = chains.parameter_traces(param);
                let tau = crate::sampler::integrated_autocorrelation_time(&traces).tau;
                let values = chains.flat_parameter(param);
                let n = values.len() as f64;
                let ess = n / tau;
                let mean = values.iter().sum::<f64>() / n;
                let second = values.iter().map(|v| v * v).sum::<f64>() / n;
                let fourth = values.iter().map(|v| v.powi(4)).sum::<f64>() / n;
                let mean_error = (variance / ess).sqrt();
                let second_error = ((fourth - second * second) / ess).sqrt();
                assert!(
                    mean.abs() < 4.0 * mean_error,
                    "fraction {gaussian_fraction}, x{param}: mean {mean} ± {mean_error}"
                );
                assert!(
                    (second - variance).abs() < 4.0 * second_error,
                    "fraction {gaussian_fraction}, x{param}: E x² {second} ± {second_error}"
                );
            }
        }
    }

    #[test]
    fn chunked_advance_equals_one_run_and_layout_is_step_major() {
        let target = gaussian(3);
        let settings = small_settings();
        let one = run_ensemble(&target, &[0.0; 3], &[1.0; 3], &settings, &mut |_| {
            ControlFlow::Continue(())
        })
        .unwrap();
        let mut state = EnsembleState::new(&target, &[0.0; 3], &[1.0; 3], &settings).unwrap();
        while !state.is_finished() {
            state.advance(&target, 7).unwrap();
        }
        let chunked = state.into_chains();
        assert_eq!(one, chunked);
        assert_eq!(one.n_stored_steps, 20);
        assert_eq!(one.samples.len(), 20 * 8 * 3);
        assert_eq!(one.proposals_per_walker, 60);
        // Step-major layout: walker 5, step 7, parameter 2.
        assert_eq!(one.sample(7, 5)[2], one.samples[(7 * 8 + 5) * 3 + 2]);
        assert_eq!(one.walker_trace(5, 2)[7], one.sample(7, 5)[2]);
        assert_eq!(one.flat_parameter(2)[7 * 8 + 5], one.sample(7, 5)[2]);
        // Stored log-densities belong to the stored samples.
        let lp = target.log_density(one.sample(7, 5));
        assert_eq!(one.log_densities[7 * 8 + 5], lp);
    }

    #[test]
    fn same_seed_same_chains_other_seed_differs() {
        let target = gaussian(2);
        let run = |seed| {
            let settings = SamplerSettings {
                seed,
                ..small_settings()
            };
            run_ensemble(&target, &[1.0, 2.0], &[0.1, 0.1], &settings, &mut |_| {
                ControlFlow::Continue(())
            })
            .unwrap()
        };
        assert_eq!(run(5), run(5));
        assert_ne!(run(5).samples, run(6).samples);
    }

    #[test]
    fn observer_sees_every_step_and_can_cancel() {
        let target = gaussian(2);
        let settings = small_settings();
        let mut seen = Vec::new();
        let result = run_ensemble(&target, &[0.0; 2], &[1.0; 2], &settings, &mut |p| {
            seen.push(p.steps_done);
            if p.steps_done == 30 {
                ControlFlow::Break(())
            } else {
                ControlFlow::Continue(())
            }
        });
        assert_eq!(
            result,
            Err(SamplerError::Cancelled {
                steps_done: 30,
                total_steps: 80
            })
        );
        assert_eq!(seen, (1..=30).collect::<Vec<_>>());
    }

    #[test]
    fn bad_settings_and_starts_are_typed_errors() {
        let target = gaussian(3);
        let new = |settings: SamplerSettings, start: &[f64], scales: &[f64]| {
            EnsembleState::new(&target, start, scales, &settings).map(|_| ())
        };
        let ok = small_settings();
        assert_eq!(
            new(SamplerSettings { n_walkers: 4, ..ok }, &[0.0; 3], &[1.0; 3]),
            Err(SamplerError::WalkerCount {
                n_walkers: 4,
                dim: 3,
                minimum: 6
            })
        );
        assert!(matches!(
            new(SamplerSettings { n_walkers: 9, ..ok }, &[0.0; 3], &[1.0; 3]),
            Err(SamplerError::WalkerCount { .. })
        ));
        assert_eq!(
            new(
                SamplerSettings {
                    stretch_a: 1.0,
                    ..ok
                },
                &[0.0; 3],
                &[1.0; 3]
            ),
            Err(SamplerError::StretchScale { stretch_a: 1.0 })
        );
        assert!(matches!(
            new(SamplerSettings { thin: 0, ..ok }, &[0.0; 3], &[1.0; 3]),
            Err(SamplerError::NothingStored { .. })
        ));
        assert!(matches!(
            new(
                SamplerSettings {
                    gaussian_fraction: 0.6,
                    ..ok
                },
                &[0.0; 3],
                &[1.0; 3]
            ),
            Err(SamplerError::MoveFractions { .. })
        ));
        assert_eq!(
            new(ok, &[0.0; 2], &[1.0; 3]),
            Err(SamplerError::Length {
                what: "start",
                got: 2,
                expected: 3
            })
        );
        assert!(matches!(
            new(ok, &[0.0, f64::NAN, 0.0], &[1.0; 3]),
            Err(SamplerError::NonFiniteStart { index: 1, .. })
        ));
        assert!(matches!(
            new(ok, &[0.0; 3], &[1.0, 0.0, 1.0]),
            Err(SamplerError::BadScale { index: 1, .. })
        ));
        let nowhere = DensityFn {
            dim: 3,
            log_density: |_: &[f64]| f64::NEG_INFINITY,
        };
        assert_eq!(
            EnsembleState::new(&nowhere, &[0.0; 3], &[1.0; 3], &ok).map(|_| ()),
            Err(SamplerError::NoValidStart {
                walker: 0,
                attempts: 1000
            })
        );
        let mut state = EnsembleState::new(&target, &[0.0; 3], &[1.0; 3], &ok).unwrap();
        assert_eq!(
            state.advance(&gaussian(2), 1),
            Err(SamplerError::TargetDimension {
                got: 2,
                expected: 3
            })
        );
    }

    /// Walkers that start partly outside the support are redrawn, and no
    /// stored sample ever leaves the support.
    #[test]
    fn support_is_respected() {
        let half_plane = DensityFn {
            dim: 2,
            log_density: |x: &[f64]| {
                if x[0] < 0.0 {
                    f64::NEG_INFINITY
                } else {
                    -0.5 * (x[0] * x[0] + x[1] * x[1])
                }
            },
        };
        let chains = run_ensemble(
            &half_plane,
            &[0.0, 0.0],
            &[1.0, 1.0],
            &small_settings(),
            &mut |_| ControlFlow::Continue(()),
        )
        .unwrap();
        assert!(chains.flat_parameter(0).iter().all(|&x| x >= 0.0));
    }
}
