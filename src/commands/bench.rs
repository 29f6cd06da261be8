//! `eccaudit bench`: time the hot loops natively (Kepler solve, radial-velocity model
//! evaluation) over the same deterministic workload the browser build uses.

use std::hint::black_box;
use std::time::Instant;

use anyhow::bail;
use eccaudit_core::kepler::{benchmark_inputs, solve_all};
use eccaudit_core::model::RvModel;
use eccaudit_core::orbit::OrbitalElements;

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
    /// Print one JSON object instead of text.
    #[arg(long)]
    json: bool,
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
    if args.n == 0 || args.repeats == 0 {
        bail!("--n and --repeats must be at least 1");
    }
    let debug_build = cfg!(debug_assertions);
    if debug_build {
        eprintln!("eccaudit: warning: debug build; timings are meaningless, use `cargo run --release -- bench`");
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

    if args.json {
        let report = serde_json::json!({
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
    }
    Ok(())
}
