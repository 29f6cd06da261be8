//! `eccaudit fit FILE`: global least-squares Keplerian fit of a velocity table (text or JSON).

use std::path::PathBuf;

use super::input::{read_table, TableArgs};
use anyhow::{bail, Context};
use eccaudit_core::fit::{fit_orbit, FitData, FitOptions};
use eccaudit_core::periodogram::FrequencyLimits;

/// Arguments of `eccaudit fit`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// Velocity table: CSV, TSV or whitespace-separated; columns time, velocity, uncertainty[, instrument].
    pub file: PathBuf,
    /// Number of Keplerian companions.
    #[arg(long, default_value_t = 1)]
    pub companions: usize,
    /// Shortest period searched [d] (default 1 d).
    #[arg(long)]
    pub min_period: Option<f64>,
    /// Longest period searched [d] (default: the time span of the data).
    #[arg(long)]
    pub max_period: Option<f64>,
    /// Starting period [d] instead of the period search; repeat once per companion, in order.
    #[arg(long = "period")]
    pub periods: Vec<f64>,
    /// Periodogram peaks used as starting periods.
    #[arg(long, default_value_t = 3)]
    pub peaks: usize,
    /// Extra random (e, omega) starts per starting period.
    #[arg(long, default_value_t = 0)]
    pub random_starts: usize,
    /// Seed of the random starts.
    #[arg(long, default_value_t = 1)]
    pub seed: u64,
    /// Fit a linear trend.
    #[arg(long)]
    pub trend: bool,
    /// Fit one jitter per instrument by maximum likelihood.
    #[arg(long)]
    pub jitter: bool,
    /// Largest false-alarm probability accepted for the period search's best peak.
    #[arg(long, default_value_t = 0.01)]
    pub max_fap: f64,
    /// Stellar mass [solar masses]; adds m sin i and the semi-major axis to the report.
    #[arg(long)]
    pub stellar_mass: Option<f64>,
    #[command(flatten)]
    pub table: TableArgs,
    /// Print the report as JSON instead of a text table.
    #[arg(long)]
    pub json: bool,
    /// Also write the figures as SVG into this folder: periodogram.svg and one
    /// phase-c1.svg, phase-c2.svg, ... per companion.
    #[arg(long, value_name = "DIR")]
    pub plots: Option<PathBuf>,
}

/// Build the fit options from the arguments (checks what clap cannot).
fn options(args: &Args, baseline: f64) -> anyhow::Result<FitOptions> {
    if args.companions == 0 {
        bail!("--companions must be at least 1");
    }
    if args.periods.len() > args.companions {
        bail!(
            "{} --period values given for {} companion(s)",
            args.periods.len(),
            args.companions
        );
    }
    let mut options = FitOptions {
        n_companions: args.companions,
        trend: args.trend,
        initial_periods: args.periods.clone(),
        n_peaks: args.peaks,
        n_random_starts: args.random_starts,
        seed: args.seed,
        max_false_alarm_probability: args.max_fap,
        jitter: args.jitter,
        stellar_mass: args.stellar_mass,
        ..FitOptions::default()
    };
    if args.min_period.is_some() || args.max_period.is_some() {
        let min_period = args.min_period.unwrap_or(1.0);
        let max_period = args.max_period.unwrap_or(baseline);
        if !(min_period > 0.0 && max_period > min_period) {
            bail!(
                "period range [{min_period}, {max_period}] d: need 0 < --min-period < --max-period"
            );
        }
        options.limits = FrequencyLimits::PeriodRange {
            min_period,
            max_period,
        };
    }
    Ok(options)
}

/// Read the table, fit, print.
pub fn run(args: Args) -> anyhow::Result<()> {
    let source_name = args.file.display().to_string();
    let table = read_table(&args.file, &args.table)?;
    let data = FitData::from_table(&table);
    let baseline = data
        .times()
        .iter()
        .copied()
        .fold(f64::NEG_INFINITY, f64::max)
        - data.times().iter().copied().fold(f64::INFINITY, f64::min);
    let options = options(&args, baseline)?;
    let report = fit_orbit(&data, &options).with_context(|| format!("fit of `{source_name}`"))?;
    if args.json {
        println!("{}", serde_json::to_string_pretty(&report)?);
    } else {
        println!("{source_name} ({})", table.time_convention().label());
        print!("{report}");
    }
    for warning in &report.warnings {
        eprintln!("eccaudit: warning: {warning}");
    }
    if let Some(dir) = &args.plots {
        let label = table.time_convention().label();
        for path in super::fit_plots::write_plots(dir, &data, &options, &report, &label)? {
            eprintln!("eccaudit: wrote {}", path.display());
        }
    }
    Ok(())
}
