//! Tests of the period search: against astropy fixtures, closed forms and the direct sums.

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
        0.9, 0.1, 0.2, 0.5, 0.45, 0.1, 0.3, 0.1, 0.0, 0.6, 0.61, 0.2, 0.1, 0.1, 0.1, 0.1, 0.1, 0.2,
        0.1, 0.3,
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

#[test]
fn grid_sums_have_the_same_bits_on_every_instruction_set() {
    // The recurrence compiled for every instruction set this processor offers, against the
    // portable build: all seven sums at every frequency of a grid longer than a restart.
    use crate::lanes::Isa;
    let times: Vec<f64> = irregular_times(37, 3.3)
        .iter()
        .map(|t| t + 2_459_000.0)
        .collect();
    let values: Vec<f64> = times.iter().map(|t| 12.0 * libm::sin(0.9 * t)).collect();
    let errors: Vec<f64> = (0..37).map(|i| 1.0 + 0.25 * (i % 3) as f64).collect();
    let epochs = prepare(&times, Some(&values), &errors).unwrap();
    let df = 1e-3;
    let frequencies: Vec<f64> = (0..2 * RECURRENCE_RESTART + 3)
        .map(|k| 0.01 + k as f64 * df)
        .collect();
    let collect = |isa: Isa| {
        let mut out = Vec::new();
        grid_sums_on(isa, &epochs, df, &frequencies, |s| {
            out.extend(
                [
                    s.cos_sum,
                    s.sin_sum,
                    s.value_cos,
                    s.value_sin,
                    s.cos_cos,
                    s.sin_sin,
                    s.cos_sin,
                ]
                .map(f64::to_bits),
            )
        });
        out
    };
    let portable = collect(Isa::Portable);
    assert_eq!(portable.len(), 7 * frequencies.len());
    for isa in Isa::available() {
        assert_eq!(collect(isa), portable, "{isa:?}");
    }
}
