//! The command-line tests: one binary (link once), one module per command or concern.
//! Add a test file as `tests/cli/NAME.rs` (starting with its `//!` line) and declare it here.

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
