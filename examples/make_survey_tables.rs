//! Writes a synthetic survey: N velocity tables of one-companion orbits plus their manifest
//! (`cargo run --release --example make_survey_tables -- DIR N [EPOCHS] [SEED]`).
//!
//! Star i draws everything from the random stream (SEED, i): a period of 3–80 d
//! (log-uniform), K of 8–60 m/s, e uniform on 0–0.6 (every fourth star circular), ω and the
//! periastron time uniform, EPOCHS (default 40) random nights over 400 d, error bars of 2–5 m/s
//! and 1.5 m/s of jitter, one instrument. Every third star gets a linear trend of 0.02 m/s/d
//! (and `trend = yes` in the manifest). Running it again writes the same bytes. The tests of
//! `eccaudit survey` include this file as a module (`write_survey`).

use std::fmt::Write as _;
use std::path::Path;

use eccaudit_core::model::RvModel;
use eccaudit_core::orbit::OrbitalElements;
use eccaudit_core::random::{normal, stream_rng};
use rand::RngExt;

/// One simulated table as text (comment lines state the truth).
pub fn survey_table(index: u64, n_epochs: usize, seed: u64) -> String {
    let mut rng = stream_rng(seed, index);
    let period = libm::exp(rng.random_range(libm::log(3.0)..libm::log(80.0)));
    let k = rng.random_range(8.0..60.0);
    let e = if index % 4 == 3 {
        0.0
    } else {
        rng.random_range(0.0..0.6)
    };
    let omega = rng.random_range(0.0..std::f64::consts::TAU);
    let t0 = 2_460_000.0;
    let tp = t0 + rng.random_range(0.0..period);
    let trend = if index % 3 == 2 { 0.02 } else { 0.0 };
    let companion =
        OrbitalElements::new(period, k, e, omega, tp).expect("the drawn elements are valid");
    let model = RvModel::new(vec![companion], vec![-12.5], trend, t0).expect("a valid model");
    let mut times: Vec<f64> = (0..n_epochs)
        .map(|_| t0 + rng.random_range(0.0..400.0f64).floor() + rng.random_range(0.55..0.85))
        .collect();
    times.sort_by(f64::total_cmp);
    let mut text = format!(
        "# synthetic star {index} (seed {seed}): P = {period:.4} d, K = {k:.2} m/s, e = {e:.3}, \
         omega = {:.1} deg, trend = {trend} m/s/d, jitter 1.5 m/s\nbjd,rv [m/s],sigma [m/s]\n",
        omega.to_degrees()
    );
    for t in times {
        let sigma = rng.random_range(2.0..5.0);
        let truth = model.velocity(t, 0).expect("instrument 0 exists");
        let v = normal(&mut rng, truth, libm::sqrt(sigma * sigma + 1.5 * 1.5));
        writeln!(text, "{t:.5},{v:.2},{sigma:.2}").expect("writing to a String");
    }
    text
}

/// A table of two companions (P = 5.3 d, K = 40 m/s, e = 0.2; P = 43 d, K = 25 m/s, e = 0.1),
/// `n_epochs` random nights over 300 d, error bars of 2–4 m/s, from the stream (seed, 1000).
pub fn two_companion_table(n_epochs: usize, seed: u64) -> String {
    let mut rng = stream_rng(seed, 1000);
    let t0 = 2_460_000.0;
    let inner = OrbitalElements::new(5.3, 40.0, 0.2, 1.1, t0 + 1.2).expect("valid elements");
    let outer = OrbitalElements::new(43.0, 25.0, 0.1, 4.0, t0 + 17.0).expect("valid elements");
    let model = RvModel::new(vec![inner, outer], vec![3.0], 0.0, t0).expect("a valid model");
    let mut times: Vec<f64> = (0..n_epochs)
        .map(|_| t0 + rng.random_range(0.0..300.0f64).floor() + rng.random_range(0.55..0.85))
        .collect();
    times.sort_by(f64::total_cmp);
    let mut text = format!(
        "# synthetic two-companion star (seed {seed}): P = 5.3 and 43 d, K = 40 and 25 m/s, e = 0.2 and 0.1\nbjd,rv [m/s],sigma [m/s]\n"
    );
    for t in times {
        let sigma = rng.random_range(2.0..4.0);
        let truth = model.velocity(t, 0).expect("instrument 0 exists");
        let v = normal(&mut rng, truth, sigma);
        writeln!(text, "{t:.5},{v:.2},{sigma:.2}").expect("writing to a String");
    }
    text
}

/// Writes `n` tables `star-NNN.csv` and `manifest.csv` into `dir`.
pub fn write_survey(dir: &Path, n: usize, n_epochs: usize, seed: u64) -> std::io::Result<()> {
    std::fs::create_dir_all(dir.join("tables"))?;
    let mut manifest = String::from("table,trend\n");
    for i in 0..n {
        let name = format!("tables/star-{:03}.csv", i + 1);
        std::fs::write(dir.join(&name), survey_table(i as u64, n_epochs, seed))?;
        let trend = if i % 3 == 2 { "yes" } else { "" };
        writeln!(manifest, "{name},{trend}").expect("writing to a String");
    }
    std::fs::write(dir.join("manifest.csv"), manifest)
}

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let args: Vec<String> = std::env::args().skip(1).collect();
    let usage = "usage: make_survey_tables DIR N [EPOCHS] [SEED]";
    let dir = args.first().ok_or(usage)?;
    let n: usize = args.get(1).ok_or(usage)?.parse()?;
    let epochs: usize = args.get(2).map_or(Ok(40), |s| s.parse())?;
    let seed: u64 = args.get(3).map_or(Ok(1), |s| s.parse())?;
    write_survey(Path::new(dir), n, epochs, seed)?;
    println!("{n} tables and manifest.csv in {dir}");
    Ok(())
}
