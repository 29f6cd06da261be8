//! Simulated tables shared by the workspace's tests (compiled for the core's unit tests, and
//! with the `test-support` feature for the integration tests): one generator each, so tests
//! that need the same realistic table do not keep copies. Not part of the public interface.

use crate::fit::FitData;
use crate::orbit::OrbitalElements;
use crate::random::{normal, stream_rng, SimRng};
use rand::RngExt;

/// A table with two companions (P = 9.7 d, K = 25 m/s, e = 0.1; P = 61 d, K = 12 m/s,
/// e = 0.3), a trend of 0.05 m/s/d, and two instruments (offsets −20 and +35 m/s, σ = 1.5
/// and 2.5 m/s) over 300 d, 60 epochs; the noise is √(σ² + `jitter`²), seeded. With
/// `jitter` = 0 the noise is σ itself (the square root of σ² is exact for these σ).
pub fn two_companion_table(jitter: f64, seed: u64) -> String {
    let b = OrbitalElements::new(9.7, 25.0, 0.1, 0.8, 2_460_002.0).unwrap();
    let c = OrbitalElements::new(61.0, 12.0, 0.3, 2.5, 2_460_030.0).unwrap();
    let mut rng = stream_rng(seed, 0);
    let mut text = String::from("bjd,rv [m/s],err [m/s],instrument\n");
    for i in 0..60 {
        let t = 2_460_000.0 + 300.0 * (i as f64 + 0.7 * rng.random::<f64>()) / 60.0;
        let (name, offset, sigma) = if i % 3 == 0 {
            ("Wren", 35.0, 2.5)
        } else {
            ("Heron", -20.0, 1.5)
        };
        let total = libm::sqrt(sigma * sigma + jitter * jitter);
        let v = b.radial_velocity(t)
            + c.radial_velocity(t)
            + 0.05 * (t - 2_460_150.0)
            + offset
            + normal(&mut rng, 0.0, total);
        text.push_str(&format!("{t},{v},{sigma},{name}\n"));
    }
    text
}

/// One instrument observing `orbit` at `times` (sorted here) with Gaussian noise σ = `sigma`
/// drawn from `rng` after the times, in time order.
pub fn one_instrument_data(
    orbit: &OrbitalElements,
    mut times: Vec<f64>,
    sigma: f64,
    rng: &mut SimRng,
) -> FitData {
    times.sort_by(f64::total_cmp);
    let v: Vec<f64> = times
        .iter()
        .map(|&t| orbit.radial_velocity(t) + normal(rng, 0.0, sigma))
        .collect();
    let n = times.len();
    FitData::new(&times, &v, &vec![sigma; n], &vec![0; n], &["a".into()])
}
