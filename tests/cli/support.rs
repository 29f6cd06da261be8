//! What the command-line tests share, one home each: the `eccaudit` command under test, the demo
//! folder, temporary table files, and the simulated tables more than one test file uses.

use assert_cmd::Command;
use eccaudit_core::orbit::OrbitalElements;
use eccaudit_core::random::{normal, stream_rng};
use rand::RngExt;
use std::io::Write;

/// The demo tables' folder.
pub const DEMO: &str = concat!(env!("CARGO_MANIFEST_DIR"), "/demo-data");

/// The `eccaudit` binary built for these tests.
pub fn eccaudit() -> Command {
    Command::cargo_bin("eccaudit").expect("the eccaudit binary is built for tests")
}

/// `text` in a temporary `.csv` file (removed when dropped).
pub fn temp_table(text: &str) -> tempfile::NamedTempFile {
    let mut file = tempfile::Builder::new().suffix(".csv").tempfile().unwrap();
    file.write_all(text.as_bytes()).unwrap();
    file
}

/// Two companions (P = 9.7 d, K = 25 m/s, e = 0.1; P = 61 d, K = 12 m/s, e = 0.3), a trend of
/// 0.05 m/s/d and two instruments (offsets +35 and −20 m/s, σ = 2.5 and 1.5 m/s), 60 epochs
/// over 300 d, Gaussian noise σ, seeded; the same table as the core's unit-test generator
/// (`test_support::two_companion_table` with no jitter), in a temporary file.
pub fn two_companion_table(seed: u64) -> tempfile::NamedTempFile {
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
        let v = b.radial_velocity(t)
            + c.radial_velocity(t)
            + 0.05 * (t - 2_460_150.0)
            + offset
            + normal(&mut rng, 0.0, sigma);
        text.push_str(&format!("{t},{v},{sigma},{name}\n"));
    }
    temp_table(&text)
}
