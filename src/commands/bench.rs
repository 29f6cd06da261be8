//! `eccaudit bench`: time the hot loops natively (Kepler solve, radial-velocity model
//! evaluation, least-squares orbit fit) over the same deterministic workload the browser build
//! uses.

use std::hint::black_box;
use std::time::Instant;

use anyhow::bail;
use eccaudit_core::fit::{fit_orbit, FitData, FitOptions};
use eccaudit_core::kepler::{benchmark_inputs, solve_all};
use eccaudit_core::model::RvModel;
use eccaudit_core::orbit::OrbitalElements;
use eccaudit_core::random::{normal, stream_rng};

/// Time the Kepler solver and the radial-velocity model (build with --release for real figures).
#[derive(Debug, clap::Args)]
pub struct Args {
    /// Kepler solves (and model evaluations) per repeat.
    #[arg(long, default_value_t = 1_000_000)]
    n: usize,
    /// Repeats; the median is reported.
    #[arg(long, default_value_t = 7)]
    repeats: usize,
    /// Seed of the benchmark workload (Xoshiro256++).
    #[arg(long, default_value_t = 42)]
    seed: u64,
    /// Full least-squares fits per repeat (one Keplerian, 30 epochs, 8 starts).
    #[arg(long, default_value_t = 200)]
    fits: usize,
    /// Print one JSON object instead of text.
    #[arg(long)]
    json: bool,
    /// Also time the posterior log-density (one Keplerian, 30 epochs) and one fast-preset run.
    #[arg(long)]
    posterior: bool,
    /// Only measure the effective samples of e per second of a default posterior run (uniform
    /// e prior, no jitter) on this velocity table, and print them (see scripts/bench-emcee.sh).
    #[arg(long, value_name = "FILE")]
    ess: Option<std::path::PathBuf>,
    /// With --ess: walkers per ensemble instead of the default run's.
    #[arg(long, requires = "ess")]
    ess_walkers: Option<usize>,
    /// With --ess: steps before the first convergence check instead of the default run's.
    #[arg(long, requires = "ess")]
    ess_steps: Option<usize>,
    /// With --ess: burn-in steps instead of the default run's.
    #[arg(long, requires = "ess")]
    ess_burn: Option<usize>,
}

fn median(mut values: Vec<f64>) -> f64 {
    values.sort_by(f64::total_cmp);
    let mid = values.len() / 2;
    if values.len() % 2 == 1 {
        values[mid]
    } else {
        0.5 * (values[mid - 1] + values[mid])
    }
}

/// Nanoseconds per item of `work` (which handles `n_items` items), median over `repeats`.
fn time_per_item(repeats: usize, n_items: usize, mut work: impl FnMut()) -> f64 {
    let samples = (0..repeats)
        .map(|_| {
            let started = Instant::now();
            work();
            started.elapsed().as_secs_f64() * 1e9 / n_items as f64
        })
        .collect();
    median(samples)
}

pub fn run(args: Args) -> anyhow::Result<()> {
    if args.n == 0 || args.repeats == 0 || args.fits == 0 {
        bail!("--n, --repeats and --fits must be at least 1");
    }
    let debug_build = cfg!(debug_assertions);
    if debug_build {
        eprintln!("eccaudit: warning: debug build; timings are meaningless, use `cargo run --release -- bench`");
    }
    if let Some(path) = &args.ess {
        let table = super::input::read_table(
            path,
            &super::input::TableArgs {
                velocity_unit: None,
                time: None,
                delimiter: None,
            },
        )?;
        let data = FitData::from_table(&table);
        let shape = super::bench_posterior::RunShape {
            walkers: args.ess_walkers,
            steps: args.ess_steps,
            burn: args.ess_burn,
        };
        let rate = super::bench_posterior::ess_rate(&data, args.repeats.min(3), shape)?;
        if args.json {
            println!("{}", serde_json::to_string(&rate)?);
        } else {
            println!(
                "eccaudit: ESS(e) {:.0} in {:.3} s CPU ({:.3} s wall) = {:.0} per CPU second (tau_e {:.1} steps, {} draws, {} evaluations at {:.0} ns, {:.0} % of the run outside the log-density; median e {:.4}; converged {})",
                rate.ess_e, rate.cpu_seconds, rate.seconds, rate.ess_per_cpu_second, rate.tau_e_steps, rate.draws,
                rate.evaluations, rate.log_density_ns, 100.0 * rate.overhead_fraction,
                rate.median_e, rate.converged
            );
        }
        return Ok(());
    }

    // Kepler: M uniform in [0, 2π), e uniform in [0, 0.99].
    let inputs = benchmark_inputs(args.n, args.seed);
    let mut checksum = 0.0;
    let kepler_ns = time_per_item(args.repeats, args.n, || {
        checksum = solve_all(black_box(&inputs));
    });

    // Model: one Keplerian (P = 3.7 d, K = 50 m/s, e = 0.35) at Julian-date-sized times.
    let elements = OrbitalElements::new(3.7, 50.0, 0.35, 1.2, 2_459_000.3)?;
    let model = RvModel::new(vec![elements], vec![10.0], 0.01, 2_459_100.0)?;
    let times: Vec<f64> = inputs
        .iter()
        .enumerate()
        .map(|(i, &(m, _))| 2_459_000.0 + 0.01 * i as f64 + m)
        .collect();
    let mut velocities = vec![0.0; args.n];
    let mut model_result = Ok(());
    let model_ns = time_per_item(args.repeats, args.n, || {
        model_result = model.velocities_one_instrument(black_box(&times), 0, &mut velocities);
    });
    model_result?;
    let model_checksum: f64 = velocities.iter().sum();

    // Fit: one Keplerian (P = 12.4 d, K = 30 m/s, e = 0.3), 30 irregular epochs over 200 d,
    // σ = 2 m/s; 8 starts = 1 periodogram peak × (e ∈ {0.4, 0.75}) × 4 ω. "Full" includes the
    // period search (periods 1 d to the baseline), "given period" skips it.
    let data = fit_benchmark_data(args.seed)?;
    let full_options = FitOptions {
        n_peaks: 1,
        start_eccentricities: vec![0.4, 0.75],
        n_omega_starts: 4,
        ..FitOptions::default()
    };
    let given_options = FitOptions {
        initial_periods: vec![12.0],
        ..full_options.clone()
    };
    let mut fit_result = Ok(0.0);
    let full_fit_ns = time_per_item(args.repeats, args.fits, || {
        for _ in 0..args.fits {
            fit_result =
                fit_orbit(black_box(&data), &full_options).map(|r| r.eccentric.chi_squared);
        }
    });
    let fit_chi2 = fit_result?;
    let mut given_result = Ok(0);
    let given_fit_ns = time_per_item(args.repeats, args.fits, || {
        for _ in 0..args.fits {
            given_result = fit_orbit(black_box(&data), &given_options).map(|r| r.n_starts);
        }
    });
    let n_starts = given_result?;

    let posterior = if args.posterior {
        Some(super::bench_posterior::measure(
            &data,
            args.repeats,
            args.seed,
        )?)
    } else {
        None
    };

    if args.json {
        let report = serde_json::json!({
            "posterior": posterior,
            "fit_full_ms": full_fit_ns * 1e-6,
            "fit_given_period_ms": given_fit_ns * 1e-6,
            "fit_n_starts": n_starts,
            "fit_chi_squared": fit_chi2,
            "kepler_ns_per_solve": kepler_ns,
            "model_ns_per_evaluation": model_ns,
            "n": args.n,
            "repeats": args.repeats,
            "seed": args.seed,
            "kepler_checksum": checksum,
            "model_checksum": model_checksum,
            "debug_build": debug_build,
        });
        println!("{report}");
    } else {
        println!(
            "Kepler solve:      {kepler_ns:8.2} ns per solve (median of {} repeats x {} solves, M in [0, 2pi), e in [0, 0.99]; checksum {checksum})",
            args.repeats, args.n
        );
        println!(
            "RV model, 1 orbit: {model_ns:8.2} ns per evaluation (median of {} repeats x {} times; checksum {model_checksum})",
            args.repeats, args.n
        );
        println!(
            "LSQ fit, full:     {:8.3} ms per fit (period search + {n_starts} starts + polish + covariance; 1 Keplerian, 30 epochs; median of {} repeats x {} fits; chi2 {fit_chi2:.3})",
            full_fit_ns * 1e-6, args.repeats, args.fits
        );
        println!(
            "LSQ fit, given P:  {:8.3} ms per fit (same without the period search)",
            given_fit_ns * 1e-6
        );
        if let Some(p) = &posterior {
            super::bench_posterior::print(p);
        }
    }
    Ok(())
}

/// The simulated table of the fit benchmark (seeded, deterministic).
fn fit_benchmark_data(seed: u64) -> anyhow::Result<FitData> {
    let elements = OrbitalElements::new(12.4, 30.0, 0.3, 2.0, 2_459_003.0)?;
    let mut rng = stream_rng(seed, 7);
    let times: Vec<f64> = (0..30)
        .map(|i| 2_459_000.0 + 6.7 * i as f64 + 2.5 * (1.9 * (i * i) as f64).sin())
        .collect();
    let velocities: Vec<f64> = times
        .iter()
        .map(|&t| elements.radial_velocity(t) + 5.0 + normal(&mut rng, 0.0, 2.0))
        .collect();
    Ok(FitData::new(
        &times,
        &velocities,
        &[2.0; 30],
        &[0; 30],
        &["bench".to_string()],
    ))
}
