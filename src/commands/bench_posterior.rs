//! The posterior part of `eccaudit bench --posterior`: log-density evaluations and one run of
//! the fast sampler preset on the fit benchmark's table; and `eccaudit bench --ess FILE`, the
//! effective samples of e per second of a default posterior run (the figure compared with emcee
//! by scripts/bench-emcee.sh).

use std::hint::black_box;
use std::time::Instant;

use anyhow::Context;
use eccaudit_core::fit::{fit_orbit, FitData, FitOptions};
use eccaudit_core::posterior::{
    fast_run_length, fast_sampler_settings, posterior_eccentricity, prior_sensitivity,
    start_from_fit, PosteriorSettings, RvPosterior, SensitivityRequest,
};
use eccaudit_core::sampler::{integrated_autocorrelation_time, LogDensity, Steer};

/// Timings of the posterior.
#[derive(Debug, Clone, serde::Serialize)]
pub struct PosteriorTimings {
    /// ns per log-density evaluation without jitter (orbit + offset).
    pub log_density_ns: f64,
    /// ns per log-density evaluation with one sampled jitter.
    pub log_density_jitter_ns: f64,
    /// ms per run of the fast preset (4 ensembles × 16 walkers, run until e converged, jitter
    /// sampled), summary included.
    pub fast_run_ms: f64,
    /// Log-density evaluations of that run.
    pub fast_run_evaluations: u64,
    /// Posterior median of e of that run (checksum).
    pub fast_run_median_e: f64,
}

/// CPU time of the calling thread in seconds: Linux's `/proc/thread-self/schedstat` (first
/// field, ns on the CPU), so that timings on a shared, loaded machine count only this thread's
/// own work; `None` where the file does not exist.
fn thread_cpu_seconds() -> Option<f64> {
    let text = std::fs::read_to_string("/proc/thread-self/schedstat").ok()?;
    let ns: f64 = text.split_whitespace().next()?.parse().ok()?;
    Some(ns * 1e-9)
}

/// A stopwatch of both wall time and the thread's CPU time (wall time where CPU time is not
/// available).
struct Stopwatch {
    wall: Instant,
    cpu: Option<f64>,
}

impl Stopwatch {
    fn start() -> Self {
        Stopwatch {
            cpu: thread_cpu_seconds(),
            wall: Instant::now(),
        }
    }

    /// (wall seconds, CPU seconds) since the start.
    fn read(&self) -> (f64, f64) {
        let wall = self.wall.elapsed().as_secs_f64();
        let cpu = match (self.cpu, thread_cpu_seconds()) {
            (Some(a), Some(b)) => b - a,
            _ => wall,
        };
        (wall, cpu)
    }
}

fn median(mut v: Vec<f64>) -> f64 {
    v.sort_by(f64::total_cmp);
    v[v.len() / 2]
}

/// Measures on `data` (the fit benchmark's 30 epochs).
pub fn measure(data: &FitData, repeats: usize, seed: u64) -> anyhow::Result<PosteriorTimings> {
    let fit = fit_orbit(
        data,
        &FitOptions {
            initial_periods: vec![12.0],
            jitter: true,
            ..FitOptions::default()
        },
    )?;
    let settings = PosteriorSettings::default();
    let prior = settings.effective_eccentricity().validate()?;
    let start = start_from_fit(
        &fit,
        &settings,
        &prior,
        data.uncertainties(),
        data.n_instruments(),
    )?;
    let centres = start.lambda_centres(&settings, data.n_instruments());
    let no_jitter_settings = PosteriorSettings {
        jitter: false,
        ..settings
    };
    let without = RvPosterior::marginalised(data, &no_jitter_settings, &centres)?;
    let with_jitter = RvPosterior::marginalised(data, &settings, &centres)?;
    let n_eval = 200_000;
    let time = |target: &RvPosterior, x: &[f64]| {
        median(
            (0..repeats)
                .map(|_| {
                    let started = Instant::now();
                    let mut sum = 0.0;
                    for i in 0..n_eval {
                        let mut y = [0.0; 8];
                        y[..x.len()].copy_from_slice(x);
                        y[2] += 1e-9 * (i % 7) as f64;
                        sum += target.log_density(black_box(&y[..x.len()]));
                    }
                    black_box(sum);
                    started.elapsed().as_secs_f64() * 1e9 / n_eval as f64
                })
                .collect(),
        )
    };
    let log_density_jitter_ns = time(&with_jitter, &with_jitter.sampled_point(&start.point));
    let n_orbit = start.point.len() - 1;
    let log_density_ns = time(&without, &without.sampled_point(&start.point[..n_orbit]));
    let mut summary = None;
    let fast_run_ms = median(
        (0..repeats.min(3))
            .map(|_| {
                let started = Instant::now();
                summary = Some(posterior_eccentricity(
                    data,
                    &settings,
                    &fast_sampler_settings(seed),
                    &fast_run_length(),
                    &start,
                    0,
                ));
                started.elapsed().as_secs_f64() * 1e3
            })
            .collect(),
    );
    let summary = summary
        .context("no fast run")?
        .context("fast posterior run")?;
    Ok(PosteriorTimings {
        log_density_ns,
        log_density_jitter_ns,
        fast_run_ms,
        fast_run_evaluations: summary.cost.log_density_evaluations,
        fast_run_median_e: summary.median,
    })
}

/// Effective samples of e per second of one default posterior run.
#[derive(Debug, Clone, serde::Serialize)]
pub struct EssRate {
    /// Wall time of the whole run: least-squares start, sampling, diagnostics, summary [s].
    pub seconds: f64,
    /// CPU time of the whole run (this thread; Linux `/proc/thread-self/schedstat`, else the
    /// wall time) [s]: the figure the rates per core use, robust to other processes' load.
    pub cpu_seconds: f64,
    /// Log-density evaluations of the run.
    pub evaluations: u64,
    /// CPU time per log-density evaluation, measured separately at the start point [ns].
    pub log_density_ns: f64,
    /// Share of the run's CPU time not spent in the log-density (start, diagnostics, summary,
    /// sampler): 1 − evaluations · log_density_ns / cpu_seconds.
    pub overhead_fraction: f64,
    /// Integrated autocorrelation time of e in steps (Sokal window, walker-averaged).
    pub tau_e_steps: f64,
    /// Stored draws.
    pub draws: usize,
    /// Effective samples of e: draws / τ_e (stored steps).
    pub ess_e: f64,
    /// ess_e / seconds (wall).
    pub ess_per_second: f64,
    /// ess_e / cpu_seconds: effective samples of e per second per core.
    pub ess_per_cpu_second: f64,
    /// Posterior median of e (to compare with the reference sampler).
    pub median_e: f64,
    /// The run's convergence verdict.
    pub converged: bool,
}

/// Departures from the default run's shape (None = the default).
#[derive(Debug, Clone, Copy, Default)]
pub struct RunShape {
    /// Walkers per ensemble.
    pub walkers: Option<usize>,
    /// Steps before the first convergence check.
    pub steps: Option<usize>,
    /// Burn-in steps.
    pub burn: Option<usize>,
}

/// One default `priors` run (uniform e on [0, 0.99], no jitter, defaults otherwise) on `data`:
/// ESS of e = stored draws / τ_e, with τ_e by the same estimator emcee's `integrated_time` uses
/// (walker-averaged autocorrelation, Sokal window c = 5; Foreman-Mackey et al. 2013), divided
/// by the time of the whole run (wall and this thread's CPU time). Median of `repeats` runs
/// (seeds 1, 2, …) by the rate per CPU second.
pub fn ess_rate(data: &FitData, repeats: usize, shape: RunShape) -> anyhow::Result<EssRate> {
    let mut results = Vec::new();
    let defaults = SensitivityRequest::default();
    for r in 0..repeats.max(1) {
        let settings = SensitivityRequest {
            walkers: shape.walkers.unwrap_or(defaults.walkers),
            steps: shape.steps.unwrap_or(defaults.steps),
            burn: shape.burn.unwrap_or(defaults.burn),
            priors: vec!["uniform".into()],
            model: eccaudit_core::spec::ModelSpec {
                jitter: eccaudit_core::spec::JitterMode::Off,
                ..eccaudit_core::spec::ModelSpec::DEFAULT
            },
            seed: 1 + r as u64,
            ..SensitivityRequest::default()
        }
        .to_settings()?;
        let watch = Stopwatch::start();
        let report = prior_sensitivity(data, &settings, &mut |_| Steer::Continue)?;
        let (seconds, cpu_seconds) = watch.read();
        let run = &report.runs[0];
        let chains = &run.chains;
        let h = 2;
        let traces: Vec<Vec<f64>> = (0..chains.n_walkers)
            .map(|w| {
                (0..chains.n_stored_steps)
                    .map(|s| {
                        let x = chains.sample(s, w);
                        x[h] * x[h] + x[h + 1] * x[h + 1]
                    })
                    .collect()
            })
            .collect();
        let tau = integrated_autocorrelation_time(&traces).tau;
        let draws = chains.n_walkers * chains.n_stored_steps;
        let ess_e = draws as f64 / tau;
        // The same log-density, timed alone at the run's median point.
        let fit = eccaudit_core::posterior::sensitivity_start(data, &settings)?;
        let posterior = settings.posterior.with_eccentricity(settings.priors[0]);
        let prior = posterior.effective_eccentricity().validate()?;
        let start = start_from_fit(
            &fit.fit,
            &posterior,
            &prior,
            data.uncertainties(),
            data.n_instruments(),
        )?;
        let centres = start.lambda_centres(&posterior, data.n_instruments());
        let target = RvPosterior::marginalised(data, &posterior, &centres)?;
        let x = target.sampled_point(&start.point);
        let n_eval = 100_000;
        let watch = Stopwatch::start();
        let mut sum = 0.0;
        let mut y = x.clone();
        for i in 0..n_eval {
            y[2] = x[2] + 1e-9 * (i % 7) as f64;
            sum += target.log_density(black_box(&y));
        }
        black_box(sum);
        let log_density_ns = watch.read().1 * 1e9 / n_eval as f64;
        let evaluations = run.summary.cost.log_density_evaluations;
        results.push(EssRate {
            seconds,
            cpu_seconds,
            evaluations,
            log_density_ns,
            overhead_fraction: 1.0 - evaluations as f64 * log_density_ns * 1e-9 / cpu_seconds,
            tau_e_steps: tau * chains.thin as f64,
            draws,
            ess_e,
            ess_per_second: ess_e / seconds,
            ess_per_cpu_second: ess_e / cpu_seconds,
            median_e: run.summary.median,
            converged: run.summary.converged,
        });
    }
    results.sort_by(|a, b| a.ess_per_cpu_second.total_cmp(&b.ess_per_cpu_second));
    Ok(results.swap_remove(results.len() / 2))
}

/// The text lines.
pub fn print(p: &PosteriorTimings) {
    println!(
        "Posterior log-density: {:8.1} ns per evaluation (1 Keplerian, 30 epochs, no jitter); {:.1} ns with a sampled jitter",
        p.log_density_ns, p.log_density_jitter_ns
    );
    println!(
        "Posterior fast run: {:8.2} ms (4 ensembles x 16 walkers, run until e converged, {} evaluations, summary included; median e {:.4})",
        p.fast_run_ms, p.fast_run_evaluations, p.fast_run_median_e
    );
}
