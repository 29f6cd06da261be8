//! `eccaudit curve`: evaluate a radial-velocity model from orbital elements on a time grid and
//! write it as CSV.

use std::fs::File;
use std::io::{BufWriter, Write};
use std::path::PathBuf;

use anyhow::{bail, Context};
use eccaudit_core::model::RvModel;
use eccaudit_core::orbit::OrbitalElements;

/// Evaluate a radial-velocity model on an even time grid and write CSV with the header
/// `time [d],velocity [m/s]`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// Period of the companion [days].
    #[arg(long, allow_negative_numbers = true)]
    period: Option<f64>,
    /// Semi-amplitude K of the companion [m/s].
    #[arg(long, allow_negative_numbers = true)]
    semi_amplitude: Option<f64>,
    /// Eccentricity of the companion (0 <= e < 1) [default: 0].
    #[arg(long, allow_negative_numbers = true)]
    eccentricity: Option<f64>,
    /// Argument of periastron of the star's orbit [degrees] [default: 0].
    #[arg(long, allow_negative_numbers = true)]
    omega_deg: Option<f64>,
    /// Time of periastron [days].
    #[arg(long, allow_negative_numbers = true)]
    tp: Option<f64>,
    /// A further companion, "P=<days>,K=<m/s>,e=<ecc>,omega_deg=<degrees>,tp=<days>" (e and
    /// omega_deg default to 0). May be repeated.
    #[arg(long = "companion", value_name = "SPEC")]
    companions: Vec<String>,
    /// Systemic velocity offset gamma [m/s].
    #[arg(long, default_value_t = 0.0, allow_negative_numbers = true)]
    gamma: f64,
    /// Linear trend [m/s per day].
    #[arg(long, default_value_t = 0.0, allow_negative_numbers = true)]
    trend: f64,
    /// Reference time of the trend [days] [default: --start].
    #[arg(long, allow_negative_numbers = true)]
    t_ref: Option<f64>,
    /// First time of the grid [days].
    #[arg(long, allow_negative_numbers = true)]
    start: f64,
    /// Last time of the grid [days].
    #[arg(long, allow_negative_numbers = true)]
    end: f64,
    /// Number of grid points (evenly spaced, both ends included).
    #[arg(long, default_value_t = 1000)]
    points: usize,
    /// Write the CSV to this file instead of standard output.
    #[arg(long, short)]
    output: Option<PathBuf>,
}

const DEGREE: f64 = core::f64::consts::PI / 180.0;

/// Elements of the companion given by the single-companion flags, if any flag was given.
fn flag_companion(args: &Args) -> anyhow::Result<Option<OrbitalElements>> {
    let any_given = args.period.is_some()
        || args.semi_amplitude.is_some()
        || args.eccentricity.is_some()
        || args.omega_deg.is_some()
        || args.tp.is_some();
    if !any_given {
        return Ok(None);
    }
    let (Some(period), Some(semi_amplitude), Some(tp)) =
        (args.period, args.semi_amplitude, args.tp)
    else {
        bail!("a companion given by flags needs --period, --semi-amplitude and --tp");
    };
    let elements = OrbitalElements::new(
        period,
        semi_amplitude,
        args.eccentricity.unwrap_or(0.0),
        args.omega_deg.unwrap_or(0.0) * DEGREE,
        tp,
    )
    .context("companion given by flags")?;
    Ok(Some(elements))
}

/// Parses "P=..,K=..,e=..,omega_deg=..,tp=..".
fn parse_companion(spec: &str) -> anyhow::Result<OrbitalElements> {
    let mut values: [Option<f64>; 5] = [None; 5];
    const KEYS: [&str; 5] = ["P", "K", "e", "omega_deg", "tp"];
    for field in spec.split(',').map(str::trim).filter(|f| !f.is_empty()) {
        let Some((key, value)) = field.split_once('=') else {
            bail!("'{field}' is not KEY=VALUE (keys: P, K, e, omega_deg, tp)");
        };
        let key = key.trim();
        let Some(slot) = KEYS.iter().position(|&k| k == key) else {
            bail!("unknown key '{key}' (keys: P, K, e, omega_deg, tp)");
        };
        if values[slot].is_some() {
            bail!("key '{key}' given twice");
        }
        let number: f64 = value
            .trim()
            .parse()
            .with_context(|| format!("{key}: '{}' is not a number", value.trim()))?;
        values[slot] = Some(number);
    }
    let [period, semi_amplitude, eccentricity, omega_deg, tp] = values;
    let (Some(period), Some(semi_amplitude), Some(tp)) = (period, semi_amplitude, tp) else {
        bail!("P, K and tp are required");
    };
    Ok(OrbitalElements::new(
        period,
        semi_amplitude,
        eccentricity.unwrap_or(0.0),
        omega_deg.unwrap_or(0.0) * DEGREE,
        tp,
    )?)
}

fn time_grid_step(args: &Args) -> anyhow::Result<f64> {
    if !args.start.is_finite() || !args.end.is_finite() {
        bail!(
            "--start and --end must be finite numbers, got {} and {}",
            args.start,
            args.end
        );
    }
    match args.points {
        0 => bail!("--points must be at least 1"),
        1 => Ok(0.0),
        n => {
            if args.end <= args.start {
                bail!(
                    "--end ({}) must be later than --start ({}) when --points > 1",
                    args.end,
                    args.start
                );
            }
            Ok((args.end - args.start) / (n - 1) as f64)
        }
    }
}

pub fn run(args: Args) -> anyhow::Result<()> {
    let mut companions = Vec::new();
    if let Some(elements) = flag_companion(&args)? {
        companions.push(elements);
    }
    for (i, spec) in args.companions.iter().enumerate() {
        let elements =
            parse_companion(spec).with_context(|| format!("--companion #{} \"{spec}\"", i + 1))?;
        companions.push(elements);
    }
    if companions.is_empty() {
        bail!("no companion: give --period, --semi-amplitude and --tp, or --companion");
    }
    let step = time_grid_step(&args)?;
    let reference_time = args.t_ref.unwrap_or(args.start);
    let model = RvModel::new(companions, vec![args.gamma], args.trend, reference_time)?;

    let sink: Box<dyn Write> = match &args.output {
        Some(path) => Box::new(
            File::create(path).with_context(|| format!("cannot create '{}'", path.display()))?,
        ),
        None => Box::new(std::io::stdout().lock()),
    };
    let mut out = BufWriter::new(sink);
    let time_at = |i: usize| {
        if i + 1 == args.points && args.points > 1 {
            args.end
        } else {
            args.start + step * i as f64
        }
    };
    writeln!(out, "time [d],velocity [m/s]").context("cannot write the CSV output")?;
    // Evaluate in chunks into reused buffers, so memory stays bounded for any --points.
    const CHUNK: usize = 4096;
    let mut times = Vec::with_capacity(CHUNK.min(args.points));
    let mut velocities = vec![0.0; CHUNK.min(args.points)];
    let mut first = 0;
    while first < args.points {
        let count = CHUNK.min(args.points - first);
        times.clear();
        times.extend((first..first + count).map(time_at));
        model.velocities_one_instrument(&times, 0, &mut velocities[..count])?;
        for (time, velocity) in times.iter().zip(&velocities[..count]) {
            writeln!(out, "{time},{velocity}").context("cannot write the CSV output")?;
        }
        first += count;
    }
    out.flush().context("cannot write the CSV output")?;
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn companion_spec_parses_and_rejects() {
        let elements = parse_companion("P=3.5, K=20,e=0.2,omega_deg=90,tp=100").unwrap();
        assert_eq!(elements.period(), 3.5);
        assert_eq!(elements.semi_amplitude(), 20.0);
        assert!((elements.omega() - core::f64::consts::FRAC_PI_2).abs() < 1e-15);
        assert!(parse_companion("P=3.5,K=20").is_err());
        assert!(parse_companion("P=3.5,K=20,tp=1,x=2").is_err());
        assert!(parse_companion("P=3.5,K=20,tp=1,e=1.2").is_err());
        assert!(parse_companion("P=abc,K=20,tp=1").is_err());
        assert!(parse_companion("P=1,P=2,K=20,tp=1").is_err());
    }
}
