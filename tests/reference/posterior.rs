//! Posterior sampling under several eccentricity priors: coverage on a well-sampled eccentric
//! orbit, visible prior dependence on a sparse circular one, the Savage–Dickey estimator on a
//! linear-Gaussian toy with closed-form evidences, and the histogram KL estimate on a Beta
//! density with closed-form entropy.
//!
//! Every statistical check uses a fixed seed; tolerances come from the Monte-Carlo errors the
//! estimators report (stated at each check).

use eccaudit_core::fit::{FitData, FitOptions};
use eccaudit_core::orbit::OrbitalElements;
use eccaudit_core::posterior::{
    default_prior_set, kl_divergence_binned, prior_sensitivity, savage_dickey_ball_ratio,
    BayesFactorStatus, SensitivityReport, SensitivitySettings,
};
use eccaudit_core::random::{normal, standard_normal, stream_rng};
use eccaudit_core::sampler::{SamplerSettings, Steer};
use eccaudit_core::stats::regularized_incomplete_beta;
use rand::RngExt;

/// A simulated single-instrument table: `n` irregular epochs over `span` days.
fn simulate(elements: &OrbitalElements, n: usize, span: f64, sigma: f64, seed: u64) -> FitData {
    let mut rng = stream_rng(seed, 3);
    let mut times: Vec<f64> = (0..n)
        .map(|_| 2_459_000.0 + span * rng.random::<f64>())
        .collect();
    times.sort_by(f64::total_cmp);
    let velocities: Vec<f64> = times
        .iter()
        .map(|&t| elements.radial_velocity(t) - 12.0 + normal(&mut rng, 0.0, sigma))
        .collect();
    FitData::new(
        &times,
        &velocities,
        &vec![sigma; n],
        &vec![0; n],
        &["sim".to_string()],
    )
}

fn run_set(data: &FitData, period: f64, seed: u64, n_steps: usize) -> SensitivityReport {
    let settings = SensitivitySettings {
        sampler: SamplerSettings {
            seed,
            n_steps,
            n_burn: 1000,
            ..SamplerSettings::default()
        },
        fit: FitOptions {
            initial_periods: vec![period],
            ..FitOptions::default()
        },
        ..SensitivitySettings::default()
    };
    prior_sensitivity(data, &settings, &mut |_| Steer::Continue).expect("set runs")
}

#[test]
fn well_sampled_eccentric_orbit_is_covered_under_every_prior() {
    // Truth e = 0.35 with K/σ = 10 at 40 epochs: the likelihood dominates every prior of the
    // default set (all put mass at 0.35, including the e_max = 0.5 truncation). A correct
    // sampler covers the truth with a 95 % interval with probability ≈ 0.95 per seed; the
    // intervals of the six priors are nearly identical here, so the seed is one trial.
    let truth = OrbitalElements::new(23.7, 30.0, 0.35, 2.2, 2_459_010.0).unwrap();
    let data = simulate(&truth, 40, 300.0, 3.0, 11);
    // τ ≈ 90 steps was measured here; 8000 stored steps ≈ 90 τ. The sampler's strict verdict
    // (split R̂ < 1.01 per walker) still flags R̂ ≈ 1.01–1.03 at this length, so convergence is
    // printed, not asserted; the MC errors below come from the ESS and are honest either way.
    let report = run_set(&data, 23.7, 1, 8000);
    assert_eq!(report.runs.len(), default_prior_set().len());
    for run in &report.runs {
        let s = &run.summary;
        println!(
            "{:<40} median {:.4} ± {:.4}  95% [{:.4}, {:.4}]  mode {:.4}  KL {:.3}  converged {}",
            s.prior_label,
            s.median,
            s.median_mc_error,
            s.interval_95[0],
            s.interval_95[1],
            s.mode,
            s.information_gain.nats,
            s.converged
        );
        assert!(
            s.interval_95[0] <= 0.35 && 0.35 <= s.interval_95[1],
            "{}: 95 % interval {:?} misses e = 0.35",
            s.prior_label,
            s.interval_95
        );
        assert!(s.ess_bulk > 400.0, "{}: {}", s.prior_label, s.verdict);
        // A strongly eccentric posterior leaves no mass near 0: BF01 is at most a limit.
        assert_ne!(s.bayes_factor.status, BayesFactorStatus::Undefined);
        assert!(s.bayes_factor.bf01 < 0.1, "{:?}", s.bayes_factor);
        // The data are informative: the posterior gains information over every prior.
        assert!(s.information_gain.nats > 1.0);
    }
}

#[test]
fn sparse_circular_orbit_shows_its_prior() {
    // Truth e = 0 with K = 4 m/s, σ = 3 m/s at 12 epochs: e is barely constrained, so the
    // posterior follows the prior. Checks: the medians under uniform e_max = 0.99 and 0.5 differ
    // by more than 3 combined Monte-Carlo errors, and so do 0.8 against each; the report's spread
    // equals the range. (Convergence is not asserted: with so little signal the walkers wander
    // between high-e spikes, and the MC errors, from the ESS, say so.)
    let truth = OrbitalElements::new(9.3, 4.0, 0.0, 0.0, 2_459_002.0).unwrap();
    let data = simulate(&truth, 12, 120.0, 3.0, 5);
    let report = run_set(&data, 9.3, 2, 4000);
    let s: Vec<_> = report.runs.iter().map(|r| &r.summary).collect();
    for x in &s {
        println!(
            "{:<40} median {:.4} ± {:.4}  68% [{:.3}, {:.3}]  P(e<0.05) {:.3}  KL {:.3}  BF01 {:.3} ± {:.3}",
            x.prior_label, x.median, x.median_mc_error, x.interval_68[0], x.interval_68[1],
            x.p_nearly_circular, x.information_gain.nats, x.bayes_factor.bf01, x.bayes_factor.bf01_error
        );
    }
    let differ = |a: usize, b: usize| {
        let gap = (s[a].median - s[b].median).abs();
        let error = (s[a].median_mc_error.powi(2) + s[b].median_mc_error.powi(2)).sqrt();
        assert!(
            gap > 3.0 * error,
            "{} vs {}: medians {} and {} (MC error {error})",
            s[a].prior_label,
            s[b].prior_label,
            s[a].median,
            s[b].median
        );
    };
    differ(0, 2); // uniform e_max = 0.99 vs 0.5
    differ(0, 1); // 0.99 vs 0.8
    differ(1, 2); // 0.8 vs 0.5
    let max = s.iter().map(|x| x.median).fold(f64::MIN, f64::max);
    let min = s.iter().map(|x| x.median).fold(f64::MAX, f64::min);
    assert!((report.median_spread - (max - min)).abs() < 1e-15);
    // Truncation at 0.5 can only move the median down.
    assert!(s[2].median < s[0].median);
    let text = report.to_string();
    assert!(text.contains("Spread of the posterior median over the set"));
}

#[test]
fn savage_dickey_matches_the_closed_form_bayes_factor_of_a_linear_gaussian_toy() {
    // Nested linear-Gaussian model: data ȳ ~ N2(θ, s² I) with s² = σ²/n = 0.25, θ = (h, k),
    // prior θ ~ N2(0, τ² I) with τ = 1; null θ = 0. Evidences in closed form (conjugate
    // Gaussian, e.g. Gelman et al. 2013, Bayesian Data Analysis 3rd ed., §2.5; Savage–Dickey as
    // in Wagenmakers et al. 2010, Cognitive Psychology 60, 158, from memory):
    // BF01 = N2(ȳ; 0, s² I) / N2(ȳ; 0, (s² + τ²) I). With e = h² + k², the prior on e is
    // exponential: P(e < ε) = 1 − exp(−ε/2τ²). The posterior is N2(m, v I), v = 1/(1/s² + 1/τ²),
    // m = v ȳ/s²; 10⁶ i.i.d. posterior draws (ESS = N).
    let (s2, tau2) = (0.25f64, 1.0f64);
    let y = [0.3f64, 0.2];
    let r2 = y[0] * y[0] + y[1] * y[1];
    let gauss2 = |var: f64| (-r2 / (2.0 * var)).exp() / (2.0 * std::f64::consts::PI * var);
    let bf_exact = gauss2(s2) / gauss2(s2 + tau2);
    let v = 1.0 / (1.0 / s2 + 1.0 / tau2);
    let m = [v * y[0] / s2, v * y[1] / s2];
    let mut rng = stream_rng(77, 0);
    let n = 1_000_000;
    let e: Vec<f64> = (0..n)
        .map(|_| {
            let h = m[0] + v.sqrt() * standard_normal(&mut rng);
            let k = m[1] + v.sqrt() * standard_normal(&mut rng);
            h * h + k * k
        })
        .collect();
    let sd = savage_dickey_ball_ratio(
        &e,
        n as f64,
        |eps| -(-eps / (2.0 * tau2)).exp_m1(),
        |q| -2.0 * tau2 * (-q).ln_1p(),
    );
    assert_eq!(sd.status, BayesFactorStatus::Estimated);
    let ball = sd.chosen.unwrap();
    // Bias of the finite ball, computed: the exact posterior and prior masses of the chosen disc
    // by a 400 × 400 midpoint rule in polar coordinates (error ≪ 1e-6 relative).
    let radius = ball.epsilon.sqrt();
    let disc_mass = |centre: [f64; 2], var: f64| {
        let (nr, nphi) = (400, 400);
        let mut total = 0.0;
        for i in 0..nr {
            let r = (i as f64 + 0.5) * radius / nr as f64;
            for j in 0..nphi {
                let phi = (j as f64 + 0.5) * 2.0 * std::f64::consts::PI / nphi as f64;
                let (dx, dy) = (r * phi.cos() - centre[0], r * phi.sin() - centre[1]);
                total += (-(dx * dx + dy * dy) / (2.0 * var)).exp() * r;
            }
        }
        total * (radius / nr as f64) * (2.0 * std::f64::consts::PI / nphi as f64)
            / (2.0 * std::f64::consts::PI * var)
    };
    let ratio_at_ball = disc_mass(m, v) / disc_mass([0.0, 0.0], tau2);
    let bias = ratio_at_ball - bf_exact;
    println!(
        "BF01 exact {bf_exact:.5}; ball ε = {:.5} (prior mass {}): exact ratio {ratio_at_ball:.5}, \
         estimate {:.5} ± {:.5}; stable {}",
        ball.epsilon, ball.prior_mass, sd.bf01, sd.bf01_error, sd.stable
    );
    // (1) The estimator is unbiased for the finite-ball ratio: within 4 of its stated σ.
    assert!((sd.bf01 - ratio_at_ball).abs() < 4.0 * sd.bf01_error);
    // (2) Against the closed form: within 4σ plus the computed finite-ball bias.
    assert!((sd.bf01 - bf_exact).abs() < 4.0 * sd.bf01_error + bias.abs());
    // The finite-ball bias at the chosen ε is small next to the Bayes factor (≤ 2 %).
    assert!(bias.abs() < 0.02 * bf_exact, "bias {bias}");
    assert!(sd.stable);
}

#[test]
fn histogram_kl_recovers_the_closed_form_beta_entropy() {
    // KL(Beta(2, 5) ‖ U(0, 1)) = −h(Beta(2, 5)), with the differential entropy
    // h = ln B(a,b) − (a−1)ψ(a) − (b−1)ψ(b) + (a+b−2)ψ(a+b) (Lazo & Rathie 1978, IEEE Trans.
    // Inf. Theory 24, 120, Table I; scipy.stats.beta(2, 5).entropy() from memory −0.4845).
    // With ψ(n) = H_{n−1} − γ (the γ terms cancel): h = −ln 30 − 1 − 4·25/12 + 5·49/20.
    let h = -(30f64.ln()) - 1.0 - 4.0 * 25.0 / 12.0 + 5.0 * 49.0 / 20.0;
    let kl_exact = -h;
    // Draws: Beta(2, 5) is the 2nd smallest of 6 uniforms (order statistics, e.g. David &
    // Nagaraja 2003, Order Statistics, §2.1), an independent path from the crate's Beta code.
    let mut rng = stream_rng(3, 1);
    let n = 200_000;
    let draws: Vec<f64> = (0..n)
        .map(|_| {
            let mut u: [f64; 6] = std::array::from_fn(|_| rng.random::<f64>());
            u.sort_by(f64::total_cmp);
            u[1]
        })
        .collect();
    let estimate = kl_divergence_binned(&draws, n as f64, 0.0, 1.0, 50, |e| e);
    // The binned divergence with exact Beta bin masses (the estimator's target): coarse-graining
    // makes it ≤ the continuous KL; its gap is the stated discretisation bias.
    let binned: f64 = (0..50)
        .map(|b| {
            let (lo, hi) = (b as f64 / 50.0, (b + 1) as f64 / 50.0);
            let p = regularized_incomplete_beta(2.0, 5.0, hi)
                - regularized_incomplete_beta(2.0, 5.0, lo);
            p * (p / (hi - lo)).ln()
        })
        .sum();
    println!(
        "KL exact {kl_exact:.5}, binned {binned:.5}, estimate {:.5} ± {:.5} (plug-in {:.5})",
        estimate.nats, estimate.standard_error, estimate.plug_in
    );
    assert!(binned <= kl_exact);
    assert!(
        kl_exact - binned < 0.005,
        "discretisation bias {}",
        kl_exact - binned
    );
    assert!((estimate.nats - binned).abs() < 4.0 * estimate.standard_error);
    assert!((estimate.nats - kl_exact).abs() < 4.0 * estimate.standard_error + (kl_exact - binned));
}
