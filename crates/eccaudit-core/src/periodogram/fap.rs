//! Baluev (2008) false-alarm probability of the highest peak, and its inverse for threshold
//! lines.

use super::*;

/// Baluev's bandwidth W = f_max·T_eff with T_eff = √(4π·D_t), D_t the weighted
/// variance of the times (Baluev 2008, MNRAS 385, 1279, Sect. 3; as in
/// astropy's `tau_davies`).
pub(super) fn baluev_bandwidth(times: &[f64], errors: &[f64], max_frequency: f64) -> f64 {
    let time_variance = weighted_time_variance(times, errors);
    max_frequency * libm::sqrt(4.0 * core::f64::consts::PI * time_variance)
}

/// Baluev (2008) alias-free approximation to the false-alarm probability of
/// the highest peak reaching `power` (standard normalisation, one sinusoid
/// plus offset: d_H = 1, d_K = 3):
/// FAP = 1 − (1 − FAP_single)·e^(−τ) (Baluev 2008, eq. 6), FAP_single =
/// (1 − Z)^((N−3)/2), τ = γ_H·W·(1 − Z)^((N−4)/2)·√(N_H·Z/2) (the Davies term of
/// eq. 5 with Table 1), γ_H = √(2/N_H)·Γ(N_H/2)/Γ((N_H−1)/2), N_H = N − 1.
pub(super) fn baluev_fap(power: f64, n_epochs: usize, bandwidth: f64) -> f64 {
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
pub(super) fn baluev_level(
    fap: f64,
    n_epochs: usize,
    bandwidth: f64,
) -> Result<f64, PeriodogramError> {
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

pub(super) fn check_fap_inputs(
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
