//! The ensemble convergence rule on simulated radial-velocity data, and the analytic marginalisation of the offsets against sampling them.

use crate::support::run_to_verdict;
use eccaudit_core::fit::FitData;
use eccaudit_core::orbit::OrbitalElements;
use eccaudit_core::posterior::{
    prior_sensitivity, sensitivity_start, start_from_fit, RvPosterior, SensitivityRequest,
};
use eccaudit_core::random::{normal, standard_normal, stream_rng};
use eccaudit_core::sampler::{
    integrated_autocorrelation_time, LogDensity, RunLength, SamplerSettings, Steer,
};
use rand::RngExt;

/// A well-constrained eccentric orbit (P = 23.7 d, K = 40 m/s, e = 0.35) at 40 random epochs
/// over a year, σ = 3 m/s plus 2 m/s of excess scatter, two instruments with offsets −12 and
/// +30 m/s (fixed seed).
fn simulate(seed: u64) -> FitData {
    let elements = OrbitalElements::new(23.7, 40.0, 0.35, 1.1, 2_459_005.0).unwrap();
    let mut rng = stream_rng(seed, 3);
    let mut times: Vec<f64> = (0..40)
        .map(|_| 2_459_000.0 + 365.0 * rng.random::<f64>())
        .collect();
    times.sort_by(f64::total_cmp);
    let instruments: Vec<usize> = (0..40).map(|i| usize::from(i % 3 == 0)).collect();
    let velocities: Vec<f64> = times
        .iter()
        .zip(&instruments)
        .map(|(&t, &j)| {
            elements.radial_velocity(t)
                + if j == 0 { -12.0 } else { 30.0 }
                + normal(&mut rng, 0.0, (9.0f64 + 4.0).sqrt())
        })
        .collect();
    FitData::new(
        &times,
        &velocities,
        &[3.0; 40],
        &instruments,
        &["a".to_string(), "b".to_string()],
    )
}

/// At default settings (4 ensembles × 16 walkers, run until converged) a well-constrained
/// orbit comes out "converged" under every prior of the default set, within the default
/// budget, and the posterior of e covers the true 0.35 (95 % interval).
#[test]
fn well_constrained_orbit_converges_at_default_settings() {
    let data = simulate(11);
    let settings = SensitivityRequest::default().to_settings().unwrap();
    let report = prior_sensitivity(&data, &settings, &mut |_| Steer::Continue).unwrap();
    for run in &report.runs {
        let s = &run.summary;
        println!(
            "{}: median {:.3}, 95% [{:.3}, {:.3}], {} steps, {:.0} tau; {}",
            s.prior_label,
            s.median,
            s.interval_95[0],
            s.interval_95[1],
            s.cost.n_steps_total,
            s.cost.autocorrelation_times,
            s.verdict.lines().next().unwrap()
        );
        assert!(s.converged, "{}: {}", s.prior_label, s.verdict);
        assert!(s.verdict.starts_with("converged"));
        assert!(s.interval_95[0] < 0.35 && 0.35 < s.interval_95[1], "{s:?}");
    }
}

/// Two-sample Kolmogorov–Smirnov statistic of two samples.
fn ks_statistic(mut a: Vec<f64>, mut b: Vec<f64>) -> f64 {
    a.sort_by(f64::total_cmp);
    b.sort_by(f64::total_cmp);
    let (mut i, mut j, mut d) = (0usize, 0usize, 0.0f64);
    while i < a.len() && j < b.len() {
        if a[i] <= b[j] {
            i += 1;
        } else {
            j += 1;
        }
        d = d.max((i as f64 / a.len() as f64 - j as f64 / b.len() as f64).abs());
    }
    d
}

/// The posterior of e with the two offsets integrated out analytically
/// (`RvPosterior::marginalised`) equals the posterior of e with the offsets sampled under
/// their uniform priors (`RvPosterior::new`), by a two-sample Kolmogorov–Smirnov test on the
/// draws of e, jitter sampled. Both runs go until converged. The draws are autocorrelated, so
/// the sample sizes of the test are the effective ones, N/τ_e (τ_e by the Sokal window): the
/// critical value at α = 0.01 is 1.628 √((n₁ + n₂)/(n₁n₂)) (Smirnov's asymptotic
/// distribution, common practice). Power: with n₁ ≈ n₂ ≈ n the test rejects a location shift δ
/// (in posterior standard deviations) when 0.4 δ ≳ 1.628 √(2/n), i.e. δ ≈ 0.12 at n = 3000:
/// a difference in the posterior of e a tenth of its width is detected about half the time.
#[test]
fn marginalised_offsets_give_the_same_posterior_of_e_as_sampled_ones() {
    let data = simulate(12);
    let settings = SensitivityRequest {
        priors: vec!["uniform".into()],
        ..SensitivityRequest::default()
    }
    .to_settings()
    .unwrap();
    let posterior = settings.posterior.with_eccentricity(settings.priors[0]);
    let start = sensitivity_start(&data, &settings).unwrap();
    let prior = posterior.effective_eccentricity().validate().unwrap();
    let walker_start = start_from_fit(
        &start.fit,
        &posterior,
        &prior,
        data.uncertainties(),
        data.n_instruments(),
    )
    .unwrap();
    let centres = walker_start.lambda_centres(&posterior, data.n_instruments());
    let draws_of_e = |target: &RvPosterior, seed: u64| -> (Vec<f64>, f64) {
        let dim = target.dim();
        let sampler = SamplerSettings {
            n_walkers: 2 * dim + 2,
            seed,
            ..SamplerSettings::default()
        };
        let starts: Vec<Vec<f64>> = (0..4)
            .map(|m| {
                let mut rng = stream_rng(seed, 50 + m);
                let mut out = Vec::new();
                while out.len() < sampler.n_walkers * dim {
                    let full: Vec<f64> = walker_start
                        .point
                        .iter()
                        .zip(&walker_start.scales)
                        .map(|(c, s)| c + s * standard_normal(&mut rng))
                        .collect();
                    let x = target.sampled_point(&full);
                    if target.log_density(&x).is_finite() {
                        out.extend(x);
                    }
                }
                out
            })
            .collect();
        let run = run_to_verdict(target, &starts, &sampler, &RunLength::default());
        assert!(run.diagnostics.converged, "{}", run.diagnostics.verdict());
        let chains = run.merged();
        let traces: Vec<Vec<f64>> = (0..chains.n_walkers)
            .map(|w| {
                (0..chains.n_stored_steps)
                    .map(|s| {
                        let x = chains.sample(s, w);
                        x[2] * x[2] + x[3] * x[3]
                    })
                    .collect()
            })
            .collect();
        let tau = integrated_autocorrelation_time(&traces).tau;
        let all: Vec<f64> = traces.into_iter().flatten().collect();
        let ess = all.len() as f64 / tau;
        (all, ess)
    };
    let marginal = RvPosterior::marginalised(&data, &posterior, &centres).unwrap();
    let sampled = RvPosterior::new(&data, &posterior, &centres).unwrap();
    assert_eq!(sampled.dim(), marginal.dim() + 2);
    let (a, n1) = draws_of_e(&marginal, 21);
    let (b, n2) = draws_of_e(&sampled, 22);
    let d = ks_statistic(a, b);
    let critical = 1.628 * ((n1 + n2) / (n1 * n2)).sqrt();
    println!("KS D = {d:.4}, critical {critical:.4} (ESS {n1:.0}, {n2:.0})");
    assert!(d < critical, "D = {d} ≥ {critical}");
}
