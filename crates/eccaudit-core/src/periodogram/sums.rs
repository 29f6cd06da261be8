//! Sums and power at one frequency: the weighted trigonometric sums of Zechmeister & Kürster
//! (2009), the normalised power from them, the periodogram on arbitrary frequencies
//! ([`gls_power`]) and the spectral window.

use super::*;

/// Sums at one angular frequency, with normalised weights and centred values.
#[derive(Default)]
pub(super) struct FrequencySums {
    pub(super) cos_sum: f64,
    pub(super) sin_sum: f64,
    pub(super) value_cos: f64,
    pub(super) value_sin: f64,
    pub(super) cos_cos: f64,
    pub(super) sin_sin: f64,
    pub(super) cos_sin: f64,
}

/// Weighted trigonometric sums at one frequency (Zechmeister & Kürster 2009,
/// Sect. 2: C, S, YC, YS, CC, SS, CS before their mean corrections). When
/// `with_values` is false the value sums are left at zero.
pub(super) fn frequency_sums(
    epochs: &PreparedEpochs,
    frequency: f64,
    with_values: bool,
) -> FrequencySums {
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
    pub(super) fn add_epoch(
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

/// Normalised power from the sums (Zechmeister & Kürster 2009, eqs. 5–6),
/// values already centred so that Y = 0.
#[inline]
pub(super) fn power_from_sums(sums: &FrequencySums, weighted_square_sum: f64) -> f64 {
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

pub(super) fn check_values(values: &[f64]) -> Result<(), PeriodogramError> {
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

#[inline]
pub(super) fn window_from_sums(sums: &FrequencySums) -> f64 {
    (sums.cos_sum * sums.cos_sum + sums.sin_sum * sums.sin_sum).clamp(0.0, 1.0)
}
