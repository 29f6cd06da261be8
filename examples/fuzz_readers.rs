//! The long fuzz run of the table and settings readers (not part of the test command):
//! `cargo run --release --example fuzz_readers -- N [SEED]` runs N generated inputs per reader
//! (see `tests/fuzz/harness.rs`), prints the count, the time and every failure, and saves each
//! failing input under `tests/data/fuzz/{table,settings}/` so that it stays a regression case.

#[path = "../tests/fuzz/harness.rs"]
mod harness;

use std::path::PathBuf;
use std::time::Instant;

#[global_allocator]
static ALLOCATOR: harness::RecordingAllocator = harness::RecordingAllocator;

fn main() {
    let mut args = std::env::args().skip(1);
    let n: u64 = args
        .next()
        .map_or(100_000, |a| a.parse().expect("N: a count"));
    let seed: u64 = args
        .next()
        .map_or(1, |a| a.parse().expect("SEED: an integer"));
    let root = PathBuf::from(env!("CARGO_MANIFEST_DIR"));
    // Panics are expected and caught; keep their reports off the terminal.
    std::panic::set_hook(Box::new(|_| {}));
    let started = Instant::now();
    let (count, failures) = harness::run(&root, n, seed);
    let seconds = started.elapsed().as_secs_f64();
    println!(
        "{count} inputs ({n} per reader, seed {seed}) in {seconds:.1} s: {} failure(s)",
        failures.len()
    );
    for (index, (reader, input, why)) in failures.iter().enumerate() {
        let dir = match reader {
            harness::Reader::Table => "table",
            harness::Reader::Settings => "settings",
        };
        let path = root
            .join("tests/data/fuzz")
            .join(dir)
            .join(format!("found-seed{seed}-{index}.txt"));
        std::fs::write(&path, input).expect("write the failing input");
        println!("{reader:?}: {why} -> {}", path.display());
    }
    if !failures.is_empty() {
        std::process::exit(1);
    }
}
