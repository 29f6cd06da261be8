//! Posterior runs across separated modes: the sampler's mode jumps keep a known two-mode
//! mixture's weights, and on the demo table velka17 (a side lobe at P = 4.77 d beside the best
//! period 4.84 d) runs under two eccentricity priors agree after importance reweighting.
//!
//! Fixed seeds; tolerances are 4 Monte-Carlo standard errors from the runs' own effective
//! sample sizes (stated at each check).

use crate::support::run_to_verdict;
use eccaudit_core::fit::FitData;
use eccaudit_core::posterior::{prior_sensitivity, PosteriorRun, SensitivityRequest};
use eccaudit_core::priors::EccentricityPrior;
use eccaudit_core::random::{standard_normal, stream_rng};
use eccaudit_core::sampler::{
    effective_sample_size, LogDensity, RunLength, SamplerSettings, Steer, StopReason,
};
use eccaudit_core::table::{parse_table, ReadOptions};

/// Two Gaussian modes of different shapes in 3-D: weight 0.8 at the origin with unit σ, 0.2 at
/// (30, 10, −5) with σ = (0.5, 2, 1); the modes are ≥ 20 σ apart, so no stretch, DE or
/// Gaussian move crosses between them in practice. The translation between the centres is
/// given as the one mode jump.
struct TwoModes {
    jumps: Vec<f64>,
}

const WEIGHT_2: f64 = 0.2;
const CENTRE_2: [f64; 3] = [30.0, 10.0, -5.0];
const SIGMA_2: [f64; 3] = [0.5, 2.0, 1.0];

impl LogDensity for TwoModes {
    fn dim(&self) -> usize {
        3
    }
    fn log_density(&self, x: &[f64]) -> f64 {
        let ln_norm = |sigmas: &[f64; 3]| -> f64 {
            sigmas.iter().map(|s| libm::log(*s)).sum::<f64>()
                + 1.5 * libm::log(2.0 * std::f64::consts::PI)
        };
        let a = libm::log(1.0 - WEIGHT_2)
            - ln_norm(&[1.0; 3])
            - 0.5 * x.iter().map(|v| v * v).sum::<f64>();
        let b = libm::log(WEIGHT_2)
            - ln_norm(&SIGMA_2)
            - 0.5
                * (0..3)
                    .map(|i| ((x[i] - CENTRE_2[i]) / SIGMA_2[i]).powi(2))
                    .sum::<f64>();
        let (hi, lo) = if a > b { (a, b) } else { (b, a) };
        hi + libm::log1p(libm::exp(lo - hi))
    }
    fn mode_jumps(&self) -> &[f64] {
        &self.jumps
    }
}

#[test]
fn mode_jumps_keep_the_weights_of_two_separated_modes() {
    let target = TwoModes {
        jumps: CENTRE_2.to_vec(),
    };
    let settings = SamplerSettings {
        n_walkers: 32,
        n_steps: 300,
        n_burn: 100,
        seed: 5,
        ..SamplerSettings::default()
    };
    // Ensembles 0 and 2 start 3:1 in mode 1, ensembles 1 and 3 3:1 in mode 2 (the shares of
    // posterior::ensemble_starts): they agree only once walkers cross.
    let starts: Vec<Vec<f64>> = (0..4)
        .map(|m| {
            let mut rng = stream_rng(5, 200 + m as u64);
            (0..32 * 3)
                .map(|i| {
                    let walker = i / 3;
                    let own = m % 2;
                    let mode = if walker % 2 == 0 {
                        own
                    } else {
                        (own + walker / 2) % 2
                    };
                    let centre = if mode == 0 { 0.0 } else { CENTRE_2[i % 3] };
                    centre + 0.5 * standard_normal(&mut rng)
                })
                .collect()
        })
        .collect();
    let length = RunLength {
        max_evaluations: 4_000_000,
        ..RunLength::default()
    };
    let run = run_to_verdict(&target, &starts, &settings, &length);
    assert!(run.diagnostics.converged, "{}", run.diagnostics.verdict());
    assert_eq!(run.stop, StopReason::Converged);
    let chains = run.merged();
    let indicator: Vec<Vec<f64>> = (0..chains.n_walkers)
        .map(|w| {
            (0..chains.n_stored_steps)
                .map(|s| f64::from(u8::from(chains.sample(s, w)[0] > 15.0)))
                .collect()
        })
        .collect();
    let n = (chains.n_walkers * chains.n_stored_steps) as f64;
    let share = indicator.iter().flatten().sum::<f64>() / n;
    let ess = effective_sample_size(&indicator);
    // Binomial standard error with the indicator's own ESS (walker-averaged τ); 4 of them.
    let se = libm::sqrt(WEIGHT_2 * (1.0 - WEIGHT_2) / ess);
    println!("share of mode 2 {share:.4} (truth {WEIGHT_2}), ESS {ess:.0}, SE {se:.4}");
    assert!(
        (share - WEIGHT_2).abs() < 4.0 * se,
        "{share} vs {WEIGHT_2} ± {se}"
    );
}

fn velka17() -> FitData {
    let text = include_str!("../../demo-data/velka17-nearly-circular.csv");
    let options = ReadOptions {
        source_name: "velka17-nearly-circular.csv".into(),
        velocity_unit: None,
        time: None,
        delimiter: None,
    };
    FitData::from_table(&parse_table(text, &options).expect("demo table reads"))
}

/// e of every stored draw (companion 1: √e cos ω and √e sin ω are parameters 2 and 3), P, and
/// the walker traces of e.
fn draws(run: &PosteriorRun) -> (Vec<f64>, Vec<f64>, Vec<Vec<f64>>) {
    let c = &run.chains;
    let e_of = |x: &[f64]| x[2] * x[2] + x[3] * x[3];
    let mut e = Vec::new();
    let mut p = Vec::new();
    for s in 0..c.n_stored_steps {
        for w in 0..c.n_walkers {
            e.push(e_of(c.sample(s, w)));
            p.push(c.sample(s, w)[0]);
        }
    }
    let traces = (0..c.n_walkers)
        .map(|w| {
            (0..c.n_stored_steps)
                .map(|s| e_of(c.sample(s, w)))
                .collect()
        })
        .collect();
    (e, p, traces)
}

/// The weighted quantile q of `values` (weights `w`): the smallest value whose cumulative
/// weight reaches q of the total.
fn weighted_quantile(values: &[f64], w: &[f64], q: f64) -> f64 {
    let mut order: Vec<usize> = (0..values.len()).collect();
    order.sort_by(|&a, &b| values[a].total_cmp(&values[b]));
    let total: f64 = w.iter().sum();
    let mut sum = 0.0;
    for &i in &order {
        sum += w[i];
        if sum >= q * total {
            return values[i];
        }
    }
    values[order[order.len() - 1]]
}

#[test]
fn velka17_runs_under_two_priors_agree_after_reweighting() {
    // Runs 5 and 6 of the default set. Both priors vanish ∝ e at e = 0, both put the 4.77 d
    // side lobe within 1.5 nats of the best peak, so both runs start in both lobes and cross
    // by mode jumps. The Rayleigh run's draws reweighted by p_ecosw(e)/p_Rayleigh(e) must give
    // the quantiles of e of the (e cos ω, e sin ω) run: the likelihood is the same.
    let data = velka17();
    let settings = SensitivityRequest {
        priors: vec!["rayleigh(0.3)".into(), "ecosw".into()],
        ..SensitivityRequest::default()
    }
    .to_settings()
    .unwrap();
    let report = prior_sensitivity(&data, &settings, &mut |_| Steer::Continue).unwrap();
    let (rayleigh, ecosw) = (&report.runs[0], &report.runs[1]);
    for run in [rayleigh, ecosw] {
        assert!(run.summary.converged, "{}", run.summary.verdict);
    }
    let prior_of = |run: &PosteriorRun| -> EccentricityPrior {
        run.summary.prior.validate().expect("valid prior")
    };
    let (pa, pb) = (prior_of(rayleigh), prior_of(ecosw));
    let (e_a, p_a, traces_a) = draws(rayleigh);
    let (e_b, p_b, traces_b) = draws(ecosw);
    let lobe = |p: &[f64]| p.iter().filter(|&&v| v < 4.80).count() as f64 / p.len() as f64;
    println!(
        "share of draws in the 4.77 d lobe: Rayleigh {:.4}, ecosw {:.4}",
        lobe(&p_a),
        lobe(&p_b)
    );
    let w: Vec<f64> = e_a
        .iter()
        .map(|&e| libm::exp(pb.log_density(e) - pa.log_density(e)))
        .collect();
    // Kish's effective fraction of the weights times the run's own ESS of e.
    let kish =
        w.iter().sum::<f64>().powi(2) / (w.len() as f64 * w.iter().map(|v| v * v).sum::<f64>());
    let ess_a = effective_sample_size(&traces_a) * kish;
    let ess_b = effective_sample_size(&traces_b);
    let ones = vec![1.0; e_b.len()];
    for q in [0.16, 0.5, 0.84] {
        let reweighted = weighted_quantile(&e_a, &w, q);
        let direct = weighted_quantile(&e_b, &ones, q);
        // Standard error of a sample quantile: √(q(1−q)/ESS) / f(x_q), 1/f(x_q) from the
        // spread of the neighbouring quantiles (±0.05) of the direct run.
        let inverse_density = (weighted_quantile(&e_b, &ones, q + 0.05)
            - weighted_quantile(&e_b, &ones, q - 0.05))
            / 0.1;
        let se =
            libm::sqrt(q * (1.0 - q)) * inverse_density * libm::sqrt(1.0 / ess_a + 1.0 / ess_b);
        println!(
            "q = {q}: reweighted Rayleigh {reweighted:.4}, ecosw {direct:.4}, SE {se:.4} (ESS {ess_a:.0}, {ess_b:.0})"
        );
        // 4 combined standard errors.
        assert!(
            (reweighted - direct).abs() < 4.0 * se,
            "q = {q}: {reweighted} vs {direct} ± {se}"
        );
    }
}
