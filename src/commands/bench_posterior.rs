//! The posterior part of `eccaudit bench --posterior`: log-density evaluations and one run of
//! the fast sampler preset on the fit benchmark's table.

use std::hint::black_box;
use std::time::Instant;

use anyhow::Context;
use eccaudit_core::fit::{fit_orbit, FitData, FitOptions};
use eccaudit_core::posterior::{
    fast_sampler_settings, posterior_eccentricity, start_from_fit, PosteriorSettings, RvPosterior,
};
use eccaudit_core::sampler::LogDensity;

/// Timings of the posterior.
#[derive(Debug, Clone, serde::Serialize)]
pub struct PosteriorTimings {
    /// ns per log-density evaluation without jitter (orbit + offset).
    pub log_density_ns: f64,
    /// ns per log-density evaluation with one sampled jitter.
    pub log_density_jitter_ns: f64,
    /// ms per run of the fast preset (24 walkers × 900 steps, jitter sampled), summary included.
    pub fast_run_ms: f64,
    /// Log-density evaluations of that run.
    pub fast_run_evaluations: u64,
    /// Posterior median of e of that run (checksum).
    pub fast_run_median_e: f64,
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
    let with_jitter = RvPosterior::new(data, &settings, &centres)?;
    let no_jitter_settings = PosteriorSettings {
        jitter: false,
        ..settings
    };
    let without = RvPosterior::new(data, &no_jitter_settings, &centres)?;
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
    let log_density_jitter_ns = time(&with_jitter, &start.point);
    let n_orbit = start.point.len() - 1;
    let log_density_ns = time(&without, &start.point[..n_orbit]);
    let mut summary = None;
    let fast_run_ms = median(
        (0..repeats.min(3))
            .map(|_| {
                let started = Instant::now();
                summary = Some(posterior_eccentricity(
                    data,
                    &settings,
                    &fast_sampler_settings(seed),
                    &start,
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

/// The text lines.
pub fn print(p: &PosteriorTimings) {
    println!(
        "Posterior log-density: {:8.1} ns per evaluation (1 Keplerian, 30 epochs, no jitter); {:.1} ns with a sampled jitter",
        p.log_density_ns, p.log_density_jitter_ns
    );
    println!(
        "Posterior fast run: {:8.2} ms (24 walkers x 900 steps, {} evaluations, summary included; median e {:.4})",
        p.fast_run_ms, p.fast_run_evaluations, p.fast_run_median_e
    );
}
