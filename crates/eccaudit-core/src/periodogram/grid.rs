//! The uniform frequency grid of a period search and the rule that sets its ends.

use super::*;

/// Median of the positive spacings between consecutive sorted times.
pub(super) fn median_positive_spacing(times: &[f64]) -> Option<f64> {
    let mut sorted = times.to_vec();
    sorted.sort_by(f64::total_cmp);
    let spacings: Vec<f64> = sorted
        .windows(2)
        .map(|pair| pair[1] - pair[0])
        .filter(|&d| d > 0.0)
        .collect();
    if spacings.is_empty() {
        return None;
    }
    Some(crate::stats::median(&spacings))
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
