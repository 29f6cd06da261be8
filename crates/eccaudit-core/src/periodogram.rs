//! Period search: the generalised Lomb–Scargle periodogram, its frequency grid, spectral window and Baluev false-alarm probability.
//!
//! Everything here is a pure function on slices of epochs: `times` in days,
//! `values` (radial velocities, m/s) and their one-sigma `errors` (m/s).
//!
//! * [`gls_power`] — the generalised Lomb–Scargle periodogram with a floating
//!   mean and weights w_i ∝ 1/σ_i² (Zechmeister & Kürster 2009, A&A 496, 577),
//!   normalised to p(ω) ∈ [0, 1] (their eq. 5, identical to astropy's
//!   `normalization='standard'` with `fit_mean=True, center_data=True`).
//! * [`frequency_grid`] — a uniform frequency grid with a stated rule.
//! * [`spectral_window`] — the weighted spectral window of the sampling.
//! * [`false_alarm_probability`] / [`false_alarm_level`] — Baluev (2008,
//!   MNRAS 385, 1279) alias-free approximation for the highest peak, and its
//!   inverse for threshold lines.
//! * [`top_peak_indices`] — distinct local maxima for multi-start fitting.
//! * [`periodogram`] — all of the above in one [`Periodogram`] result; [`peak_search`] — its
//!   peaks alone, for choosing the starting periods of a fit.
//!
//! **Residual periodogram.** Nothing model-specific is needed: call
//! [`periodogram`] (or [`gls_power`]) with the residuals of a fit as `values`
//! and the same `times` and `errors`. The floating mean absorbs any offset
//! left in the residuals; the false-alarm probability is then the probability
//! of a peak that high in pure noise, which ignores the parameters already
//! fitted (the usual, slightly optimistic, practice).
//!
//! Equation numbers: Zechmeister & Kürster 2009 eq. 4 (normalisation), eq. 5
//! (power), eq. 6 (D) are from memory of the paper; Baluev 2008 eq. 5 (Davies
//! bound), eq. 6 (alias-free approximation) and Table 1 are as cited in
//! astropy 8.0.2 (`timeseries/periodograms/lombscargle/_statistics.py`).

use serde::Serialize;
use thiserror::Error;

use crate::kepler::Lanes;

/// Fewest epochs accepted. Each trial frequency fits three parameters
/// (offset, cosine and sine amplitudes), so at least one degree of freedom
/// must remain; with three epochs the power is identically 1.
pub const MIN_EPOCHS: usize = 4;

/// Default number of grid samples per resolution element 1/T (T = baseline).
pub const DEFAULT_OVERSAMPLING: f64 = 10.0;

/// Default cap on the number of grid frequencies; a larger grid is refused
/// with [`PeriodogramError::GridTooLarge`] instead of running for minutes.
pub const DEFAULT_MAX_N_FREQ: usize = 1_000_000;

/// Default number of distinct peaks reported by [`periodogram`].
pub const DEFAULT_N_TOP_PEAKS: usize = 5;

/// False-alarm probabilities whose power levels [`periodogram`] reports.
pub const DEFAULT_FAP_THRESHOLDS: [f64; 3] = [0.1, 0.01, 0.001];

/// Relative size of the determinant D = CC·SS − CS² (Zechmeister & Kürster
/// 2009, eq. 6) below which the cosine and sine columns are taken as
/// collinear (e.g. a frequency that is an exact alias of zero for the
/// sampling) and the fit falls back to one sinusoid column.
const DEGENERACY_TOLERANCE: f64 = 1e-12;

/// Weighted variance of a cosine or sine column (values in [−1, 1], weights
/// summing to one) below which the column is constant to rounding: a phase
/// spread under ~1e-9 rad, i.e. the frequency is an exact alias of zero.
const COLUMN_VARIANCE_FLOOR: f64 = 1e-18;

/// Values whose weighted scatter is below this fraction of their largest
/// magnitude are treated as constant: the power would be rounding noise.
const CONSTANT_VALUES_TOLERANCE: f64 = 1e-12;

/// Number of uniform steps in power used to bracket the false-alarm level.
const FAP_LEVEL_SCAN_STEPS: usize = 1000;

/// What went wrong in a period search; each variant names the offending value.
#[derive(Debug, Clone, PartialEq, Error)]
pub enum PeriodogramError {
    /// The three input columns do not have the same length.
    #[error("mismatched lengths: {times} times, {values} values, {errors} errors")]
    LengthMismatch {
        /// Number of times given.
        times: usize,
        /// Number of values given.
        values: usize,
        /// Number of errors given.
        errors: usize,
    },
    /// Not enough epochs for a sinusoid plus offset with a degree of freedom left.
    #[error("too few epochs for a periodogram: {n_epochs} given, at least {minimum} needed")]
    TooFewEpochs {
        /// Number of epochs given.
        n_epochs: usize,
        /// Fewest epochs accepted.
        minimum: usize,
    },
    /// A time is NaN or infinite.
    #[error("time at epoch index {index} (0-based) is not finite: {value}")]
    NonFiniteTime {
        /// 0-based epoch index.
        index: usize,
        /// The offending time.
        value: f64,
    },
    /// A value is NaN or infinite.
    #[error("value at epoch index {index} (0-based) is not finite: {value}")]
    NonFiniteValue {
        /// 0-based epoch index.
        index: usize,
        /// The offending value.
        value: f64,
    },
    /// An uncertainty is not a finite positive number.
    #[error("uncertainty at epoch index {index} (0-based) must be finite and > 0, got {value}")]
    InvalidError {
        /// 0-based epoch index.
        index: usize,
        /// The offending uncertainty.
        value: f64,
    },
    /// All epochs share one time, so no period can be measured.
    #[error("zero baseline: every epoch is at time {time}")]
    ZeroBaseline {
        /// The common time.
        time: f64,
    },
    /// The values are constant (to rounding), so the normalised power is undefined.
    #[error("values are constant (weighted scatter {scatter} around the mean): nothing to search")]
    ConstantValues {
        /// Weighted root-mean-square deviation from the weighted mean.
        scatter: f64,
    },
    /// A trial frequency is not finite and positive.
    #[error("frequency at index {index} must be finite and > 0, got {value}")]
    InvalidFrequency {
        /// 0-based index in the frequency slice.
        index: usize,
        /// The offending frequency (1/day).
        value: f64,
    },
    /// The oversampling factor is not finite or is below 1.
    #[error("oversampling must be finite and >= 1, got {value}")]
    InvalidOversampling {
        /// The offending factor.
        value: f64,
    },
    /// The period range is not 0 < min_period < max_period, both finite.
    #[error("invalid period range [{min_period}, {max_period}] d: need 0 < min < max, finite")]
    InvalidPeriodRange {
        /// Shortest period requested (days).
        min_period: f64,
        /// Longest period requested (days).
        max_period: f64,
    },
    /// The maximum-frequency override is not above the minimum frequency.
    #[error("maximum frequency {value} /d must be finite and above the minimum frequency {min_frequency} /d")]
    InvalidMaxFrequency {
        /// The requested maximum frequency (1/day).
        value: f64,
        /// The grid's minimum frequency (1/day).
        min_frequency: f64,
    },
    /// The automatic rule gave an upper frequency below the lower one.
    #[error("empty frequency range: f_min {f_min} /d is above f_max {f_max} /d; give a maximum frequency or a period range")]
    EmptyFrequencyRange {
        /// Lower end (1/day).
        f_min: f64,
        /// Upper end (1/day).
        f_max: f64,
    },
    /// The grid would hold more frequencies than allowed.
    #[error("frequency grid would have {n_freq} frequencies, more than the limit {max_n_freq}; narrow the period range or lower the oversampling")]
    GridTooLarge {
        /// Frequencies the grid would need (saturated at `usize::MAX`).
        n_freq: usize,
        /// The limit in force.
        max_n_freq: usize,
    },
    /// A power level given for a false-alarm probability is outside [0, 1].
    #[error("power must lie in [0, 1], got {value}")]
    InvalidPower {
        /// The offending power.
        value: f64,
    },
    /// A false-alarm probability given for its level is outside (0, 1).
    #[error("false-alarm probability must lie strictly between 0 and 1, got {value}")]
    InvalidFalseAlarmProbability {
        /// The offending probability.
        value: f64,
    },
    /// No power in [0, 1] reaches so small a false-alarm probability
    /// (only possible with very few epochs).
    #[error("false-alarm probability {value} is unreachable: even power 1 gives {smallest}")]
    UnreachableFalseAlarmProbability {
        /// The requested probability.
        value: f64,
        /// The probability at power 1.
        smallest: f64,
    },
    /// The highest searched frequency passed to the false-alarm probability is not finite and positive.
    #[error("maximum searched frequency must be finite and > 0, got {value}")]
    InvalidSearchedMaxFrequency {
        /// The offending frequency (1/day).
        value: f64,
    },
    /// Frequencies and powers passed to the peak finder differ in length.
    #[error("mismatched lengths: {frequencies} frequencies, {power} powers")]
    PowerLengthMismatch {
        /// Number of frequencies.
        frequencies: usize,
        /// Number of powers.
        power: usize,
    },
}

/// How the ends of the frequency grid are chosen.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub enum FrequencyLimits {
    /// f_min = 1/T (longest period = baseline T = t_max − t_min);
    /// f_max = 1/(2·Δ̃), a pseudo-Nyquist frequency from the median Δ̃ of the
    /// positive spacings between consecutive sorted times (common practice).
    Auto,
    /// f_min = 1/T as in `Auto`, f_max given (1/day).
    MaxFrequency(f64),
    /// f_min = 1/max_period, f_max = 1/min_period (days), whatever the sampling.
    PeriodRange {
        /// Shortest period searched (days).
        min_period: f64,
        /// Longest period searched (days).
        max_period: f64,
    },
}

/// Options of the frequency grid.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct GridOptions {
    /// Where the grid starts and stops.
    pub limits: FrequencyLimits,
    /// Grid samples per resolution element 1/T: the step is df = 1/(T·oversampling).
    pub oversampling: f64,
    /// Largest grid accepted.
    pub max_n_freq: usize,
}

impl Default for GridOptions {
    fn default() -> Self {
        GridOptions {
            limits: FrequencyLimits::Auto,
            oversampling: DEFAULT_OVERSAMPLING,
            max_n_freq: DEFAULT_MAX_N_FREQ,
        }
    }
}

/// Facts about a frequency grid, for reporting.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct FrequencyGridInfo {
    /// Number of frequencies.
    pub n_freq: usize,
    /// Samples per resolution element 1/T.
    pub oversampling: f64,
    /// First grid frequency (1/day).
    pub f_min: f64,
    /// Last grid frequency (1/day); at most the requested upper limit.
    pub f_max: f64,
    /// Grid step (1/day).
    pub df: f64,
    /// Baseline T = t_max − t_min (days).
    pub baseline: f64,
    /// The rule that set the limits.
    pub limits: FrequencyLimits,
}

/// A uniform frequency grid f_k = f_min + k·df, k = 0 … n_freq − 1.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct FrequencyGrid {
    /// Facts about the grid.
    pub info: FrequencyGridInfo,
    /// The frequencies (1/day), ascending.
    pub frequencies: Vec<f64>,
}

/// One periodogram peak.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Peak {
    /// Frequency (1/day).
    pub frequency: f64,
    /// Period 1/frequency (days).
    pub period: f64,
    /// Normalised power p ∈ [0, 1].
    pub power: f64,
    /// Baluev (2008) false-alarm probability that the highest peak of pure
    /// noise over the searched band is at least this high.
    pub false_alarm_probability: f64,
}

/// A power level for a given false-alarm probability (a threshold line).
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct FapThreshold {
    /// The false-alarm probability.
    pub false_alarm_probability: f64,
    /// The power with that probability, or `None` if no power reaches it.
    pub power: Option<f64>,
}

/// Options of [`periodogram`].
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct PeriodogramOptions {
    /// The frequency grid.
    pub grid: GridOptions,
    /// How many distinct peaks to report in [`Periodogram::top_peaks`].
    pub n_top_peaks: usize,
}

impl Default for PeriodogramOptions {
    fn default() -> Self {
        PeriodogramOptions {
            grid: GridOptions::default(),
            n_top_peaks: DEFAULT_N_TOP_PEAKS,
        }
    }
}

/// A complete period search.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Periodogram {
    /// Number of epochs used.
    pub n_epochs: usize,
    /// The grid searched.
    pub grid: FrequencyGridInfo,
    /// Grid frequencies (1/day), ascending.
    pub frequencies: Vec<f64>,
    /// Grid periods 1/f (days), descending.
    pub periods: Vec<f64>,
    /// Normalised generalised Lomb–Scargle power at each frequency.
    pub power: Vec<f64>,
    /// Weighted spectral window at each frequency (see [`spectral_window`]).
    pub window_power: Vec<f64>,
    /// The highest point of the periodogram.
    pub best_peak: Peak,
    /// Up to `n_top_peaks` distinct local maxima, highest first, at least one
    /// resolution element 1/T apart; the first is `best_peak`.
    pub top_peaks: Vec<Peak>,
    /// Power levels for [`DEFAULT_FAP_THRESHOLDS`].
    pub fap_thresholds: Vec<FapThreshold>,
}

/// Epochs checked and reduced to what every frequency needs: times relative
/// to their weighted mean, normalised weights and weighted-centred values.
struct PreparedEpochs {
    shifted_times: Vec<f64>,
    weights: Vec<f64>,
    centred_values: Vec<f64>,
    /// Σ w_i ỹ_i² with Σ w_i = 1 (Zechmeister & Kürster 2009, YY hat).
    weighted_square_sum: f64,
}

/// Sums at one angular frequency, with normalised weights and centred values.
#[derive(Default)]
struct FrequencySums {
    cos_sum: f64,
    sin_sum: f64,
    value_cos: f64,
    value_sin: f64,
    cos_cos: f64,
    sin_sin: f64,
    cos_sin: f64,
}

fn check_times_and_errors(times: &[f64], errors: &[f64]) -> Result<(), PeriodogramError> {
    for (index, &value) in times.iter().enumerate() {
        if !value.is_finite() {
            return Err(PeriodogramError::NonFiniteTime { index, value });
        }
    }
    for (index, &value) in errors.iter().enumerate() {
        if !(value.is_finite() && value > 0.0) {
            return Err(PeriodogramError::InvalidError { index, value });
        }
    }
    check_baseline(times).map(|_| ())
}

/// Baseline T = t_max − t_min of finite times; error if zero.
fn check_baseline(times: &[f64]) -> Result<f64, PeriodogramError> {
    let (t_min, t_max) = time_span(times);
    let baseline = t_max - t_min;
    if baseline > 0.0 {
        Ok(baseline)
    } else {
        Err(PeriodogramError::ZeroBaseline {
            time: times.first().copied().unwrap_or(f64::NAN),
        })
    }
}

fn time_span(times: &[f64]) -> (f64, f64) {
    times
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), &t| {
            (lo.min(t), hi.max(t))
        })
}

fn check_lengths(
    times: &[f64],
    values: &[f64],
    errors: &[f64],
    minimum: usize,
) -> Result<(), PeriodogramError> {
    if times.len() != values.len() || times.len() != errors.len() {
        return Err(PeriodogramError::LengthMismatch {
            times: times.len(),
            values: values.len(),
            errors: errors.len(),
        });
    }
    if times.len() < minimum {
        return Err(PeriodogramError::TooFewEpochs {
            n_epochs: times.len(),
            minimum,
        });
    }
    Ok(())
}

fn check_frequencies(frequencies: &[f64]) -> Result<(), PeriodogramError> {
    for (index, &value) in frequencies.iter().enumerate() {
        if !(value.is_finite() && value > 0.0) {
            return Err(PeriodogramError::InvalidFrequency { index, value });
        }
    }
    Ok(())
}

/// Normalised weights w_i = (1/σ_i²) / Σ_j (1/σ_j²) (Zechmeister & Kürster
/// 2009, Sect. 2, weights summing to one).
fn normalised_weights(errors: &[f64]) -> Vec<f64> {
    let mut weights: Vec<f64> = errors.iter().map(|&e| 1.0 / (e * e)).collect();
    let total: f64 = weights.iter().sum();
    for weight in &mut weights {
        *weight /= total;
    }
    weights
}

fn weighted_mean(weights: &[f64], samples: &[f64]) -> f64 {
    weights.iter().zip(samples).map(|(w, x)| w * x).sum()
}

/// Weighted variance of the times, two-pass (Baluev 2008 D_t, with weights 1/σ²).
fn weighted_time_variance(times: &[f64], errors: &[f64]) -> f64 {
    let weights = normalised_weights(errors);
    let mean = weighted_mean(&weights, times);
    weights
        .iter()
        .zip(times)
        .map(|(w, t)| w * (t - mean) * (t - mean))
        .sum()
}

fn prepare(
    times: &[f64],
    values: Option<&[f64]>,
    errors: &[f64],
) -> Result<PreparedEpochs, PeriodogramError> {
    let weights = normalised_weights(errors);
    let reference_time = weighted_mean(&weights, times);
    let shifted_times = times.iter().map(|t| t - reference_time).collect();
    let (centred_values, weighted_square_sum) = match values {
        Some(values) => {
            let mean = weighted_mean(&weights, values);
            let centred: Vec<f64> = values.iter().map(|y| y - mean).collect();
            let square_sum: f64 = weights.iter().zip(&centred).map(|(w, y)| w * y * y).sum();
            let largest = values.iter().fold(0.0_f64, |m, y| m.max(y.abs()));
            let scatter = libm::sqrt(square_sum);
            if scatter.is_nan() || scatter <= CONSTANT_VALUES_TOLERANCE * largest {
                return Err(PeriodogramError::ConstantValues { scatter });
            }
            (centred, square_sum)
        }
        None => (Vec::new(), 0.0),
    };
    Ok(PreparedEpochs {
        shifted_times,
        weights,
        centred_values,
        weighted_square_sum,
    })
}

/// Weighted trigonometric sums at one frequency (Zechmeister & Kürster 2009,
/// Sect. 2: C, S, YC, YS, CC, SS, CS before their mean corrections). When
/// `with_values` is false the value sums are left at zero.
fn frequency_sums(epochs: &PreparedEpochs, frequency: f64, with_values: bool) -> FrequencySums {
    let angular = 2.0 * core::f64::consts::PI * frequency;
    let mut sums = FrequencySums::default();
    for (index, (&t, &w)) in epochs.shifted_times.iter().zip(&epochs.weights).enumerate() {
        let (sin, cos) = libm::sincos(angular * t);
        sums.add_epoch(epochs, index, w, cos, sin, with_values);
    }
    sums
}

impl FrequencySums {
    /// Adds epoch `index` (weight `w`, phase cosine and sine) to the sums.
    #[inline(always)]
    fn add_epoch(
        &mut self,
        epochs: &PreparedEpochs,
        index: usize,
        w: f64,
        cos: f64,
        sin: f64,
        with_values: bool,
    ) {
        let w_cos = w * cos;
        let w_sin = w * sin;
        self.cos_sum += w_cos;
        self.sin_sum += w_sin;
        if with_values {
            let y = epochs.centred_values[index];
            self.value_cos += w_cos * y;
            self.value_sin += w_sin * y;
            self.cos_cos += w_cos * cos;
            self.sin_sin += w_sin * sin;
            self.cos_sin += w_cos * sin;
        }
    }
}

/// Number of grid frequencies after which [`grid_sums`] recomputes the phases exactly, bounding
/// the rounding drift of the recurrence to about one ulp per rotation, here 512 / [`GRID_LANES`]
/// = 128 rotations (≲ 3e-14 in cos and sin). A multiple of [`GRID_LANES`].
const RECURRENCE_RESTART: usize = 512;

/// Consecutive grid frequencies [`grid_sums`] carries side by side: independent accumulators
/// that the compiler can keep in SIMD registers.
const GRID_LANES: usize = 4;

/// The sums of [`GRID_LANES`] consecutive frequencies, lane `l` for frequency k + l.
struct LaneSums {
    cos_sum: Lanes<GRID_LANES>,
    sin_sum: Lanes<GRID_LANES>,
    value_cos: Lanes<GRID_LANES>,
    value_sin: Lanes<GRID_LANES>,
    cos_cos: Lanes<GRID_LANES>,
    sin_sin: Lanes<GRID_LANES>,
    cos_sin: Lanes<GRID_LANES>,
}

impl LaneSums {
    fn lane(&self, l: usize) -> FrequencySums {
        FrequencySums {
            cos_sum: self.cos_sum.0[l],
            sin_sum: self.sin_sum.0[l],
            value_cos: self.value_cos.0[l],
            value_sin: self.value_sin.0[l],
            cos_cos: self.cos_cos.0[l],
            sin_sin: self.sin_sin.0[l],
            cos_sin: self.cos_sin.0[l],
        }
    }
}

/// Calls `visit(sums)` with the sums of [`frequency_sums`] at every frequency
/// `frequencies[k]` = f_0 + k·`df` of a uniform grid, in order.
///
/// Method: trigonometric recurrence over the grid (Press & Rybicki 1989, ApJ 338, 277, Sect. 2,
/// as used in Press et al. 1992, Numerical Recipes, 2nd ed., §13.8, routine `period` — from
/// memory): cos and sin of 2π f_{k+L} t_i follow from those of 2π f_k t_i by one rotation through
/// 2π·L·df·t_i, for [`GRID_LANES`] = L frequencies carried side by side, so only one
/// `libm::sincos` per epoch and lane is needed for every [`RECURRENCE_RESTART`] frequencies,
/// where the phases are recomputed exactly. Each frequency's sums run over the epochs in order,
/// as in [`frequency_sums`], with which they agree to ~1e-13 relative.
///
/// On x86-64 processors with AVX2 the same code is compiled for the wider registers (detected at
/// run time); the operations and their order are the same, so are the bits.
fn grid_sums(
    epochs: &PreparedEpochs,
    df: f64,
    frequencies: &[f64],
    mut visit: impl FnMut(&FrequencySums),
) {
    #[cfg(target_arch = "x86_64")]
    {
        if std::is_x86_feature_detected!("avx2") {
            // SAFETY: the processor supports AVX2, checked just above.
            unsafe { grid_sums_avx2(epochs, df, frequencies, &mut visit) };
            return;
        }
    }
    grid_sums_portable(epochs, df, frequencies, &mut visit);
}

/// [`grid_sums_portable`] compiled for AVX2.
///
/// # Safety
/// The processor must support AVX2.
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2")]
unsafe fn grid_sums_avx2(
    epochs: &PreparedEpochs,
    df: f64,
    frequencies: &[f64],
    visit: &mut impl FnMut(&FrequencySums),
) {
    grid_sums_portable(epochs, df, frequencies, visit);
}

/// The body of [`grid_sums`].
#[inline(always)]
fn grid_sums_portable(
    epochs: &PreparedEpochs,
    df: f64,
    frequencies: &[f64],
    visit: &mut impl FnMut(&FrequencySums),
) {
    let n = epochs.shifted_times.len();
    let two_pi = 2.0 * core::f64::consts::PI;
    let mut cos = vec![[0.0; GRID_LANES]; n];
    let mut sin = vec![[0.0; GRID_LANES]; n];
    let (step_cos, step_sin): (Vec<f64>, Vec<f64>) = epochs
        .shifted_times
        .iter()
        .map(|&t| {
            let (s, c) = libm::sincos(two_pi * (GRID_LANES as f64 * df) * t);
            (c, s)
        })
        .unzip();
    let f_0 = frequencies.first().copied().unwrap_or(0.0);
    for block in (0..frequencies.len()).step_by(GRID_LANES) {
        if block % RECURRENCE_RESTART == 0 {
            // Lanes past the end of the grid continue it (their sums are not visited).
            let angular: [f64; GRID_LANES] = core::array::from_fn(|l| {
                two_pi
                    * frequencies
                        .get(block + l)
                        .copied()
                        .unwrap_or(f_0 + (block + l) as f64 * df)
            });
            for (i, &t) in epochs.shifted_times.iter().enumerate() {
                for l in 0..GRID_LANES {
                    (sin[i][l], cos[i][l]) = libm::sincos(angular[l] * t);
                }
            }
        }
        let zero = Lanes([0.0; GRID_LANES]);
        let mut sums = LaneSums {
            cos_sum: zero,
            sin_sum: zero,
            value_cos: zero,
            value_sin: zero,
            cos_cos: zero,
            sin_sin: zero,
            cos_sin: zero,
        };
        let states = cos.iter_mut().zip(sin.iter_mut());
        let constants = epochs.weights.iter().zip(&epochs.centred_values);
        let steps = step_cos.iter().zip(&step_sin);
        for (((cos, sin), (&w, &y)), (&step_cos, &step_sin)) in states.zip(constants).zip(steps) {
            let (c, s) = (Lanes(*cos), Lanes(*sin));
            let w_cos = c * w;
            let w_sin = s * w;
            sums.cos_sum = sums.cos_sum + w_cos;
            sums.sin_sum = sums.sin_sum + w_sin;
            sums.value_cos = sums.value_cos + w_cos * y;
            sums.value_sin = sums.value_sin + w_sin * y;
            sums.cos_cos = sums.cos_cos + w_cos * c;
            sums.sin_sin = sums.sin_sin + w_sin * s;
            sums.cos_sin = sums.cos_sin + w_cos * s;
            *cos = (c * step_cos - s * step_sin).0;
            *sin = (s * step_cos + c * step_sin).0;
        }
        for l in 0..GRID_LANES.min(frequencies.len() - block) {
            visit(&sums.lane(l));
        }
    }
}

/// Normalised power from the sums (Zechmeister & Kürster 2009, eqs. 5–6),
/// values already centred so that Y = 0.
fn power_from_sums(sums: &FrequencySums, weighted_square_sum: f64) -> f64 {
    // Mean-corrected sums ("hat" quantities), Zechmeister & Kürster 2009 Sect. 2.
    let cc = sums.cos_cos - sums.cos_sum * sums.cos_sum;
    let ss = sums.sin_sin - sums.sin_sum * sums.sin_sum;
    let cs = sums.cos_sin - sums.cos_sum * sums.sin_sum;
    let yc = sums.value_cos;
    let ys = sums.value_sin;
    let cos_usable = cc > COLUMN_VARIANCE_FLOOR;
    let sin_usable = ss > COLUMN_VARIANCE_FLOOR;
    let scale = cc.max(ss);
    // eq. 6: D = CC·SS − CS².
    let determinant = cc * ss - cs * cs;
    let explained =
        if cos_usable && sin_usable && determinant > DEGENERACY_TOLERANCE * scale * scale {
            // eq. 5: p = (SS·YC² + CC·YS² − 2·CS·YC·YS) / (YY·D); YY divided below.
            (ss * yc * yc + cc * ys * ys - 2.0 * cs * yc * ys) / determinant
        } else if cos_usable && cc >= ss {
            // Collinear columns: a one-column least-squares fit.
            yc * yc / cc
        } else if sin_usable {
            ys * ys / ss
        } else {
            // Both columns are constant over the epochs: nothing beyond the mean.
            0.0
        };
    (explained / weighted_square_sum).clamp(0.0, 1.0)
}

/// Generalised Lomb–Scargle periodogram with floating mean and weights
/// w_i ∝ 1/σ_i² (Zechmeister & Kürster 2009, A&A 496, 577, eqs. 5–6 with the
/// weighted sums of their Sect. 2), in the normalisation p(ω) = (χ²₀ − χ²(ω))/χ²₀
/// ∈ [0, 1] (their eq. 4), where χ²₀ is that of the weighted mean alone.
/// This equals astropy's `LombScargle(t, y, dy, fit_mean=True,
/// center_data=True, normalization='standard')`.
///
/// `frequencies` are in cycles per day (not angular). O(N) per frequency,
/// one `libm::sincos` per epoch and frequency, no allocation per frequency.
/// Times are shifted to their weighted mean first (the power does not depend
/// on the time origin; this keeps the phases accurate for Julian dates).
/// At a frequency where the cosine and sine columns are collinear with the
/// constant (e.g. an exact alias of zero frequency) the fit drops to one
/// sinusoid column; power is clamped to [0, 1] against rounding.
pub fn gls_power(
    times: &[f64],
    values: &[f64],
    errors: &[f64],
    frequencies: &[f64],
) -> Result<Vec<f64>, PeriodogramError> {
    check_lengths(times, values, errors, MIN_EPOCHS)?;
    check_times_and_errors(times, errors)?;
    check_values(values)?;
    check_frequencies(frequencies)?;
    let epochs = prepare(times, Some(values), errors)?;
    Ok(frequencies
        .iter()
        .map(|&f| {
            power_from_sums(
                &frequency_sums(&epochs, f, true),
                epochs.weighted_square_sum,
            )
        })
        .collect())
}

fn check_values(values: &[f64]) -> Result<(), PeriodogramError> {
    for (index, &value) in values.iter().enumerate() {
        if !value.is_finite() {
            return Err(PeriodogramError::NonFiniteValue { index, value });
        }
    }
    Ok(())
}

/// Weighted spectral window of the sampling,
/// W(f) = |Σ_i w_i exp(−2πi f t_i)|² / (Σ_i w_i)² with w_i = 1/σ_i² — the
/// same weights as the periodogram, so W(0) = 1 and W(f) ∈ [0, 1] (the
/// unweighted spectral window is Deeming 1975, Ap&SS 36, 137 — from memory;
/// pass equal errors to get it). Needs at least two distinct times.
pub fn spectral_window(
    times: &[f64],
    errors: &[f64],
    frequencies: &[f64],
) -> Result<Vec<f64>, PeriodogramError> {
    if times.len() != errors.len() {
        return Err(PeriodogramError::LengthMismatch {
            times: times.len(),
            values: times.len(),
            errors: errors.len(),
        });
    }
    if times.len() < 2 {
        return Err(PeriodogramError::TooFewEpochs {
            n_epochs: times.len(),
            minimum: 2,
        });
    }
    check_times_and_errors(times, errors)?;
    check_frequencies(frequencies)?;
    let epochs = prepare(times, None, errors)?;
    Ok(frequencies
        .iter()
        .map(|&f| window_from_sums(&frequency_sums(&epochs, f, false)))
        .collect())
}

fn window_from_sums(sums: &FrequencySums) -> f64 {
    (sums.cos_sum * sums.cos_sum + sums.sin_sum * sums.sin_sum).clamp(0.0, 1.0)
}

/// Median of the positive spacings between consecutive sorted times.
fn median_positive_spacing(times: &[f64]) -> Option<f64> {
    let mut sorted = times.to_vec();
    sorted.sort_by(f64::total_cmp);
    let mut spacings: Vec<f64> = sorted
        .windows(2)
        .map(|pair| pair[1] - pair[0])
        .filter(|&d| d > 0.0)
        .collect();
    if spacings.is_empty() {
        return None;
    }
    spacings.sort_by(f64::total_cmp);
    let middle = spacings.len() / 2;
    Some(if spacings.len() % 2 == 1 {
        spacings[middle]
    } else {
        0.5 * (spacings[middle - 1] + spacings[middle])
    })
}

/// Uniform frequency grid for a period search over `times` (days).
///
/// Rule (stated for reports): baseline T = t_max − t_min; step
/// df = 1/(T·oversampling) (default oversampling [`DEFAULT_OVERSAMPLING`] = 10
/// samples per resolution element 1/T — common practice, discussed by
/// VanderPlas 2018, ApJS 236, 16, from memory); limits from [`FrequencyLimits`]:
/// `Auto` gives f_min = 1/T and f_max = 1/(2·median positive spacing);
/// `MaxFrequency(f)` replaces that f_max; `PeriodRange` gives
/// f_min = 1/P_max, f_max = 1/P_min. Frequencies f_k = f_min + k·df for
/// k = 0 … ⌊(f_max − f_min)/df⌋, so the last one does not exceed f_max.
pub fn frequency_grid(
    times: &[f64],
    options: &GridOptions,
) -> Result<FrequencyGrid, PeriodogramError> {
    if times.len() < 2 {
        return Err(PeriodogramError::TooFewEpochs {
            n_epochs: times.len(),
            minimum: 2,
        });
    }
    for (index, &value) in times.iter().enumerate() {
        if !value.is_finite() {
            return Err(PeriodogramError::NonFiniteTime { index, value });
        }
    }
    let baseline = check_baseline(times)?;
    let oversampling = options.oversampling;
    if !(oversampling.is_finite() && oversampling >= 1.0) {
        return Err(PeriodogramError::InvalidOversampling {
            value: oversampling,
        });
    }
    let (f_min, f_max_requested) = match options.limits {
        FrequencyLimits::Auto => {
            let f_min = 1.0 / baseline;
            let spacing = median_positive_spacing(times).unwrap_or(baseline);
            let f_max = 1.0 / (2.0 * spacing);
            if f_max < f_min {
                return Err(PeriodogramError::EmptyFrequencyRange { f_min, f_max });
            }
            (f_min, f_max)
        }
        FrequencyLimits::MaxFrequency(value) => {
            let f_min = 1.0 / baseline;
            if !(value.is_finite() && value > f_min) {
                return Err(PeriodogramError::InvalidMaxFrequency {
                    value,
                    min_frequency: f_min,
                });
            }
            (f_min, value)
        }
        FrequencyLimits::PeriodRange {
            min_period,
            max_period,
        } => {
            let valid = min_period.is_finite()
                && max_period.is_finite()
                && min_period > 0.0
                && min_period < max_period;
            if !valid {
                return Err(PeriodogramError::InvalidPeriodRange {
                    min_period,
                    max_period,
                });
            }
            (1.0 / max_period, 1.0 / min_period)
        }
    };
    let df = 1.0 / (baseline * oversampling);
    let steps = libm::floor((f_max_requested - f_min) / df);
    if steps.is_nan() || steps >= options.max_n_freq as f64 {
        return Err(PeriodogramError::GridTooLarge {
            n_freq: if steps.is_finite() && steps < usize::MAX as f64 {
                steps as usize + 1
            } else {
                usize::MAX
            },
            max_n_freq: options.max_n_freq,
        });
    }
    let n_freq = steps as usize + 1;
    let frequencies: Vec<f64> = (0..n_freq).map(|k| f_min + k as f64 * df).collect();
    let f_max = frequencies[n_freq - 1];
    Ok(FrequencyGrid {
        info: FrequencyGridInfo {
            n_freq,
            oversampling,
            f_min,
            f_max,
            df,
            baseline,
            limits: options.limits,
        },
        frequencies,
    })
}

/// Baluev's bandwidth W = f_max·T_eff with T_eff = √(4π·D_t), D_t the weighted
/// variance of the times (Baluev 2008, MNRAS 385, 1279, Sect. 3; as in
/// astropy's `tau_davies`).
fn baluev_bandwidth(times: &[f64], errors: &[f64], max_frequency: f64) -> f64 {
    let time_variance = weighted_time_variance(times, errors);
    max_frequency * libm::sqrt(4.0 * core::f64::consts::PI * time_variance)
}

/// Baluev (2008) alias-free approximation to the false-alarm probability of
/// the highest peak reaching `power` (standard normalisation, one sinusoid
/// plus offset: d_H = 1, d_K = 3):
/// FAP = 1 − (1 − FAP_single)·e^(−τ) (Baluev 2008, eq. 6), FAP_single =
/// (1 − Z)^((N−3)/2), τ = γ_H·W·(1 − Z)^((N−4)/2)·√(N_H·Z/2) (the Davies term of
/// eq. 5 with Table 1), γ_H = √(2/N_H)·Γ(N_H/2)/Γ((N_H−1)/2), N_H = N − 1.
fn baluev_fap(power: f64, n_epochs: usize, bandwidth: f64) -> f64 {
    if power <= 0.0 {
        return 1.0;
    }
    let n_null = (n_epochs - 1) as f64;
    let n_model = (n_epochs - 3) as f64;
    let one_minus = 1.0 - power.min(1.0);
    let single = libm::pow(one_minus, 0.5 * n_model);
    let gamma_null = libm::sqrt(2.0 / n_null)
        * libm::exp(libm::lgamma(0.5 * n_null) - libm::lgamma(0.5 * (n_null - 1.0)));
    let tau = gamma_null
        * bandwidth
        * libm::pow(one_minus, 0.5 * (n_model - 1.0))
        * libm::sqrt(0.5 * n_null * power);
    // 1 − (1 − single)·e^(−τ), written for accuracy at small probabilities.
    (-libm::expm1(-tau) + single * libm::exp(-tau)).clamp(0.0, 1.0)
}

/// Power whose Baluev false-alarm probability equals `fap`: scan power from 1
/// downwards in [`FAP_LEVEL_SCAN_STEPS`] steps for the first step where the
/// probability reaches `fap`, then bisect to full precision (the highest such
/// power, where the probability falls monotonically).
fn baluev_level(fap: f64, n_epochs: usize, bandwidth: f64) -> Result<f64, PeriodogramError> {
    let smallest = baluev_fap(1.0, n_epochs, bandwidth);
    if smallest >= fap {
        return Err(PeriodogramError::UnreachableFalseAlarmProbability {
            value: fap,
            smallest,
        });
    }
    let mut high = 1.0;
    let mut low = 0.0;
    for step in 1..=FAP_LEVEL_SCAN_STEPS {
        let candidate = 1.0 - step as f64 / FAP_LEVEL_SCAN_STEPS as f64;
        if baluev_fap(candidate, n_epochs, bandwidth) >= fap {
            low = candidate;
            break;
        }
        high = candidate;
    }
    // Invariant: fap(low) >= target > fap(high).
    for _ in 0..200 {
        let middle = 0.5 * (low + high);
        if middle <= low || middle >= high {
            break;
        }
        if baluev_fap(middle, n_epochs, bandwidth) >= fap {
            low = middle;
        } else {
            high = middle;
        }
    }
    Ok(0.5 * (low + high))
}

fn check_fap_inputs(
    times: &[f64],
    errors: &[f64],
    max_frequency: f64,
) -> Result<(), PeriodogramError> {
    if times.len() != errors.len() {
        return Err(PeriodogramError::LengthMismatch {
            times: times.len(),
            values: times.len(),
            errors: errors.len(),
        });
    }
    if times.len() < MIN_EPOCHS {
        return Err(PeriodogramError::TooFewEpochs {
            n_epochs: times.len(),
            minimum: MIN_EPOCHS,
        });
    }
    check_times_and_errors(times, errors)?;
    if !(max_frequency.is_finite() && max_frequency > 0.0) {
        return Err(PeriodogramError::InvalidSearchedMaxFrequency {
            value: max_frequency,
        });
    }
    Ok(())
}

/// False-alarm probability that pure Gaussian noise at these epochs and
/// errors gives a highest peak of at least `power` when frequencies up to
/// `max_frequency` (1/day, the top of the searched grid) are searched:
/// Baluev (2008, MNRAS 385, 1279) alias-free approximation, eq. 6 with the
/// Davies term τ of eq. 5 / Table 1 for the standard normalisation — the same
/// formula as astropy's `false_alarm_probability(method='baluev')`.
pub fn false_alarm_probability(
    power: f64,
    times: &[f64],
    errors: &[f64],
    max_frequency: f64,
) -> Result<f64, PeriodogramError> {
    check_fap_inputs(times, errors, max_frequency)?;
    if !(0.0..=1.0).contains(&power) {
        return Err(PeriodogramError::InvalidPower { value: power });
    }
    let bandwidth = baluev_bandwidth(times, errors, max_frequency);
    Ok(baluev_fap(power, times.len(), bandwidth))
}

/// Inverse of [`false_alarm_probability`]: the power whose Baluev (2008,
/// eq. 6) false-alarm probability is `false_alarm_probability` (e.g. 0.01),
/// for drawing threshold lines; found by bracketing and bisection, the highest
/// root in [0, 1]. Matches astropy's `false_alarm_level(method='baluev')`.
pub fn false_alarm_level(
    false_alarm_probability: f64,
    times: &[f64],
    errors: &[f64],
    max_frequency: f64,
) -> Result<f64, PeriodogramError> {
    check_fap_inputs(times, errors, max_frequency)?;
    if !(false_alarm_probability > 0.0 && false_alarm_probability < 1.0) {
        return Err(PeriodogramError::InvalidFalseAlarmProbability {
            value: false_alarm_probability,
        });
    }
    let bandwidth = baluev_bandwidth(times, errors, max_frequency);
    baluev_level(false_alarm_probability, times.len(), bandwidth)
}

/// Indices of up to `max_peaks` distinct peaks of `power`, highest first.
///
/// A peak is a local maximum (higher than its left neighbour, not lower than
/// its right one; a grid end counts when it beats its one neighbour). Peaks
/// are taken greedily by height and a peak closer than `min_separation` in
/// frequency to one already taken is skipped (for [`periodogram`] the
/// separation is one resolution element 1/T). Non-finite powers are never peaks.
pub fn top_peak_indices(
    frequencies: &[f64],
    power: &[f64],
    min_separation: f64,
    max_peaks: usize,
) -> Result<Vec<usize>, PeriodogramError> {
    if frequencies.len() != power.len() {
        return Err(PeriodogramError::PowerLengthMismatch {
            frequencies: frequencies.len(),
            power: power.len(),
        });
    }
    let n = power.len();
    let mut candidates: Vec<usize> = (0..n)
        .filter(|&i| {
            power[i].is_finite()
                && (i == 0 || power[i] > power[i - 1] || power[i - 1].is_nan())
                && (i + 1 == n || power[i] >= power[i + 1] || power[i + 1].is_nan())
        })
        .collect();
    candidates.sort_by(|&a, &b| power[b].total_cmp(&power[a]).then(a.cmp(&b)));
    // Tolerate grid rounding: one resolution element is a whole number of steps.
    let separation = min_separation * (1.0 - 1e-9);
    let mut chosen: Vec<usize> = Vec::with_capacity(max_peaks.min(candidates.len()));
    for index in candidates {
        if chosen.len() >= max_peaks {
            break;
        }
        let far_enough = chosen
            .iter()
            .all(|&j| (frequencies[index] - frequencies[j]).abs() >= separation);
        if far_enough {
            chosen.push(index);
        }
    }
    Ok(chosen)
}

/// The peaks of a period search without the spectra: what a fit needs to choose its starting
/// periods (see [`peak_search`]).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PeakSearch {
    /// The grid searched.
    pub grid: FrequencyGridInfo,
    /// The highest point of the periodogram.
    pub best_peak: Peak,
    /// Up to `n_top_peaks` distinct local maxima, highest first (as in [`Periodogram`]).
    pub top_peaks: Vec<Peak>,
}

/// Power (and, when `with_window`, the spectral window) on the grid of `options`, with the
/// peaks: the common part of [`periodogram`] and [`peak_search`].
struct Spectrum {
    grid: FrequencyGrid,
    power: Vec<f64>,
    window_power: Vec<f64>,
    best_peak: Peak,
    top_peaks: Vec<Peak>,
    bandwidth: f64,
}

fn spectrum(
    times: &[f64],
    values: &[f64],
    errors: &[f64],
    options: &PeriodogramOptions,
    with_window: bool,
) -> Result<Spectrum, PeriodogramError> {
    check_lengths(times, values, errors, MIN_EPOCHS)?;
    check_times_and_errors(times, errors)?;
    check_values(values)?;
    let grid = frequency_grid(times, &options.grid)?;
    let epochs = prepare(times, Some(values), errors)?;
    let mut power = Vec::with_capacity(grid.frequencies.len());
    let mut window_power = Vec::with_capacity(if with_window {
        grid.frequencies.len()
    } else {
        0
    });
    grid_sums(&epochs, grid.info.df, &grid.frequencies, |sums| {
        power.push(power_from_sums(sums, epochs.weighted_square_sum));
        if with_window {
            window_power.push(window_from_sums(sums));
        }
    });
    let bandwidth = baluev_bandwidth(times, errors, grid.info.f_max);
    let n_epochs = times.len();
    let make_peak = |index: usize| Peak {
        frequency: grid.frequencies[index],
        period: 1.0 / grid.frequencies[index],
        power: power[index],
        false_alarm_probability: baluev_fap(power[index], n_epochs, bandwidth),
    };
    let best_index = (0..power.len())
        .max_by(|&a, &b| power[a].total_cmp(&power[b]).then(b.cmp(&a)))
        .unwrap_or(0);
    let best_peak = make_peak(best_index);
    let top_peaks = top_peak_indices(
        &grid.frequencies,
        &power,
        1.0 / grid.info.baseline,
        options.n_top_peaks,
    )?
    .into_iter()
    .map(make_peak)
    .collect();
    Ok(Spectrum {
        grid,
        power,
        window_power,
        best_peak,
        top_peaks,
        bandwidth,
    })
}

/// Full period search: [`frequency_grid`], [`gls_power`] and
/// [`spectral_window`] on that grid (computed in one pass), the best peak
/// and up to `n_top_peaks` distinct peaks with their Baluev (2008)
/// false-alarm probabilities over the searched band (f_max = last grid
/// frequency), and the power levels of [`DEFAULT_FAP_THRESHOLDS`].
/// For a residual periodogram pass the residuals as `values`.
pub fn periodogram(
    times: &[f64],
    values: &[f64],
    errors: &[f64],
    options: &PeriodogramOptions,
) -> Result<Periodogram, PeriodogramError> {
    let spectrum = spectrum(times, values, errors, options, true)?;
    let n_epochs = times.len();
    let fap_thresholds = DEFAULT_FAP_THRESHOLDS
        .iter()
        .map(|&fap| FapThreshold {
            false_alarm_probability: fap,
            power: baluev_level(fap, n_epochs, spectrum.bandwidth).ok(),
        })
        .collect();
    let grid = spectrum.grid;
    let periods = grid.frequencies.iter().map(|f| 1.0 / f).collect();
    Ok(Periodogram {
        n_epochs,
        grid: grid.info,
        frequencies: grid.frequencies,
        periods,
        power: spectrum.power,
        window_power: spectrum.window_power,
        best_peak: spectrum.best_peak,
        top_peaks: spectrum.top_peaks,
        fap_thresholds,
    })
}

/// The peaks of [`periodogram`] alone — the same grid, power, best peak and top peaks with
/// their false-alarm probabilities — without the spectral window, the period column and the
/// false-alarm levels, which a fit choosing its starting periods does not use.
pub fn peak_search(
    times: &[f64],
    values: &[f64],
    errors: &[f64],
    options: &PeriodogramOptions,
) -> Result<PeakSearch, PeriodogramError> {
    let spectrum = spectrum(times, values, errors, options, false)?;
    Ok(PeakSearch {
        grid: spectrum.grid.info,
        best_peak: spectrum.best_peak,
        top_peaks: spectrum.top_peaks,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;
    use proptest::prelude::*;

    /// Irregular but deterministic epochs: a base cadence with a quasi-random jitter.
    fn irregular_times(n_epochs: usize, cadence: f64) -> Vec<f64> {
        (0..n_epochs)
            .map(|i| {
                let i = i as f64;
                cadence * i + 0.4 * cadence * libm::sin(1.7 * i * i + 0.3)
            })
            .collect()
    }

    /// Weighted least-squares fit of c + a·cos ωt + b·sin ωt by the 3×3 normal
    /// equations (Gaussian elimination with partial pivoting), returning
    /// (χ²₀ − χ²)/χ²₀: the definition of the normalised power
    /// (Zechmeister & Kürster 2009, eq. 4), computed independently of eq. 5.
    fn power_by_direct_fit(times: &[f64], values: &[f64], errors: &[f64], frequency: f64) -> f64 {
        let angular = 2.0 * core::f64::consts::PI * frequency;
        let mut normal = [[0.0_f64; 4]; 3];
        for ((&t, &y), &e) in times.iter().zip(values).zip(errors) {
            let w = 1.0 / (e * e);
            let basis = [1.0, libm::cos(angular * t), libm::sin(angular * t)];
            for r in 0..3 {
                for c in 0..3 {
                    normal[r][c] += w * basis[r] * basis[c];
                }
                normal[r][3] += w * basis[r] * y;
            }
        }
        for col in 0..3 {
            let pivot = (col..3)
                .max_by(|&a, &b| normal[a][col].abs().total_cmp(&normal[b][col].abs()))
                .unwrap();
            normal.swap(col, pivot);
            for row in 0..3 {
                if row != col {
                    let pivot_row = normal[col];
                    let factor = normal[row][col] / pivot_row[col];
                    for (entry, pivot_entry) in normal[row].iter_mut().zip(pivot_row).skip(col) {
                        *entry -= factor * pivot_entry;
                    }
                }
            }
        }
        let coeffs: Vec<f64> = (0..3).map(|r| normal[r][3] / normal[r][r]).collect();
        let total_weight: f64 = errors.iter().map(|e| 1.0 / (e * e)).sum();
        let mean: f64 = values
            .iter()
            .zip(errors)
            .map(|(y, e)| y / (e * e))
            .sum::<f64>()
            / total_weight;
        let mut chi2_constant = 0.0;
        let mut chi2_sinusoid = 0.0;
        for ((&t, &y), &e) in times.iter().zip(values).zip(errors) {
            let w = 1.0 / (e * e);
            let model =
                coeffs[0] + coeffs[1] * libm::cos(angular * t) + coeffs[2] * libm::sin(angular * t);
            chi2_constant += w * (y - mean) * (y - mean);
            chi2_sinusoid += w * (y - model) * (y - model);
        }
        (chi2_constant - chi2_sinusoid) / chi2_constant
    }

    #[test]
    fn power_equals_chi_squared_reduction_of_a_direct_fit() {
        // Zechmeister & Kürster 2009, eq. 4: p = (χ²₀ − χ²(ω))/χ²₀ — checked
        // against an explicit 3-parameter weighted least-squares fit.
        // Tolerance 1e-10: both are double-precision solutions of the same
        // well-conditioned 3×3 problem.
        let times = irregular_times(25, 3.1);
        let values: Vec<f64> = times
            .iter()
            .enumerate()
            .map(|(i, &t)| 4.0 + 7.0 * libm::sin(0.37 * t) + libm::cos(2.3 * i as f64))
            .collect();
        let errors: Vec<f64> = (0..25).map(|i| 1.0 + 0.2 * (i % 5) as f64).collect();
        let frequencies = [0.011, 0.0589, 0.1234, 0.2];
        let power = gls_power(&times, &values, &errors, &frequencies).unwrap();
        for (&f, &p) in frequencies.iter().zip(&power) {
            let direct = power_by_direct_fit(&times, &values, &errors, f);
            assert!((p - direct).abs() < 1e-10, "f={f}: {p} vs {direct}");
        }
    }

    #[test]
    fn pure_sinusoid_recovers_its_period() {
        // A noise-free sinusoid plus offset is fitted exactly at its own
        // frequency, so the best grid point lies within half a grid step of
        // 1/P and its power is close to 1 (common practice).
        let period = 17.3;
        let times = irregular_times(40, 2.9);
        let values: Vec<f64> = times
            .iter()
            .map(|t| 12.0 + 25.0 * libm::sin(2.0 * core::f64::consts::PI * t / period + 0.8))
            .collect();
        let errors = vec![2.0; times.len()];
        let result = periodogram(&times, &values, &errors, &PeriodogramOptions::default()).unwrap();
        let best = result.best_peak;
        assert!(
            (best.frequency - 1.0 / period).abs() <= 0.5 * result.grid.df + 1e-15,
            "best period {} vs {period}",
            best.period
        );
        assert!(best.power > 0.99, "power {}", best.power);
        assert!(best.false_alarm_probability < 1e-10);
        // At the exact frequency the fit is perfect: power 1 to rounding.
        let exact = gls_power(&times, &values, &errors, &[1.0 / period]).unwrap();
        assert_relative_eq!(exact[0], 1.0, epsilon = 1e-12);
        assert_eq!(result.top_peaks[0], best);
        assert_eq!(result.frequencies.len(), result.grid.n_freq);
        assert_eq!(result.window_power.len(), result.grid.n_freq);
    }

    #[test]
    fn grid_recurrence_matches_direct_evaluation() {
        // The recurrence of `grid_sums` against one `libm::sincos` per epoch and frequency
        // (`gls_power`, `spectral_window`) over a long grid at Julian-date times, so that many
        // restarts and the longest runs between them are covered. Tolerance 1e-11 absolute in
        // power and window (values in [0, 1]): the recurrence drifts by ~1e-13 per restart
        // interval, the rest is the rounding of the sums.
        let times: Vec<f64> = irregular_times(60, 6.1)
            .iter()
            .map(|t| t + 2_459_000.0)
            .collect();
        let values: Vec<f64> = times
            .iter()
            .map(|t| 30.0 * libm::sin(0.37 * t) + 5.0 * libm::cos(2.1 * t))
            .collect();
        let errors: Vec<f64> = (0..60).map(|i| 1.0 + 0.5 * (i % 4) as f64).collect();
        let options = PeriodogramOptions {
            grid: GridOptions {
                limits: FrequencyLimits::MaxFrequency(2.0),
                ..GridOptions::default()
            },
            n_top_peaks: 4,
        };
        let result = periodogram(&times, &values, &errors, &options).unwrap();
        assert!(result.grid.n_freq > 10 * RECURRENCE_RESTART);
        let direct = gls_power(&times, &values, &errors, &result.frequencies).unwrap();
        let window = spectral_window(&times, &errors, &result.frequencies).unwrap();
        for k in 0..result.grid.n_freq {
            assert!((result.power[k] - direct[k]).abs() < 1e-11, "power at {k}");
            assert!(
                (result.window_power[k] - window[k]).abs() < 1e-11,
                "window at {k}"
            );
        }
        let peaks = peak_search(&times, &values, &errors, &options).unwrap();
        assert_eq!(peaks.grid, result.grid);
        assert_eq!(peaks.best_peak, result.best_peak);
        assert_eq!(peaks.top_peaks, result.top_peaks);
    }

    #[test]
    fn exact_alias_of_zero_frequency_gives_zero_power_and_unit_window() {
        // Integer times: at f = 1 /d every phase is a multiple of 2π, so the
        // sinusoid is a constant and explains nothing beyond the mean; the
        // window is 1 there (common practice: the sampling alias).
        let times: Vec<f64> = (0..20).map(|i| i as f64).collect();
        let values: Vec<f64> = (0..20)
            .map(|i| libm::sin(1.3 * i as f64 * i as f64))
            .collect();
        let errors = vec![1.0; 20];
        let power = gls_power(&times, &values, &errors, &[1.0, 2.0]).unwrap();
        assert!(power.iter().all(|&p| p.abs() < 1e-12), "{power:?}");
        let window = spectral_window(&times, &errors, &[1.0, 0.5, 0.25]).unwrap();
        assert_relative_eq!(window[0], 1.0, epsilon = 1e-12);
        // f = 0.5: phases alternate 0, π: Σ w e^{-iπk} = 0 for an even count.
        assert!(window[1] < 1e-24);
        // f = 0.5 keeps the cosine column (±1): a one-column fit, as a direct fit gives.
        let half = gls_power(&times, &values, &errors, &[0.5]).unwrap()[0];
        let mean = values.iter().sum::<f64>() / 20.0;
        let yc: f64 = values
            .iter()
            .enumerate()
            .map(|(k, y)| (y - mean) * if k % 2 == 0 { 1.0 } else { -1.0 })
            .sum();
        let yy: f64 = values.iter().map(|y| (y - mean) * (y - mean)).sum();
        assert_relative_eq!(half, yc * yc / (20.0 * yy), epsilon = 1e-12);
    }

    #[test]
    fn window_matches_direct_complex_sum() {
        // W(f) = |Σ w_i e^{-2πi f t_i}|² / (Σ w_i)², evaluated on the raw times
        // (definition; tolerance 1e-12 for the time shift's rounding).
        let times: Vec<f64> = irregular_times(15, 5.0)
            .iter()
            .map(|t| t + 2_450_000.0)
            .collect();
        let errors: Vec<f64> = (0..15).map(|i| 1.0 + (i % 3) as f64).collect();
        let frequencies = [0.003, 0.05, 0.2, 1.0027];
        let window = spectral_window(&times, &errors, &frequencies).unwrap();
        let shifted: Vec<f64> = times.iter().map(|t| t - 2_450_000.0).collect();
        for (&f, &w) in frequencies.iter().zip(&window) {
            let (mut re, mut im, mut total) = (0.0, 0.0, 0.0);
            for (&t, &e) in shifted.iter().zip(&errors) {
                let weight = 1.0 / (e * e);
                re += weight * libm::cos(2.0 * core::f64::consts::PI * f * t);
                im -= weight * libm::sin(2.0 * core::f64::consts::PI * f * t);
                total += weight;
            }
            assert_relative_eq!(w, (re * re + im * im) / (total * total), epsilon = 1e-9);
        }
    }

    #[test]
    fn grid_follows_the_stated_rule() {
        let times = vec![0.0, 1.0, 2.5, 4.0, 10.0, 20.0];
        let grid = frequency_grid(&times, &GridOptions::default()).unwrap();
        // Spacings 1, 1.5, 1.5, 6, 10: median 1.5 → f_max 1/3; T = 20.
        assert_relative_eq!(grid.info.f_min, 1.0 / 20.0, max_relative = 1e-15);
        assert_relative_eq!(grid.info.df, 1.0 / 200.0, max_relative = 1e-15);
        assert!(grid.info.f_max <= 1.0 / 3.0 && grid.info.f_max > 1.0 / 3.0 - grid.info.df);
        assert_eq!(grid.info.n_freq, grid.frequencies.len());
        assert_eq!(grid.info.n_freq, 57); // ⌊(1/3 − 1/20)·200⌋ + 1

        let ranged = frequency_grid(
            &times,
            &GridOptions {
                limits: FrequencyLimits::PeriodRange {
                    min_period: 2.0,
                    max_period: 50.0,
                },
                oversampling: 5.0,
                ..GridOptions::default()
            },
        )
        .unwrap();
        assert_relative_eq!(ranged.frequencies[0], 0.02, max_relative = 1e-15);
        assert!(*ranged.frequencies.last().unwrap() <= 0.5);
        assert_relative_eq!(ranged.info.df, 0.01, max_relative = 1e-15);

        let capped = frequency_grid(
            &times,
            &GridOptions {
                limits: FrequencyLimits::MaxFrequency(2.0),
                ..GridOptions::default()
            },
        )
        .unwrap();
        assert!(*capped.frequencies.last().unwrap() <= 2.0);
        assert!(*capped.frequencies.last().unwrap() > 2.0 - capped.info.df);
    }

    #[test]
    fn grid_rejects_bad_options() {
        let times = vec![0.0, 1.0, 2.0, 3.0];
        let with = |limits, oversampling, max_n_freq| {
            frequency_grid(
                &times,
                &GridOptions {
                    limits,
                    oversampling,
                    max_n_freq,
                },
            )
        };
        assert!(matches!(
            with(
                FrequencyLimits::PeriodRange {
                    min_period: 5.0,
                    max_period: 2.0
                },
                10.0,
                100
            ),
            Err(PeriodogramError::InvalidPeriodRange { .. })
        ));
        assert!(matches!(
            with(
                FrequencyLimits::PeriodRange {
                    min_period: 0.0,
                    max_period: 2.0
                },
                10.0,
                100
            ),
            Err(PeriodogramError::InvalidPeriodRange { .. })
        ));
        assert!(matches!(
            with(FrequencyLimits::MaxFrequency(0.1), 10.0, 100),
            Err(PeriodogramError::InvalidMaxFrequency { .. })
        ));
        assert!(matches!(
            with(FrequencyLimits::Auto, 0.5, 100),
            Err(PeriodogramError::InvalidOversampling { .. })
        ));
        assert!(matches!(
            with(FrequencyLimits::MaxFrequency(1e6), 10.0, 1000),
            Err(PeriodogramError::GridTooLarge {
                max_n_freq: 1000,
                ..
            })
        ));
        assert_eq!(
            frequency_grid(&[3.0, 3.0, 3.0], &GridOptions::default()),
            Err(PeriodogramError::ZeroBaseline { time: 3.0 })
        );
    }

    #[test]
    fn inputs_are_checked() {
        let t = [0.0, 1.0, 2.0, 3.5, 5.0];
        let y = [1.0, 2.0, 0.0, 1.5, -1.0];
        let e = [1.0; 5];
        let f = [0.1];
        assert_eq!(
            gls_power(&t, &y[..4], &e, &f),
            Err(PeriodogramError::LengthMismatch {
                times: 5,
                values: 4,
                errors: 5
            })
        );
        assert_eq!(
            gls_power(&t[..3], &y[..3], &e[..3], &f),
            Err(PeriodogramError::TooFewEpochs {
                n_epochs: 3,
                minimum: MIN_EPOCHS
            })
        );
        let mut bad = t;
        bad[2] = f64::NAN;
        assert!(matches!(
            gls_power(&bad, &y, &e, &f),
            Err(PeriodogramError::NonFiniteTime { index: 2, .. })
        ));
        let mut bad = y;
        bad[4] = f64::INFINITY;
        assert!(matches!(
            gls_power(&t, &bad, &e, &f),
            Err(PeriodogramError::NonFiniteValue { index: 4, .. })
        ));
        let mut bad = e;
        bad[1] = 0.0;
        assert_eq!(
            gls_power(&t, &y, &bad, &f),
            Err(PeriodogramError::InvalidError {
                index: 1,
                value: 0.0
            })
        );
        assert_eq!(
            gls_power(&[2.0; 5], &y, &e, &f),
            Err(PeriodogramError::ZeroBaseline { time: 2.0 })
        );
        assert!(matches!(
            gls_power(&t, &[7.0; 5], &e, &f),
            Err(PeriodogramError::ConstantValues { .. })
        ));
        assert_eq!(
            gls_power(&t, &y, &e, &[0.1, -0.2]),
            Err(PeriodogramError::InvalidFrequency {
                index: 1,
                value: -0.2
            })
        );
        assert!(matches!(
            false_alarm_probability(1.5, &t, &e, 1.0),
            Err(PeriodogramError::InvalidPower { .. })
        ));
        assert!(matches!(
            false_alarm_level(0.0, &t, &e, 1.0),
            Err(PeriodogramError::InvalidFalseAlarmProbability { .. })
        ));
        assert!(matches!(
            false_alarm_probability(0.5, &t, &e, f64::NAN),
            Err(PeriodogramError::InvalidSearchedMaxFrequency { .. })
        ));
    }

    #[test]
    fn false_alarm_level_inverts_the_probability() {
        // Round trip of Baluev 2008, eq. 6: FAP(level(p)) = p, relative 1e-9
        // (bisection runs to the last bit of power).
        let times = irregular_times(30, 4.0);
        let errors: Vec<f64> = (0..30).map(|i| 1.0 + (i % 4) as f64).collect();
        for &fap in &[0.5, 0.1, 0.01, 0.001, 1e-6] {
            let level = false_alarm_level(fap, &times, &errors, 0.4).unwrap();
            let back = false_alarm_probability(level, &times, &errors, 0.4).unwrap();
            assert_relative_eq!(back, fap, max_relative = 1e-9);
        }
        assert_eq!(false_alarm_probability(0.0, &times, &errors, 0.4), Ok(1.0));
        assert_eq!(false_alarm_probability(1.0, &times, &errors, 0.4), Ok(0.0));
        // A wider searched band has more chances: a larger FAP at equal power.
        let narrow = false_alarm_probability(0.4, &times, &errors, 0.1).unwrap();
        let wide = false_alarm_probability(0.4, &times, &errors, 1.0).unwrap();
        assert!(wide > narrow);
    }

    #[test]
    fn top_peaks_are_distinct_local_maxima() {
        let frequencies: Vec<f64> = (0..20).map(|k| 0.1 * k as f64).collect();
        let power = [
            0.9, 0.1, 0.2, 0.5, 0.45, 0.1, 0.3, 0.1, 0.0, 0.6, 0.61, 0.2, 0.1, 0.1, 0.1, 0.1, 0.1,
            0.2, 0.1, 0.3,
        ];
        // Local maxima: 0 (0.9), 3 (0.5), 6 (0.3), 10 (0.61), 17 (0.2), 19 (0.3).
        let all = top_peak_indices(&frequencies, &power, 0.05, 10).unwrap();
        assert_eq!(all, vec![0, 10, 3, 6, 19, 17]);
        // At least 0.35 apart: 3 is 0.3 from 0 and 17 is 0.2 from 19 (the
        // tie 6 / 19 at 0.3 goes to the lower frequency first).
        let spaced = top_peak_indices(&frequencies, &power, 0.35, 10).unwrap();
        assert_eq!(spaced, vec![0, 10, 6, 19]);
        assert_eq!(
            top_peak_indices(&frequencies, &power, 0.05, 2).unwrap(),
            vec![0, 10]
        );
        assert!(matches!(
            top_peak_indices(&frequencies[..3], &power, 0.1, 2),
            Err(PeriodogramError::PowerLengthMismatch { .. })
        ));
    }

    #[test]
    fn result_serialises_to_json() {
        let times = irregular_times(12, 3.0);
        let values: Vec<f64> = times.iter().map(|t| libm::sin(0.5 * t)).collect();
        let errors = vec![0.3; 12];
        let result = periodogram(&times, &values, &errors, &PeriodogramOptions::default()).unwrap();
        let json = serde_json::to_value(&result).unwrap();
        assert_eq!(
            json["grid"]["n_freq"].as_u64().unwrap() as usize,
            result.grid.n_freq
        );
        assert_eq!(json["fap_thresholds"].as_array().unwrap().len(), 3);
    }

    fn epochs_strategy() -> impl Strategy<Value = (Vec<f64>, Vec<f64>, Vec<f64>)> {
        (MIN_EPOCHS + 1..40).prop_flat_map(|n| {
            (
                proptest::collection::vec(0.0..1000.0_f64, n),
                proptest::collection::vec(-50.0..50.0_f64, n),
                proptest::collection::vec(0.5..10.0_f64, n),
            )
        })
    }

    fn trial_frequencies(times: &[f64]) -> Vec<f64> {
        let (lo, hi) = time_span(times);
        let baseline = (hi - lo).max(1.0);
        (1..60)
            .map(|k| k as f64 / (3.0 * baseline) + 0.0137 * k as f64)
            .collect()
    }

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(64))]

        #[test]
        fn power_is_bounded_and_invariant_to_offset_and_scale(
            (times, values, errors) in epochs_strategy(),
            offset in -1000.0..1000.0_f64,
            scale in prop_oneof![-1000.0..-1e-3_f64, 1e-3..1000.0_f64],
        ) {
            let (lo, hi) = time_span(&times);
            prop_assume!(hi - lo > 1.0);
            let frequencies = trial_frequencies(&times);
            let power = gls_power(&times, &values, &errors, &frequencies).unwrap();
            let window = spectral_window(&times, &errors, &frequencies).unwrap();
            for (&p, &w) in power.iter().zip(&window) {
                prop_assert!((0.0..=1.0).contains(&p));
                prop_assert!((0.0..=1.0).contains(&w));
            }
            // Exact invariances of p = (χ²₀ − χ²)/χ²₀ under y → a·y + c
            // (Zechmeister & Kürster 2009, eq. 4). Tolerance 1e-9 covers the
            // rounding of centring values shifted by up to 1000 with a scatter
            // of order 10 (~N·ε·|c|/scatter ≈ 1e-12, with margin).
            let shifted: Vec<f64> = values.iter().map(|y| y + offset).collect();
            let scaled: Vec<f64> = values.iter().map(|y| y * scale).collect();
            let power_shifted = gls_power(&times, &shifted, &errors, &frequencies).unwrap();
            let power_scaled = gls_power(&times, &scaled, &errors, &frequencies).unwrap();
            for i in 0..power.len() {
                prop_assert!((power[i] - power_shifted[i]).abs() < 1e-9);
                prop_assert!((power[i] - power_scaled[i]).abs() < 1e-9);
            }
        }

        #[test]
        fn power_does_not_depend_on_time_origin(
            (times, values, errors) in epochs_strategy(),
            origin in -2.46e6..2.46e6_f64,
        ) {
            let (lo, hi) = time_span(&times);
            prop_assume!(hi - lo > 1.0);
            // Tolerance 1e-7: a time origin of 2.46e6 d stores the times with
            // ~5e-10 d rounding, a phase error ≤ 2π·f·5e-10 ≈ 2e-9 rad at
            // f ≤ 1 /d, which moves the power by a few times that.
            let frequencies = trial_frequencies(&times);
            let moved: Vec<f64> = times.iter().map(|t| t + origin).collect();
            let power = gls_power(&times, &values, &errors, &frequencies).unwrap();
            let power_moved = gls_power(&moved, &values, &errors, &frequencies).unwrap();
            for i in 0..power.len() {
                prop_assert!((power[i] - power_moved[i]).abs() < 1e-7);
            }
        }
    }
}
