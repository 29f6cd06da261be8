//! Generated inputs for the two readers a user's file reaches first: the velocity-table reader
//! (`eccaudit_core::table::parse_table`) and the settings reader (`AuditSettings::from_json`,
//! then what a replay does with the settings before any fit: the estimators with their prior
//! specs and sampler counts). Shared by the fast test (`tests/cli_fuzz.rs`: the corpus of
//! found cases plus a few thousand generated inputs) and the long run
//! (`cargo run --release --example fuzz_readers -- 1000000`).
//!
//! Each input is a seed file (demo tables, test tables, the default settings) changed by a few
//! random edits: bytes replaced, inserted or deleted; a number swapped for an extreme one
//! (`1e308`, `NaN`, `-0`, twenty digits, an empty field); a line duplicated many times or
//! dropped; delimiters, quotes, BOMs, CRs and non-ASCII text inserted. A reader passes when it
//! returns (no panic), an error is one line, and no single allocation while reading is larger
//! than [`allocation_bound`] of the input.

use std::alloc::{GlobalAlloc, Layout, System};
use std::panic::{catch_unwind, AssertUnwindSafe};
use std::sync::atomic::{AtomicUsize, Ordering};

use eccaudit_core::audit::AuditSettings;
use eccaudit_core::random::stream_rng;
use eccaudit_core::table::{parse_table, ReadOptions};
use rand::{Rng, RngExt};

/// The allocator of the fuzz binaries: the system allocator, recording the largest single
/// request since the last [`reset_largest_allocation`].
pub struct RecordingAllocator;

static LARGEST: AtomicUsize = AtomicUsize::new(0);

// SAFETY: every call is forwarded unchanged to `System`, which upholds `GlobalAlloc`'s
// contract; the only addition is a relaxed atomic store of the requested size.
unsafe impl GlobalAlloc for RecordingAllocator {
    unsafe fn alloc(&self, layout: Layout) -> *mut u8 {
        LARGEST.fetch_max(layout.size(), Ordering::Relaxed);
        // SAFETY: the caller's layout is passed on as received.
        unsafe { System.alloc(layout) }
    }
    unsafe fn dealloc(&self, ptr: *mut u8, layout: Layout) {
        // SAFETY: `ptr` was allocated by `System` with this layout (see `alloc`).
        unsafe { System.dealloc(ptr, layout) }
    }
    unsafe fn realloc(&self, ptr: *mut u8, layout: Layout, new_size: usize) -> *mut u8 {
        LARGEST.fetch_max(new_size, Ordering::Relaxed);
        // SAFETY: forwarded unchanged; `ptr` came from `System` with `layout`.
        unsafe { System.realloc(ptr, layout, new_size) }
    }
}

/// Forget the largest allocation seen so far.
pub fn reset_largest_allocation() {
    LARGEST.store(0, Ordering::Relaxed);
}

/// The largest single allocation since the last reset [bytes].
pub fn largest_allocation() -> usize {
    LARGEST.load(Ordering::Relaxed)
}

/// The stated bound on any single allocation while reading an input of `input_len` bytes:
/// 64 bytes per input byte (a table's columns are a few f64 per field, and the reader keeps
/// the records of the text) plus 1 MiB for fixed tables (header aliases, JSON scratch).
pub fn allocation_bound(input_len: usize) -> usize {
    64 * input_len + (1 << 20)
}

/// Which reader an input is for.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Reader {
    /// `parse_table`.
    Table,
    /// `AuditSettings::from_json` and the estimators.
    Settings,
}

/// Runs one input through its reader; `Err` describes a failure (panic, multi-line error,
/// allocation over the bound).
pub fn check(reader: Reader, input: &str) -> Result<(), String> {
    reset_largest_allocation();
    let outcome = catch_unwind(AssertUnwindSafe(|| match reader {
        Reader::Table => parse_table(input, &ReadOptions::new("fuzz.csv"))
            .map(|table| {
                let _ = table.summary().to_string();
            })
            .map_err(|e| e.to_string()),
        Reader::Settings => AuditSettings::from_json(input)
            .and_then(|settings| {
                let _ = settings.to_json();
                settings.injection.posterior.estimators(settings.seed)?;
                Ok(())
            })
            .map_err(|e| e.to_string()),
    }));
    let largest = largest_allocation();
    match outcome {
        Err(_) => return Err("panicked".to_string()),
        Ok(Err(message)) if message.contains('\n') => {
            return Err(format!("error of more than one line: {message:?}"))
        }
        Ok(_) => {}
    }
    let bound = allocation_bound(input.len());
    if largest > bound {
        return Err(format!(
            "allocated {largest} bytes at once for {} input bytes (bound {bound})",
            input.len()
        ));
    }
    Ok(())
}

/// The seed inputs of a reader, read from the repository.
pub fn seeds(root: &std::path::Path, reader: Reader) -> Vec<String> {
    match reader {
        Reader::Table => {
            let mut seeds = Vec::new();
            for dir in [
                "demo-data",
                "tests/data/tables/good",
                "tests/data/tables/malformed",
            ] {
                let mut paths: Vec<_> = std::fs::read_dir(root.join(dir))
                    .unwrap()
                    .map(|entry| entry.unwrap().path())
                    .filter(|path| {
                        path.extension().is_some_and(|ext| {
                            ["csv", "tsv", "txt"].contains(&ext.to_str().unwrap())
                        })
                    })
                    .collect();
                paths.sort();
                for path in paths {
                    let text = std::fs::read_to_string(&path).unwrap();
                    // Long demo tables are cut to their first 40 lines: edits then hit the
                    // header and the rows alike.
                    let head: Vec<&str> = text.lines().take(40).collect();
                    seeds.push(head.join("\n") + "\n");
                }
            }
            seeds
        }
        Reader::Settings => {
            // The default replay file, one with several prior specs and a posterior, and
            // one whose counts are far over the limits (walkers, steps, trials).
            let mut with_priors = AuditSettings::default();
            with_priors.injection.posterior.priors = vec![
                "uniform".into(),
                "kipping2013:0..0.8".into(),
                "beta(0.867,3.03):0..0.8".into(),
            ];
            let mut oversized = AuditSettings::default();
            oversized.injection.trials_per_cell = 1 << 40;
            oversized.injection.posterior.n_walkers = 1 << 40;
            oversized.injection.posterior.n_steps = 1 << 40;
            vec![
                AuditSettings::default().to_json(),
                with_priors.to_json(),
                oversized.to_json(),
            ]
        }
    }
}

const EXTREMES: [&str; 14] = [
    "1e308",
    "-1e308",
    "1e-320",
    "NaN",
    "nan",
    "inf",
    "-inf",
    "-0",
    "0",
    "99999999999999999999",
    "18446744073709551616",
    "",
    "1e99999",
    "0x10",
];
const INSERTS: [&str; 12] = [
    ",", ";", "\t", " ", "\"", "\r", "\n", "\u{feff}", "é", "#", "\u{0}", "]",
];

/// One generated input: a seed with 1–4 random edits.
pub fn generate<R: Rng + ?Sized>(rng: &mut R, seeds: &[String]) -> String {
    let mut text = seeds[rng.random_range(0..seeds.len())].clone().into_bytes();
    for _ in 0..rng.random_range(1..=4) {
        let at = if text.is_empty() {
            0
        } else {
            rng.random_range(0..text.len())
        };
        match rng.random_range(0..8) {
            0 => {
                if !text.is_empty() {
                    text[at] = rng.random();
                }
            }
            1 => text.insert(at, rng.random_range(0x20..0x7f)),
            2 => {
                let end = (at + rng.random_range(1..20)).min(text.len());
                text.drain(at..end);
            }
            3 | 4 => {
                // Replace the number under `at` (or the next one) by an extreme.
                let start = (at..text.len()).find(|&i| text[i].is_ascii_digit());
                if let Some(start) = start {
                    let end = (start..text.len())
                        .find(|&i| !(text[i].is_ascii_digit() || b".eE+-".contains(&text[i])))
                        .unwrap_or(text.len());
                    let extreme = EXTREMES[rng.random_range(0..EXTREMES.len())];
                    text.splice(start..end, extreme.bytes());
                }
            }
            5 => {
                let insert = INSERTS[rng.random_range(0..INSERTS.len())];
                text.splice(at..at, insert.bytes());
            }
            6 => {
                // Duplicate the line under `at` up to 200 times.
                let start = text[..at]
                    .iter()
                    .rposition(|&b| b == b'\n')
                    .map_or(0, |i| i + 1);
                let end = text[at..]
                    .iter()
                    .position(|&b| b == b'\n')
                    .map_or(text.len(), |i| at + i + 1);
                let line = text[start..end].to_vec();
                for _ in 0..rng.random_range(1..200) {
                    text.splice(end..end, line.iter().copied());
                }
            }
            _ => {
                // Drop the line under `at`.
                let start = text[..at]
                    .iter()
                    .rposition(|&b| b == b'\n')
                    .map_or(0, |i| i + 1);
                let end = text[at..]
                    .iter()
                    .position(|&b| b == b'\n')
                    .map_or(text.len(), |i| at + i + 1);
                text.drain(start..end);
            }
        }
    }
    String::from_utf8_lossy(&text).into_owned()
}

/// Runs `n` generated inputs per reader from `seed`; returns (inputs run, failures with the
/// input that caused each).
pub fn run(root: &std::path::Path, n: u64, seed: u64) -> (u64, Vec<(Reader, String, String)>) {
    let mut failures = Vec::new();
    let mut count = 0;
    for (stream, reader) in [(0, Reader::Table), (1, Reader::Settings)] {
        let seeds = seeds(root, reader);
        let mut rng = stream_rng(seed, stream);
        for _ in 0..n {
            let input = generate(&mut rng, &seeds);
            count += 1;
            if let Err(why) = check(reader, &input) {
                failures.push((reader, input, why));
            }
        }
    }
    (count, failures)
}
