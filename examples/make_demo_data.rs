//! Writes the invented demo tables in demo-data/ (`cargo run --example make_demo_data`).
//!
//! Everything here is synthetic: the stars, their companions and the
//! instruments are made up for eccaudit's demo. The velocities are the
//! eccaudit-core model plus Gaussian noise, with fixed seeds, so running this
//! again writes the same bytes.

use std::fmt::Write as _;

use eccaudit_core::model::RvModel;
use eccaudit_core::orbit::OrbitalElements;
use eccaudit_core::random::{normal, stream_rng, SimRng};
use rand::RngExt;

/// One invented instrument: its offset, its typical error bar and extra scatter.
struct Instrument {
    name: &'static str,
    gamma: f64,
    sigma_range: (f64, f64),
    jitter: f64,
}

/// Observing nights: `per_season` random nights in each of `seasons` windows
/// of `season_length` days, one year apart, evening times with random hours.
fn schedule(
    rng: &mut SimRng,
    first_night: f64,
    seasons: usize,
    season_length: f64,
    per_season: usize,
) -> Vec<f64> {
    let mut times = Vec::new();
    for season in 0..seasons {
        let start = first_night + 365.25 * season as f64;
        for _ in 0..per_season {
            let night = (rng.random_range(0.0..season_length)).floor();
            times.push(start + night + rng.random_range(0.55..0.85));
        }
    }
    times.sort_by(f64::total_cmp);
    times
}

/// Simulated rows (time, velocity, sigma, instrument index).
fn observe(
    rng: &mut SimRng,
    model: &RvModel,
    times: &[f64],
    instruments: &[Instrument],
    pick: impl Fn(usize, &mut SimRng) -> usize,
) -> Vec<(f64, f64, f64, usize)> {
    times
        .iter()
        .enumerate()
        .map(|(row, &t)| {
            let idx = pick(row, rng);
            let inst = &instruments[idx];
            let sigma = rng.random_range(inst.sigma_range.0..inst.sigma_range.1);
            let truth = model.velocity(t, idx).expect("instrument index is valid");
            let scatter = (sigma * sigma + inst.jitter * inst.jitter).sqrt();
            (t, normal(rng, truth, scatter), sigma, idx)
        })
        .collect()
}

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let out_dir = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-data");

    // --- Velka 17: a low-amplitude, nearly circular companion, two instruments.
    let instruments = [
        Instrument {
            name: "Osprey",
            gamma: -1432.6,
            sigma_range: (4.5, 7.5),
            jitter: 2.0,
        },
        Instrument {
            name: "Larkspur",
            gamma: -1418.1,
            sigma_range: (2.5, 4.0),
            jitter: 1.5,
        },
    ];
    let companion = OrbitalElements::new(4.8372, 21.0, 0.03, 70f64.to_radians(), 2_459_811.27)?;
    let model = RvModel::new(
        vec![companion],
        instruments.iter().map(|i| i.gamma).collect(),
        0.0,
        2_459_800.0,
    )?;
    let mut rng = stream_rng(17, 0);
    let times = schedule(&mut rng, 2_459_790.0, 2, 110.0, 13);
    let rows = observe(&mut rng, &model, &times, &instruments, |row, _| {
        usize::from(row % 3 == 2)
    });
    let mut text = String::from(
        "# Velka 17 — INVENTED star and instruments; synthetic velocities for the eccaudit demo.\n\
         # Truth: P = 4.8372 d, K = 21.0 m/s, e = 0.03, omega = 70 deg, Tp = BJD 2459811.27;\n\
         # gamma(Osprey) = -1432.6 m/s, gamma(Larkspur) = -1418.1 m/s; jitter 2.0 and 1.5 m/s.\n\
         # Written by `cargo run --example make_demo_data` (seed 17).\n\
         bjd,rv [m/s],sigma [m/s],instrument\n",
    );
    for (t, v, s, idx) in &rows {
        writeln!(text, "{t:.5},{v:.2},{s:.2},{}", instruments[*idx].name)?;
    }
    std::fs::write(out_dir.join("velka17-nearly-circular.csv"), text)?;

    // --- Corvin 4: a clearly eccentric, longer-period companion; km/s, tab-separated.
    let instruments = [Instrument {
        name: "Larkspur",
        gamma: 8214.0,
        sigma_range: (3.0, 5.0),
        jitter: 2.5,
    }];
    let companion = OrbitalElements::new(112.6, 47.3, 0.47, 214f64.to_radians(), 2_459_903.4)?;
    let model = RvModel::new(
        vec![companion],
        vec![instruments[0].gamma],
        0.0,
        2_459_800.0,
    )?;
    let mut rng = stream_rng(4, 0);
    let times = schedule(&mut rng, 2_459_780.0, 3, 150.0, 12);
    let rows = observe(&mut rng, &model, &times, &instruments, |_, _| 0);
    let mut text = String::from(
        "# Corvin 4 — INVENTED star and instrument; synthetic velocities for the eccaudit demo.\n\
         # Truth: P = 112.6 d, K = 47.3 m/s, e = 0.47, omega = 214 deg, Tp = BJD 2459903.4;\n\
         # gamma = 8.2140 km/s; jitter 2.5 m/s. Velocities in km/s, times BJD - 2450000.\n\
         # Written by `cargo run --example make_demo_data` (seed 4).\n\
         bjd-2450000\trv [km/s]\terr [km/s]\n",
    );
    for (t, v, s, _) in &rows {
        writeln!(
            text,
            "{:.5}\t{:.5}\t{:.5}",
            t - 2_450_000.0,
            v / 1000.0,
            s / 1000.0
        )?;
    }
    std::fs::write(out_dir.join("corvin4-eccentric.tsv"), text)?;
    Ok(())
}
