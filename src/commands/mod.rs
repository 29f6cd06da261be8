//! One module per subcommand. Each has an `Args` (clap) and a `run`.

pub mod audit;
pub mod bench;
pub mod bench_posterior;
pub mod curve;
pub mod fit;
pub mod fit_plots;
pub mod inject;
pub mod input;
pub mod model_args;
pub mod priors;
pub mod table;
