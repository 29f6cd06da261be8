//! Epochs checked and reduced once for every frequency: input checks, normalised weights
//! 1/σ², times relative to their weighted mean and weighted-centred values.

use super::*;

/// Epochs checked and reduced to what every frequency needs: times relative
/// to their weighted mean, normalised weights and weighted-centred values.
pub(super) struct PreparedEpochs {
    pub(super) shifted_times: Vec<f64>,
    pub(super) weights: Vec<f64>,
    pub(super) centred_values: Vec<f64>,
    /// Σ w_i ỹ_i² with Σ w_i = 1 (Zechmeister & Kürster 2009, YY hat).
    pub(super) weighted_square_sum: f64,
}

pub(super) fn check_times_and_errors(
    times: &[f64],
    errors: &[f64],
) -> Result<(), PeriodogramError> {
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
pub(super) fn check_baseline(times: &[f64]) -> Result<f64, PeriodogramError> {
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

pub(super) fn time_span(times: &[f64]) -> (f64, f64) {
    times
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), &t| {
            (lo.min(t), hi.max(t))
        })
}

pub(super) fn check_lengths(
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

pub(super) fn check_frequencies(frequencies: &[f64]) -> Result<(), PeriodogramError> {
    for (index, &value) in frequencies.iter().enumerate() {
        if !(value.is_finite() && value > 0.0) {
            return Err(PeriodogramError::InvalidFrequency { index, value });
        }
    }
    Ok(())
}

/// Normalised weights w_i = (1/σ_i²) / Σ_j (1/σ_j²) (Zechmeister & Kürster
/// 2009, Sect. 2, weights summing to one).
pub(super) fn normalised_weights(errors: &[f64]) -> Vec<f64> {
    let mut weights: Vec<f64> = errors.iter().map(|&e| 1.0 / (e * e)).collect();
    let total: f64 = weights.iter().sum();
    for weight in &mut weights {
        *weight /= total;
    }
    weights
}

pub(super) fn weighted_mean(weights: &[f64], samples: &[f64]) -> f64 {
    weights.iter().zip(samples).map(|(w, x)| w * x).sum()
}

/// Weighted variance of the times, two-pass (Baluev 2008 D_t, with weights 1/σ²).
pub(super) fn weighted_time_variance(times: &[f64], errors: &[f64]) -> f64 {
    let weights = normalised_weights(errors);
    let mean = weighted_mean(&weights, times);
    weights
        .iter()
        .zip(times)
        .map(|(w, t)| w * (t - mean) * (t - mean))
        .sum()
}

pub(super) fn prepare(
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
