//! The saved posterior draws of e (`eccaudit-samples` version 1, an astropy ECSV file): writing, reading with located errors, thinning to the effective sample size, and e of one companion from a run's chains.
//!
//! One file holds the draws of one companion of one table under one prior. The header's table
//! metadata says everything a population analysis needs to reweight them (Hogg, Myers & Bovy
//! 2010, ApJ 725, 2166): the prior they were drawn under as a spec the core parses
//! ([`crate::posterior::parse_prior_spec`]), so its density is recomputed rather than trusted,
//! the table and companion, whether the run met the convergence rule, its effective sample
//! size, and the least-squares e and posterior median of the same table (for the naive
//! histograms shown beside the population). The columns are `e` and `ln_prior`, the
//! log-density of the prior at e; the reader recomputes `ln_prior` and refuses a file where it
//! disagrees (a prior spec that does not describe the draws).

use yaml_rust2::{Yaml, YamlLoader};

use crate::posterior::{parse_prior_spec, PosteriorRun};
use crate::priors::{EccentricityPrior, EccentricityPriorSettings, EccentricityShape};
use crate::table::{write_ecsv, EcsvColumn};

use super::PopulationError;

/// The format's name, written as the `format` key of the metadata.
pub const SAMPLES_FORMAT: &str = "eccaudit-samples";
/// The format version this build writes and reads.
pub const SAMPLES_VERSION: u32 = 1;
/// Most draws written per companion: more add little to the importance-sampling sums (their
/// Monte-Carlo error is that of the run's effective sample size) and cost time in every
/// population likelihood.
pub const MAX_SAVED_DRAWS: usize = 4000;

/// The saved draws of one companion under one prior.
#[derive(Debug, Clone, PartialEq)]
pub struct EccentricitySamples {
    /// The velocity table (as named in the run or survey).
    pub table: String,
    /// Companion number, 1-based.
    pub companion: usize,
    /// The prior the draws were made under, as a spec ([`prior_spec_text`]).
    pub prior_spec: String,
    /// The same, parsed and validated.
    pub prior: EccentricityPrior,
    /// True when the run met its convergence rule.
    pub converged: bool,
    /// Effective sample size of e in the run (τ-based).
    pub ess: f64,
    /// Least-squares e of the same companion, when known.
    pub least_squares_e: Option<f64>,
    /// Posterior median of e under this prior (all draws of the run).
    pub posterior_median: f64,
    /// The draws, thinned to about the effective sample size.
    pub draws: Vec<f64>,
}

/// A prior as a spec that [`parse_prior_spec`] reads back to the same settings (numbers in
/// their shortest round-trip form). `None` for the circular prior and an unresolved
/// by-period choice, which have no draws to save, and for the Jeffreys prior, whose marginal
/// on e is not known.
pub fn prior_spec_text(settings: &EccentricityPriorSettings) -> Option<String> {
    let shape = match settings.shape {
        EccentricityShape::Uniform => "uniform".to_string(),
        EccentricityShape::Beta { a, b } => format!("beta({a},{b})"),
        EccentricityShape::Rayleigh { sigma } => format!("rayleigh({sigma})"),
        EccentricityShape::HalfNormal { sigma } => format!("halfnormal({sigma})"),
        EccentricityShape::LogUniform => "loguniform".to_string(),
        EccentricityShape::UniformInECosOmega => "ecosw".to_string(),
        EccentricityShape::UniformInSqrtECosOmega => "sqrtecosw".to_string(),
        // Jeffreys: its marginal on e depends on the table and is not known, so the draws
        // cannot be reweighted to a population.
        EccentricityShape::Circular
        | EccentricityShape::Kipping2013ByPeriod
        | EccentricityShape::Jeffreys => return None,
    };
    Some(format!("{shape}:{}..{}", settings.e_min, settings.e_max))
}

/// Every `k`-th of `draws` with `k = ⌊n / ESS⌋` (at least 1), so that the kept draws are about
/// independent, then at most `max` of them (evenly spaced). `draws` should be in the run's
/// step-major order, so that consecutive kept draws are far apart in the chains.
pub fn thin_to_ess(draws: &[f64], ess: f64, max: usize) -> Vec<f64> {
    let n = draws.len();
    if n == 0 {
        return Vec::new();
    }
    let stride = if ess.is_finite() && ess >= 1.0 {
        ((n as f64 / ess).floor() as usize).max(1)
    } else {
        1
    };
    let thinned: Vec<f64> = draws.iter().step_by(stride).copied().collect();
    let max = max.max(1);
    if thinned.len() <= max {
        return thinned;
    }
    (0..max).map(|i| thinned[i * thinned.len() / max]).collect()
}

/// e = (√e cos ω)² + (√e sin ω)² of companion `companion` (1-based) at every stored draw of a
/// run, in step-major order; `None` when the run has no such companion or samples it circular.
pub fn eccentricity_draws(run: &PosteriorRun, companion: usize) -> Option<Vec<f64>> {
    let find = |base: &str| {
        let tagged = format!("{base}_{companion}");
        run.parameter_names
            .iter()
            .position(|n| *n == tagged || (companion == 1 && n == base))
    };
    let h = find("sqrt_e_cos_omega")?;
    let k = find("sqrt_e_sin_omega")?;
    let chains = &run.chains;
    let mut out = Vec::with_capacity(chains.n_stored_steps * chains.n_walkers);
    for step in 0..chains.n_stored_steps {
        for walker in 0..chains.n_walkers {
            let x = chains.sample(step, walker);
            out.push(x[h] * x[h] + x[k] * x[k]);
        }
    }
    Some(out)
}

/// The samples of companion `companion` (1-based) of a posterior run, ready to save: e at every
/// stored draw, its effective sample size N/τ (τ by Sokal's window on the walkers' traces of this
/// companion's e, as the run's own e summary), thinned to about that many draws (at most
/// [`MAX_SAVED_DRAWS`]), the run's convergence verdict (every sampled parameter and e of
/// companion 1 judged), the prior as sampled, and the median of all draws. `None` when the run
/// has no eccentricity of that companion or its prior has no spec (circular).
pub fn samples_from_run(
    table: &str,
    companion: usize,
    run: &PosteriorRun,
    least_squares_e: Option<f64>,
) -> Option<EccentricitySamples> {
    let draws = eccentricity_draws(run, companion)?;
    let prior_spec = prior_spec_text(&run.summary.prior)?;
    let prior = run.summary.prior.validate().ok()?;
    let chains = &run.chains;
    let traces: Vec<Vec<f64>> = (0..chains.n_walkers)
        .map(|w| {
            (0..chains.n_stored_steps)
                .map(|s| draws[s * chains.n_walkers + w])
                .collect()
        })
        .collect();
    let tau = crate::sampler::integrated_autocorrelation_time(&traces).tau;
    let ess = if tau.is_finite() && tau >= 1.0 {
        draws.len() as f64 / tau
    } else {
        f64::NAN
    };
    let mut sorted = draws.clone();
    sorted.sort_by(f64::total_cmp);
    let posterior_median = crate::sampler::quantile_sorted(&sorted, 0.5);
    Some(EccentricitySamples {
        table: table.to_string(),
        companion,
        prior_spec,
        prior,
        converged: run.summary.converged,
        ess,
        least_squares_e,
        posterior_median,
        draws: thin_to_ess(&draws, ess, MAX_SAVED_DRAWS),
    })
}

/// The draws a survey saves for one table (`eccaudit survey --save-samples SPEC` and the page's
/// survey, so both save the same bits): the posterior of `data` under the prior `spec`, with the
/// audit settings' model and seed and the `priors` defaults otherwise (4 ensembles of 16
/// walkers, run until converged within 4·10⁶ evaluations), one entry per companion, each with
/// its least-squares e from the fit the posterior starts from.
pub fn survey_table_samples(
    data: &crate::fit::FitData,
    table: &str,
    settings: &crate::audit::AuditSettings,
    spec: &str,
) -> Result<Vec<EccentricitySamples>, crate::posterior::PosteriorError> {
    use crate::posterior::{sensitivity_run, sensitivity_start, SensitivityRequest};
    let request = SensitivityRequest {
        priors: vec![spec.to_string()],
        seed: settings.seed,
        model: settings.model.clone(),
        ..SensitivityRequest::default()
    };
    let sensitivity = request.to_settings()?;
    let start = sensitivity_start(data, &sensitivity)?;
    let run = sensitivity_run(data, &sensitivity, &start, 0, &mut |_| {
        crate::sampler::Steer::Continue
    })?;
    let companions = &start.fit.eccentric.companions;
    Ok((1..=sensitivity.posterior.n_companions)
        .filter_map(|c| {
            let ls = companions.get(c - 1).map(|f| f.eccentricity.value);
            samples_from_run(table, c, &run, ls)
        })
        .collect())
}

/// The file name a survey gives the draws of `companion` (1-based) of a table with
/// `n_companions`: `posterior-e.ecsv`, or `posterior-e-cN.ecsv` with several.
pub fn samples_file_name(companion: usize, n_companions: usize) -> String {
    if n_companions > 1 {
        format!("posterior-e-c{companion}.ecsv")
    } else {
        "posterior-e.ecsv".to_string()
    }
}

/// Writes the samples as ECSV (astropy reads it: `Table.read(path, format="ascii.ecsv")`,
/// metadata in `table.meta`).
pub fn write_samples_ecsv(samples: &EccentricitySamples) -> String {
    let ln_prior: Vec<f64> = samples
        .draws
        .iter()
        .map(|&e| samples.prior.log_density(e))
        .collect();
    let columns = [
        EcsvColumn::float(
            "e",
            None,
            "posterior draw of the eccentricity",
            &samples.draws,
        ),
        EcsvColumn::float(
            "ln_prior",
            None,
            "natural log of the prior density of e the draw was made under",
            &ln_prior,
        ),
    ];
    let meta = [
        ("format", SAMPLES_FORMAT.to_string()),
        ("version", SAMPLES_VERSION.to_string()),
        ("table", samples.table.clone()),
        ("companion", samples.companion.to_string()),
        ("prior", samples.prior_spec.clone()),
        ("converged", samples.converged.to_string()),
        ("ess", samples.ess.to_string()),
        (
            "least_squares_e",
            samples
                .least_squares_e
                .map_or_else(|| "nan".to_string(), |e| e.to_string()),
        ),
        ("posterior_median", samples.posterior_median.to_string()),
        ("n_draws", samples.draws.len().to_string()),
    ];
    write_ecsv(&columns, &meta)
}

fn located(
    source: &str,
    line: usize,
    column: usize,
    message: impl Into<String>,
) -> PopulationError {
    PopulationError::Samples {
        source_name: crate::one_line(source),
        line,
        column,
        message: crate::one_line(&message.into()),
    }
}

fn yaml_text(node: &Yaml) -> Option<String> {
    match node {
        Yaml::String(s) | Yaml::Real(s) => Some(s.clone()),
        Yaml::Integer(i) => Some(i.to_string()),
        Yaml::Boolean(b) => Some(b.to_string()),
        _ => None,
    }
}

/// Reads a samples file written by [`write_samples_ecsv`] (or by any tool writing the same
/// columns and metadata). Every error names `source_name`, the line and the column.
pub fn parse_samples_ecsv(
    text: &str,
    source_name: &str,
) -> Result<EccentricitySamples, PopulationError> {
    let mut lines = text.lines().enumerate().peekable();
    let first = lines.peek().map(|(_, l)| *l).unwrap_or("");
    if !first.starts_with("# %ECSV") {
        return Err(located(
            source_name,
            1,
            1,
            "not an ECSV file: the first line must be `# %ECSV 1.0` (eccaudit-samples files are ECSV)",
        ));
    }
    lines.next();
    let mut yaml = String::new();
    let mut header_end = 1;
    while let Some((i, line)) = lines.peek() {
        if let Some(rest) = line.strip_prefix('#') {
            yaml.push_str(rest.strip_prefix(' ').unwrap_or(rest));
            yaml.push('\n');
            header_end = i + 1;
            lines.next();
        } else {
            break;
        }
    }
    let docs = YamlLoader::load_from_str(&yaml).map_err(|e| {
        let marker = e.marker();
        located(
            source_name,
            marker.line() + 1,
            marker.col() + 3,
            format!("header is not valid YAML: {}", e.info()),
        )
    })?;
    let header = docs.first().cloned().unwrap_or(Yaml::Null);
    let meta_node = &header["meta"];
    let meta = |key: &str| -> Option<String> {
        match meta_node {
            Yaml::Array(items) => items.iter().find_map(|item| match item {
                Yaml::Hash(map) => map.get(&Yaml::String(key.to_string())).and_then(yaml_text),
                _ => None,
            }),
            Yaml::Hash(map) => map.get(&Yaml::String(key.to_string())).and_then(yaml_text),
            _ => None,
        }
    };
    // Locate a metadata key in the header for messages.
    let locate = |key: &str| -> (usize, usize) {
        text.lines()
            .enumerate()
            .take(header_end)
            .find_map(|(i, l)| l.find(&format!("{key}:")).map(|at| (i + 1, at + 1)))
            .unwrap_or((1, 1))
    };
    let need = |key: &str| -> Result<String, PopulationError> {
        meta(key).ok_or_else(|| {
            located(
                source_name,
                header_end.max(1),
                1,
                format!("the header's meta has no `{key}` (an {SAMPLES_FORMAT} file needs it)"),
            )
        })
    };
    let number = |key: &str| -> Result<f64, PopulationError> {
        let value = need(key)?;
        let (line, column) = locate(key);
        value.trim().parse::<f64>().map_err(|_| {
            located(
                source_name,
                line,
                column,
                format!("`{key}: {value}` is not a number"),
            )
        })
    };
    let format = need("format")?;
    if format != SAMPLES_FORMAT {
        let (line, column) = locate("format");
        return Err(located(
            source_name,
            line,
            column,
            format!("format `{format}`: expected `{SAMPLES_FORMAT}`"),
        ));
    }
    let version = need("version")?;
    if version.trim() != SAMPLES_VERSION.to_string() {
        let (line, column) = locate("version");
        return Err(located(
            source_name,
            line,
            column,
            format!("version {version}: this eccaudit reads version {SAMPLES_VERSION}"),
        ));
    }
    let table = need("table")?;
    let companion_text = need("companion")?;
    let companion = companion_text
        .trim()
        .parse::<usize>()
        .ok()
        .filter(|&c| (1..=crate::limits::MAX_COMPANIONS as usize).contains(&c));
    let Some(companion) = companion else {
        let (line, column) = locate("companion");
        return Err(located(
            source_name,
            line,
            column,
            format!(
                "companion `{companion_text}`: expected 1 to {}",
                crate::limits::MAX_COMPANIONS
            ),
        ));
    };
    let prior_spec = need("prior")?;
    let prior = parse_prior_spec(&prior_spec)
        .and_then(|settings| Ok(settings.validate()?))
        .map_err(|e| {
            let (line, column) = locate("prior");
            located(
                source_name,
                line,
                column,
                format!("prior `{prior_spec}`: {e}"),
            )
        })?;
    let converged = match need("converged")?.trim().to_ascii_lowercase().as_str() {
        "true" => true,
        "false" => false,
        other => {
            let (line, column) = locate("converged");
            return Err(located(
                source_name,
                line,
                column,
                format!("converged `{other}`: expected true or false"),
            ));
        }
    };
    let ess = number("ess")?;
    let least_squares_e = Some(number("least_squares_e")?).filter(|e| e.is_finite());
    let posterior_median = number("posterior_median")?;
    // Column names line, then rows.
    let Some((names_index, names_line)) = lines.next() else {
        return Err(located(
            source_name,
            header_end + 1,
            1,
            "no column-name line after the header",
        ));
    };
    let names: Vec<&str> = names_line.split_whitespace().collect();
    let e_col = names
        .iter()
        .position(|n| *n == "e")
        .ok_or_else(|| located(source_name, names_index + 1, 1, "no column named `e`"))?;
    let ln_col = names.iter().position(|n| *n == "ln_prior");
    let mut draws = Vec::new();
    for (i, line) in lines {
        if line.trim().is_empty() {
            continue;
        }
        if draws.len() >= crate::limits::MAX_STORED_DRAWS as usize {
            return Err(located(
                source_name,
                i + 1,
                1,
                format!("more than {} draws", crate::limits::MAX_STORED_DRAWS),
            ));
        }
        let mut fields = Vec::new();
        let mut start = None;
        for (at, c) in line.char_indices() {
            match (c.is_whitespace(), start) {
                (false, None) => start = Some(at),
                (true, Some(s)) => {
                    fields.push((s, &line[s..at]));
                    start = None;
                }
                _ => {}
            }
        }
        if let Some(s) = start {
            fields.push((s, &line[s..]));
        }
        let field = |col: usize| -> Result<(f64, usize), PopulationError> {
            let Some(&(at, text)) = fields.get(col) else {
                return Err(located(
                    source_name,
                    i + 1,
                    line.chars().count() + 1,
                    format!("{} fields, expected {}", fields.len(), names.len()),
                ));
            };
            let column = line[..at].chars().count() + 1;
            text.parse::<f64>().map(|v| (v, column)).map_err(|_| {
                located(
                    source_name,
                    i + 1,
                    column,
                    format!("`{text}` is not a number"),
                )
            })
        };
        let (e, column) = field(e_col)?;
        if !(0.0..1.0).contains(&e) || prior.log_density(e) == f64::NEG_INFINITY {
            return Err(located(
                source_name,
                i + 1,
                column,
                format!("e = {e} lies outside the prior `{prior_spec}`"),
            ));
        }
        if let Some(col) = ln_col {
            let (stated, column) = field(col)?;
            let recomputed = prior.log_density(e);
            if (stated - recomputed).abs() > 1e-9 * (1.0 + recomputed.abs()) {
                return Err(located(
                    source_name,
                    i + 1,
                    column,
                    format!(
                        "ln_prior = {stated} but the prior `{prior_spec}` gives {recomputed} at e = {e}"
                    ),
                ));
            }
        }
        draws.push(e);
    }
    if draws.is_empty() {
        return Err(located(source_name, names_index + 2, 1, "no draws"));
    }
    Ok(EccentricitySamples {
        table,
        companion,
        prior_spec,
        prior,
        converged,
        ess,
        least_squares_e,
        posterior_median,
        draws,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::posterior::parse_prior_spec;

    fn example() -> EccentricitySamples {
        let prior_spec = "uniform:0..0.99".to_string();
        EccentricitySamples {
            table: "star 1.csv".into(),
            companion: 2,
            prior: parse_prior_spec(&prior_spec).unwrap().validate().unwrap(),
            prior_spec,
            converged: true,
            ess: 812.5,
            least_squares_e: Some(0.31),
            posterior_median: 0.25,
            draws: vec![0.1, 0.25, 0.3, 0.15],
        }
    }

    #[test]
    fn samples_round_trip_through_ecsv() {
        let s = example();
        let text = write_samples_ecsv(&s);
        assert!(text.starts_with("# %ECSV 1.0\n"));
        let back = parse_samples_ecsv(&text, "x.ecsv").unwrap();
        assert_eq!(back, s);
    }

    #[test]
    fn prior_specs_round_trip() {
        for spec in [
            "uniform:0..0.99",
            "beta(0.867,3.03):0..0.99",
            "rayleigh(0.3):0..0.8",
            "halfnormal(0.2):0..0.99",
            "loguniform:0.001..0.99",
            "ecosw:0..0.99",
            "sqrtecosw:0..0.5",
        ] {
            let settings = parse_prior_spec(spec).unwrap();
            let text = prior_spec_text(&settings).unwrap();
            assert_eq!(
                parse_prior_spec(&text).unwrap(),
                settings,
                "{spec} -> {text}"
            );
        }
    }

    #[test]
    fn bad_files_get_one_located_line() {
        let text = write_samples_ecsv(&example());
        let bad_row = text.replace("\n0.25 ", "\n0.2x5 ");
        let err = parse_samples_ecsv(&bad_row, "s.ecsv")
            .unwrap_err()
            .to_string();
        let line = bad_row
            .lines()
            .position(|l| l.starts_with("0.2x5"))
            .unwrap()
            + 1;
        assert_eq!(err, format!("s.ecsv:{line}:1: `0.2x5` is not a number"));
        let wrong_prior = text.replace("'uniform:0..0.99'", "'uniform:0..0.5'");
        let err = parse_samples_ecsv(&wrong_prior, "s.ecsv")
            .unwrap_err()
            .to_string();
        assert!(err.contains("ln_prior") || err.contains("outside"), "{err}");
        let err = parse_samples_ecsv("e\n0.1\n", "s.csv")
            .unwrap_err()
            .to_string();
        assert!(err.starts_with("s.csv:1:1: not an ECSV file"), "{err}");
        let no_version = text.replace("{version: '1'}", "{version: '7'}");
        let err = parse_samples_ecsv(&no_version, "s.ecsv")
            .unwrap_err()
            .to_string();
        assert!(err.contains("version 7"), "{err}");
        assert!(!err.contains('\n'));
    }

    #[test]
    fn thinning_keeps_about_ess_draws_and_the_bound() {
        let draws: Vec<f64> = (0..1000).map(|i| i as f64 / 1000.0).collect();
        assert_eq!(thin_to_ess(&draws, 100.0, 4000).len(), 100);
        assert_eq!(thin_to_ess(&draws, 2000.0, 4000).len(), 1000);
        assert_eq!(thin_to_ess(&draws, 1000.0, 10).len(), 10);
        assert_eq!(thin_to_ess(&draws, f64::NAN, 4000).len(), 1000);
    }
}
