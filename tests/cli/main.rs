//! The command-line tests: one binary (link once), one module per command or concern.
//! Add a test file as `tests/cli/NAME.rs` (starting with its `//!` line) and declare it here.

/// The simulated survey tables of `examples/make_survey_tables.rs`, shared by `survey.rs` and
/// `population.rs`.
#[path = "../../examples/make_survey_tables.rs"]
#[allow(dead_code)]
mod survey_tables;

/// The malformed-table fixtures, listed once for both test binaries.
#[path = "../shared/malformed_tables.rs"]
mod malformed_tables;

/// What the test modules share: the command under test, temporary tables, simulated tables.
mod support;

mod audit_settings;
mod curve;
mod errors;
mod fit;
mod fit_plots;
mod inject;
mod model;
mod population;
mod priors;
mod source_layout;
mod survey;
mod table;
mod table_formats;
mod usage;
