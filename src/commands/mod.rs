//! One module per subcommand. Each has an `Args` (clap) and a `run`.

pub mod bench;
pub mod curve;
pub mod fit;
pub mod fit_plots;
pub mod table;
