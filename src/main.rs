//! The eccaudit command line: a thin driver over `eccaudit-core`.
//!
//! Each subcommand lives in `src/commands/`; this file only parses the
//! command line and turns any error into one readable line and a non-zero
//! exit status.

mod commands;

use std::process::ExitCode;

use clap::error::ErrorKind;
use clap::{Parser, Subcommand};

/// Audit an orbital eccentricity before you quote it.
#[derive(Debug, Parser)]
#[command(name = "eccaudit", version, about, long_about = None)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Debug, Subcommand)]
enum Command {
    /// Read a velocity table and print its summary.
    Table(commands::table::Args),
    /// Evaluate a radial-velocity model from orbital elements and write CSV.
    Curve(commands::curve::Args),
    /// Global least-squares Keplerian orbit fit with formal errors and the Lucy-Sweeney test.
    Fit(commands::fit::Args),
    /// Injection-recovery: simulate your own epochs and error bars with known eccentricities.
    Inject(commands::inject::Args),
    /// Fit, injection-recovery at the fitted orbit, and a bias-aware eccentricity statement.
    Audit(commands::audit::Args),
    /// Posterior of e under several eccentricity priors: the prior-sensitivity set and BF01.
    Priors(commands::priors::Args),
    /// Time the hot loops (Kepler solve) natively.
    Bench(commands::bench::Args),
}

fn main() -> ExitCode {
    let cli = match Cli::try_parse() {
        Ok(cli) => cli,
        Err(err) => return usage_error(err),
    };
    let result = match cli.command {
        Command::Table(args) => commands::table::run(args),
        Command::Curve(args) => commands::curve::run(args),
        Command::Fit(args) => commands::fit::run(args),
        Command::Inject(args) => commands::inject::run(args),
        Command::Audit(args) => commands::audit::run(args),
        Command::Priors(args) => commands::priors::run(args),
        Command::Bench(args) => commands::bench::run(args),
    };
    match result {
        Ok(()) => ExitCode::SUCCESS,
        Err(err) => {
            // One readable line: the whole context chain joined by ": ".
            eprintln!("eccaudit: error: {err:#}");
            ExitCode::FAILURE
        }
    }
}

/// Help and version go to standard output as clap prints them; a usage
/// mistake becomes one line on standard error and exit status 2.
fn usage_error(err: clap::Error) -> ExitCode {
    if matches!(
        err.kind(),
        ErrorKind::DisplayHelp
            | ErrorKind::DisplayVersion
            | ErrorKind::DisplayHelpOnMissingArgumentOrSubcommand
    ) {
        err.exit();
    }
    // clap's message proper is the paragraph before its usage block.
    let rendered = err.render().to_string();
    let message: Vec<&str> = rendered
        .lines()
        .take_while(|line| !line.trim().is_empty())
        .map(str::trim)
        .collect();
    let message = message.join(" ");
    let message = message.strip_prefix("error: ").unwrap_or(&message);
    eprintln!("eccaudit: error: {message} (see `eccaudit --help`)");
    ExitCode::from(2)
}
