//! Distinct peaks of a periodogram, highest first, for multi-start fitting.

use super::*;

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
