//! The eccaudit command line: a thin driver over `eccaudit-core`.
//!
//! Each subcommand lives in `src/commands/`; this file only parses the
//! command line and turns any error into one readable line and a non-zero
//! exit status. A reader that closes the pipe early (`eccaudit table FILE |
//! head -1`) is not an error: the command stops quietly with status 0, as
//! well-behaved Unix tools do.

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
    /// Audit every table of a manifest: one folder per table and a catalogue (CSV, JSON).
    Survey(commands::survey::Args),
    /// Combine the outputs of shards (--shard I/N) into the files of a single run.
    Merge(commands::merge::Args),
    /// Posterior of e under several eccentricity priors: the prior-sensitivity set and BF01.
    Priors(commands::priors::Args),
    /// Eccentricity distribution of a population from saved posterior draws (Hogg, Myers & Bovy 2010).
    Population(commands::population::Args),
    /// Time the hot loops (Kepler solve) natively.
    Bench(commands::bench::Args),
}

fn main() -> ExitCode {
    exit_quietly_on_closed_stdout();
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
        Command::Survey(args) => commands::survey::run(args),
        Command::Merge(args) => commands::merge::run(args),
        Command::Priors(args) => commands::priors::run(args),
        Command::Population(args) => commands::population::run(args),
        Command::Bench(args) => commands::bench::run(args),
    };
    match result {
        Ok(()) => ExitCode::SUCCESS,
        Err(err) if is_broken_pipe(&err) => ExitCode::SUCCESS,
        Err(err) => {
            eprintln!("eccaudit: error: {}", error_line(&err));
            ExitCode::FAILURE
        }
    }
}

/// One readable line: the error and its causes joined by ": ", each said once. Errors that
/// already print their source in their own message (`injection design: trials per cell = 0:
/// at least 1`) would otherwise repeat it, so a cause whose text the previous message already
/// contains is skipped.
fn error_line(err: &anyhow::Error) -> String {
    let mut line = String::new();
    let mut previous = String::new();
    for cause in err.chain() {
        let text = cause.to_string();
        if line.is_empty() {
            line.push_str(&text);
        } else if !previous.contains(&text) {
            line.push_str(": ");
            line.push_str(&text);
        }
        previous = text;
    }
    line
}

/// True when the error comes from writing to a reader that has gone away.
fn is_broken_pipe(err: &anyhow::Error) -> bool {
    err.chain().any(|cause| {
        cause
            .downcast_ref::<std::io::Error>()
            .is_some_and(|io| io.kind() == std::io::ErrorKind::BrokenPipe)
    })
}

/// `println!` panics when standard output is a closed pipe (Rust ignores SIGPIPE, so the write
/// fails with EPIPE instead of killing the process). That panic is the reader's choice to stop
/// reading, not a bug: exit with status 0 and no message. Every other panic keeps the default
/// report.
fn exit_quietly_on_closed_stdout() {
    let default_hook = std::panic::take_hook();
    std::panic::set_hook(Box::new(move |info| {
        let payload = info.payload();
        let message = payload
            .downcast_ref::<String>()
            .map(String::as_str)
            .or_else(|| payload.downcast_ref::<&str>().copied())
            .unwrap_or("");
        // std's text: "failed printing to stdout: Broken pipe (os error 32)".
        let broken_pipe = std::io::Error::from(std::io::ErrorKind::BrokenPipe).to_string();
        if message.starts_with("failed printing to stdout")
            && (message.contains("Broken pipe") || message.contains(&broken_pipe))
        {
            std::process::exit(0);
        }
        default_hook(info);
    }));
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
