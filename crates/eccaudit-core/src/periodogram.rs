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

use serde::{Deserialize, Serialize};
use thiserror::Error;

use crate::lanes::Lanes;

mod epochs;
mod fap;
mod grid;
mod peaks;
mod recurrence;
mod sums;

use epochs::*;
use fap::*;
pub use fap::{false_alarm_level, false_alarm_probability};
pub use grid::frequency_grid;
pub use peaks::top_peak_indices;
use recurrence::*;
use sums::*;
pub use sums::{gls_power, spectral_window};

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
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
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
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
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
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
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
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
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
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
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
mod tests;
