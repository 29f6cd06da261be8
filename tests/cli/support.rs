//! What the command-line tests share, one home each: the `eccaudit` command under test, the demo
//! folder, temporary table files, and the simulated tables more than one test file uses.

use assert_cmd::Command;
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
/// over 300 d, Gaussian noise σ, seeded: the core's test table
/// (`eccaudit_core::test_support::two_companion_table` with no jitter) in a temporary file.
pub fn two_companion_table(seed: u64) -> tempfile::NamedTempFile {
    temp_table(&eccaudit_core::test_support::two_companion_table(0.0, seed))
}
