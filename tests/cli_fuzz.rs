//! The readers a user's file reaches first survive bad input: every case of the fuzz corpus
//! (`tests/data/fuzz/`, inputs that once failed or that exercise a limit) and a few thousand
//! freshly generated inputs return without panicking, with a one-line error, and without
//! allocating more at once than the stated bound. The long run (a million inputs per reader) is
//! `cargo run --release --example fuzz_readers -- 1000000` (DEVELOPERS.md § Fuzzing).

#[path = "fuzz/harness.rs"]
mod harness;

use std::path::{Path, PathBuf};

use harness::{check, Reader};

#[global_allocator]
static ALLOCATOR: harness::RecordingAllocator = harness::RecordingAllocator;

fn root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

fn corpus(dir: &Path) -> Vec<PathBuf> {
    let mut files: Vec<PathBuf> = std::fs::read_dir(dir)
        .unwrap()
        .map(|entry| entry.unwrap().path())
        .filter(|path| path.extension().is_some_and(|ext| ext == "txt"))
        .collect();
    files.sort();
    files
}

// One test function: the allocator's record is global, so nothing else may allocate
// concurrently in this binary.
#[test]
fn readers_survive_the_corpus_and_generated_inputs() {
    let mut n_corpus = 0;
    for (reader, dir) in [(Reader::Table, "table"), (Reader::Settings, "settings")] {
        for path in corpus(&root().join("tests/data/fuzz").join(dir)) {
            let bytes = std::fs::read(&path).unwrap();
            let input = String::from_utf8_lossy(&bytes);
            n_corpus += 1;
            if let Err(why) = check(reader, &input) {
                panic!("{}: {why}", path.display());
            }
        }
    }
    assert!(n_corpus >= 4, "the fuzz corpus has only {n_corpus} cases");
    let (n_generated, failures) = harness::run(&root(), 2_000, 20261203);
    assert_eq!(n_generated, 4_000);
    if let Some((reader, input, why)) = failures.first() {
        panic!(
            "{} of {n_generated} generated inputs failed; first ({reader:?}): {why}\n{input:?}",
            failures.len()
        );
    }
}
