//! The reference-value tests (a published source, library or closed form named beside each
//! check): one binary, one module per subject. Add a test file as `tests/reference/NAME.rs`
//! (starting with its `//!` line) and declare it here.

/// The malformed-table fixtures, listed once for both test binaries.
#[path = "../shared/malformed_tables.rs"]
mod malformed_tables;

mod convergence;
mod fit;
mod inject;
mod kepler;
mod lsq;
mod mode_jumps;
mod model;
mod periodogram;
mod population;
mod posterior;
mod priors;
mod sampler;
mod support;
mod table_reader;
mod tables;
