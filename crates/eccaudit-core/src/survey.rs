//! Surveys: the manifest of many velocity tables, the per-table audit settings, the catalogue
//! (one row per audited companion) and the deterministic split of the work into shards.
//!
//! Text in, text out: the command line (`eccaudit survey`, `eccaudit merge`) and the page read
//! the files and run the audits; this module decides what a manifest means, which settings each
//! table gets ([`entry_settings`], the one place the per-table choices map onto the audit),
//! which shard does which table ([`Shard`]), and the catalogue's rows and bytes
//! ([`catalogue_rows`], [`catalogue_csv`], [`catalogue_json`]), so a run split over a cluster's
//! job array merges into the same bytes as a run on one machine.

use std::fmt;
use std::str::FromStr;

use serde::{Deserialize, Serialize};
use thiserror::Error;

use crate::audit::{data_fingerprint, AuditReport, AuditSettings};
use crate::constants::JUPITER_MASS_IN_SOLAR_MASSES;
use crate::inject::trial_file::csv_line;
use crate::orbit::minimum_companion_mass;
use crate::table::{TimeSpec, VelocityUnit};

/// Most tables one manifest may list (a bound on what the manifest's size allocates).
pub const MAX_MANIFEST_TABLES: usize = 100_000;
/// Most shards of a split.
pub const MAX_SHARDS: usize = 100_000;
/// The `format` field of a survey index (`survey.json`).
pub const SURVEY_FORMAT: &str = "eccaudit-survey";

/// Columns a manifest may have (`table` is required, the others optional, in any order).
pub const MANIFEST_COLUMNS: [&str; 9] = [
    "table",
    "companions",
    "trend",
    "periods",
    "stellar_mass",
    "velocity_unit",
    "time",
    "min_period",
    "max_period",
];

/// A manifest or shard problem, with file, line and column where they apply.
#[derive(Debug, Clone, PartialEq, Error)]
pub enum SurveyError {
    /// A manifest cell or header is wrong.
    #[error("{source_name}:{line}:{column}: {message}")]
    Manifest {
        /// Manifest file name.
        source_name: String,
        /// 1-based line.
        line: u64,
        /// 1-based column.
        column: usize,
        /// What is wrong.
        message: String,
    },
    /// A shard text is not `I/N` with 0 ≤ I < N.
    #[error("shard `{0}`: expected I/N with 0 ≤ I < N ≤ {MAX_SHARDS} (e.g. 0/4)")]
    Shard(String),
    /// A table's choices cannot be mapped onto the audit settings of this build.
    #[error("{0}")]
    Unsupported(String),
}

/// One row of a manifest: a table and its own choices (`None`/empty = the survey's settings
/// or the table's header decide).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ManifestEntry {
    /// 1-based line of the row in the manifest.
    pub line: u64,
    /// Path of the table relative to the manifest, as written.
    pub table: String,
    /// Keplerian companions to fit.
    pub companions: Option<usize>,
    /// Fit a linear trend.
    pub trend: Option<bool>,
    /// Given starting periods [d], one per companion in order.
    pub periods: Vec<f64>,
    /// Stellar mass [M_sun], for m sin i.
    pub stellar_mass: Option<f64>,
    /// Velocity unit when the table's header does not state it.
    pub velocity_unit: Option<VelocityUnit>,
    /// Time convention when the table's header does not state it.
    pub time: Option<TimeSpec>,
    /// Shortest period searched [d].
    pub min_period: Option<f64>,
    /// Longest period searched [d].
    pub max_period: Option<f64>,
}

/// A parsed manifest: its tables in order.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Manifest {
    /// The rows.
    pub entries: Vec<ManifestEntry>,
}

/// Parses a survey manifest: CSV with a header naming [`MANIFEST_COLUMNS`] (`table` required;
/// names are case-insensitive; lines starting with `#` are comments). `periods` holds one or more
/// periods separated by `;` or spaces; `trend` is yes/no (true/false, 1/0). Errors name
/// `source_name`, the line and the column.
pub fn parse_manifest(text: &str, source_name: &str) -> Result<Manifest, SurveyError> {
    let err = |line: u64, column: usize, message: String| SurveyError::Manifest {
        source_name: source_name.to_string(),
        line,
        column,
        message,
    };
    let mut reader = csv::ReaderBuilder::new()
        .comment(Some(b'#'))
        .trim(csv::Trim::All)
        .flexible(true)
        .from_reader(text.as_bytes());
    let header = reader
        .headers()
        .map_err(|e| err(e.position().map_or(1, |p| p.line()), 1, e.to_string()))?
        .clone();
    let header_line = header.position().map_or(1, |p| p.line());
    let mut columns: Vec<usize> = Vec::new();
    for (i, name) in header.iter().enumerate() {
        let lower = name.to_ascii_lowercase();
        let Some(known) = MANIFEST_COLUMNS.iter().position(|c| *c == lower) else {
            return Err(err(
                header_line,
                i + 1,
                format!(
                    "unknown manifest column `{name}`; known columns: {}",
                    MANIFEST_COLUMNS.join(", ")
                ),
            ));
        };
        if columns.contains(&known) {
            return Err(err(header_line, i + 1, format!("column `{name}` repeated")));
        }
        columns.push(known);
    }
    if !columns.contains(&0) {
        return Err(err(
            header_line,
            1,
            "the manifest needs a `table` column (paths relative to the manifest)".into(),
        ));
    }
    let mut entries = Vec::new();
    for row in reader.records() {
        let row = row.map_err(|e| err(e.position().map_or(0, |p| p.line()), 1, e.to_string()))?;
        let line = row.position().map_or(0, |p| p.line());
        if row.iter().all(str::is_empty) {
            continue;
        }
        if row.len() != columns.len() {
            return Err(err(
                line,
                row.len().min(columns.len()) + 1,
                format!("{} fields, the header has {}", row.len(), columns.len()),
            ));
        }
        if entries.len() == MAX_MANIFEST_TABLES {
            return Err(err(
                line,
                1,
                format!("more than {MAX_MANIFEST_TABLES} tables"),
            ));
        }
        let mut entry = ManifestEntry {
            line,
            table: String::new(),
            companions: None,
            trend: None,
            periods: Vec::new(),
            stellar_mass: None,
            velocity_unit: None,
            time: None,
            min_period: None,
            max_period: None,
        };
        for (i, (value, &column)) in row.iter().zip(&columns).enumerate() {
            if value.is_empty() {
                continue;
            }
            let name = MANIFEST_COLUMNS[column];
            let bad = |what: &str| err(line, i + 1, format!("{name} `{value}`: {what}"));
            let positive = || -> Result<f64, SurveyError> {
                match value.parse::<f64>() {
                    Ok(v) if v.is_finite() && v > 0.0 => Ok(v),
                    _ => Err(bad("expected a number > 0")),
                }
            };
            match column {
                0 => entry.table = value.to_string(),
                1 => match value.parse::<usize>() {
                    Ok(n @ 1..=3) => entry.companions = Some(n),
                    _ => return Err(bad("expected 1, 2 or 3")),
                },
                2 => {
                    entry.trend = Some(match value.to_ascii_lowercase().as_str() {
                        "yes" | "true" | "1" => true,
                        "no" | "false" | "0" => false,
                        _ => return Err(bad("expected yes or no")),
                    })
                }
                3 => {
                    for part in value
                        .split(|c: char| c == ';' || c.is_whitespace())
                        .filter(|p| !p.is_empty())
                    {
                        match part.parse::<f64>() {
                            Ok(p) if p.is_finite() && p > 0.0 && entry.periods.len() < 3 => {
                                entry.periods.push(p)
                            }
                            _ => {
                                return Err(bad(
                                    "expected up to three periods > 0 [d] separated by `;`",
                                ))
                            }
                        }
                    }
                }
                4 => entry.stellar_mass = Some(positive()?),
                5 => {
                    entry.velocity_unit = Some(
                        value
                            .parse()
                            .map_err(|e: <VelocityUnit as FromStr>::Err| bad(&e.to_string()))?,
                    )
                }
                6 => {
                    entry.time = Some(
                        value
                            .parse()
                            .map_err(|e: <TimeSpec as FromStr>::Err| bad(&e.to_string()))?,
                    )
                }
                7 => entry.min_period = Some(positive()?),
                _ => entry.max_period = Some(positive()?),
            }
        }
        if entry.table.is_empty() {
            let column = columns.iter().position(|&c| c == 0).unwrap_or(0) + 1;
            return Err(err(line, column, "no table path".into()));
        }
        if let (Some(n), false) = (entry.companions, entry.periods.is_empty()) {
            if entry.periods.len() > n {
                let column = columns.iter().position(|&c| c == 3).unwrap_or(0) + 1;
                return Err(err(
                    line,
                    column,
                    format!("{} periods for {n} companion(s)", entry.periods.len()),
                ));
            }
        }
        entries.push(entry);
    }
    if entries.is_empty() {
        return Err(err(header_line, 1, "the manifest lists no tables".into()));
    }
    Ok(Manifest { entries })
}

/// The audit settings of one table: the survey's `base` settings with the table's own choices
/// (companions, given periods, trend and period range go into the model spec; unit and time
/// convention into the reading settings). The spec is checked when the audit is planned.
pub fn entry_settings(
    entry: &ManifestEntry,
    base: &AuditSettings,
) -> Result<AuditSettings, SurveyError> {
    let mut settings = base.clone();
    let model = &mut settings.model;
    if let Some(n) = entry.companions {
        model.companions = n;
    }
    if !entry.periods.is_empty() {
        model.periods = entry.periods.clone();
        model.companions = model.companions.max(entry.periods.len());
    }
    if let Some(trend) = entry.trend {
        model.trend = trend;
    }
    if let Some(p) = entry.min_period {
        model.min_period = p;
    }
    if let Some(p) = entry.max_period {
        model.max_period = Some(p);
    }
    if entry.velocity_unit.is_some() {
        settings.read.velocity_unit = entry.velocity_unit;
    }
    if entry.time.is_some() {
        settings.read.time = entry.time;
    }
    settings.model.validate().map_err(|e| {
        SurveyError::Unsupported(format!("manifest line {}: model: {e}", entry.line))
    })?;
    Ok(settings)
}

/// The folder of table number `index` (0-based) of a survey of `n_tables`: the 1-based number,
/// zero-padded to at least three digits, and the table's file stem (characters other than
/// letters, digits, `-`, `_` and `.` become `_`), e.g. `007-hd1234`.
pub fn table_folder(index: usize, n_tables: usize, table: &str) -> String {
    let width = n_tables.to_string().len().max(3);
    let base = table.rsplit(['/', '\\']).next().unwrap_or(table);
    let stem = match base.rfind('.') {
        Some(dot) if dot > 0 => &base[..dot],
        _ => base,
    };
    let stem: String = stem
        .chars()
        .map(|c| {
            if c.is_ascii_alphanumeric() || matches!(c, '-' | '_' | '.') {
                c
            } else {
                '_'
            }
        })
        .collect();
    format!("{:0width$}-{stem}", index + 1)
}

/// One table of a survey index.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct SurveyTable {
    /// Table path as written in the manifest.
    pub table: String,
    /// Its output folder ([`table_folder`]).
    pub folder: String,
}

/// What a survey's output folder holds (`survey.json`): the manifest and settings it was made
/// from and its tables in order. Every shard writes the same index, so `eccaudit merge` can
/// check the shards belong together and assemble the catalogue in manifest order.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct SurveyIndex {
    /// Always [`SURVEY_FORMAT`].
    pub format: String,
    /// Index version (1).
    pub version: u32,
    /// Manifest file name (informative).
    pub manifest: String,
    /// SHA-256 of the manifest's bytes.
    pub manifest_sha256: String,
    /// SHA-256 of the survey-wide audit settings (JSON), before each table's own choices.
    pub settings_sha256: String,
    /// The tables, in manifest order.
    pub tables: Vec<SurveyTable>,
}

impl SurveyIndex {
    /// The index of `manifest` (read from `manifest_text`, named `manifest_name`) with the
    /// survey-wide settings `base`.
    pub fn new(
        manifest_name: &str,
        manifest_text: &str,
        manifest: &Manifest,
        base: &AuditSettings,
    ) -> Self {
        let n = manifest.entries.len();
        SurveyIndex {
            format: SURVEY_FORMAT.to_string(),
            version: 1,
            manifest: manifest_name.to_string(),
            manifest_sha256: data_fingerprint(manifest_text.as_bytes()),
            settings_sha256: data_fingerprint(base.to_json().as_bytes()),
            tables: manifest
                .entries
                .iter()
                .enumerate()
                .map(|(i, e)| SurveyTable {
                    table: e.table.clone(),
                    folder: table_folder(i, n, &e.table),
                })
                .collect(),
        }
    }

    /// Pretty JSON with a final line break.
    pub fn to_json(&self) -> String {
        let mut out = serde_json::to_string_pretty(self).expect("the index always serialises");
        out.push('\n');
        out
    }

    /// Reads an index; refuses another format.
    pub fn from_json(text: &str) -> Result<Self, String> {
        let index: SurveyIndex = serde_json::from_str(text).map_err(|e| e.to_string())?;
        if index.format != SURVEY_FORMAT {
            return Err(format!("\"format\" is not \"{SURVEY_FORMAT}\""));
        }
        Ok(index)
    }
}

/// One slice of a split: shard `index` of `count` does the items `i` with `i mod count = index`
/// (interleaved, so slow and fast items spread evenly).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
pub struct Shard {
    /// 0-based shard number.
    pub index: usize,
    /// Shards in the split (≥ 1).
    pub count: usize,
}

impl Shard {
    /// The whole work in one shard.
    pub const WHOLE: Shard = Shard { index: 0, count: 1 };

    /// A checked shard.
    pub fn new(index: usize, count: usize) -> Result<Shard, SurveyError> {
        if count == 0 || count > MAX_SHARDS || index >= count {
            return Err(SurveyError::Shard(format!("{index}/{count}")));
        }
        Ok(Shard { index, count })
    }

    /// Whether item `i` belongs to this shard.
    pub fn contains(&self, i: u64) -> bool {
        i % self.count as u64 == self.index as u64
    }

    /// True for a split into more than one shard.
    pub fn is_split(&self) -> bool {
        self.count > 1
    }
}

impl FromStr for Shard {
    type Err = SurveyError;
    fn from_str(text: &str) -> Result<Self, Self::Err> {
        let bad = || SurveyError::Shard(text.to_string());
        let (i, n) = text.trim().split_once('/').ok_or_else(bad)?;
        let index = i.trim().parse::<usize>().map_err(|_| bad())?;
        let count = n.trim().parse::<usize>().map_err(|_| bad())?;
        Shard::new(index, count).map_err(|_| bad())
    }
}

impl fmt::Display for Shard {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}/{}", self.index, self.count)
    }
}

/// One catalogue row: one audited companion of one table, or one table that could not be
/// audited (`status` = `error`, the reason in `error` with file, line and column).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct CatalogueRow {
    /// Table path as written in the manifest.
    pub table: String,
    /// Output folder of the table.
    pub folder: String,
    /// `ok`, `partial` (not every trial done) or `error`.
    pub status: String,
    /// 1-based companion number (absent for an error).
    pub companion: Option<usize>,
    /// Fitted period [d].
    pub period: Option<f64>,
    /// Its formal 1σ error [d].
    pub period_error: Option<f64>,
    /// Fitted semi-amplitude K [m/s].
    pub semi_amplitude: Option<f64>,
    /// Its formal 1σ error [m/s].
    pub semi_amplitude_error: Option<f64>,
    /// Least-squares (minimum χ²) eccentricity of the eccentric fit.
    pub lsq_e: Option<f64>,
    /// Its formal 1σ error.
    pub lsq_e_error: Option<f64>,
    /// The estimator quoted: the statement's recommended estimator (its stated rule: smallest
    /// RMSE over the belt-consistent range, or the user's `--estimator`).
    pub estimator: Option<String>,
    /// Its value on the real data.
    pub e: Option<f64>,
    /// Its simulated bias at the injected e nearest `e` (mean estimate − true e).
    pub bias: Option<f64>,
    /// The bias's Monte-Carlo standard error.
    pub bias_error: Option<f64>,
    /// Lower end of its calibrated 95% interval on the true e (the inverted simulated confidence
    /// belt, Feldman & Cousins 1998 ordering; 0 for an upper limit).
    pub e_low95: Option<f64>,
    /// Upper end of that interval.
    pub e_high95: Option<f64>,
    /// True when the interval reaches the top of the simulated grid.
    pub e_open_above: Option<bool>,
    /// Circular orbit excluded at the 5% level by the statement's calibrated decision (the
    /// Monte-Carlo p of the circular simulations of the full model ≤ 0.05).
    pub circular_excluded: Option<bool>,
    /// Lucy–Sweeney p of the real data (two-dimensional Wald form; asymptotic, not calibrated).
    pub circular_p: Option<f64>,
    /// The calibrated decision's Monte-Carlo p: share of the circular simulations whose decision
    /// statistic is at least as extreme as the real data's.
    pub circular_mc_p: Option<f64>,
    /// m sin i [Jupiter masses], when the manifest gives a stellar mass.
    pub m_sin_i_mjup: Option<f64>,
    /// Trials done.
    pub trials_done: Option<u64>,
    /// Trials planned.
    pub trials_total: Option<u64>,
    /// Things to look at: `excess_scatter` (the audit's scatter warning: χ² test of the model),
    /// `marginal_period` (false-alarm probability above the model's limit), `jitter_fitted`
    /// (scatter beyond the error bars, absorbed by a fitted jitter), `fit_unconverged`,
    /// `fit_warnings`, `unconverged_posterior`, `open_above_grid`, `partial`.
    pub flags: Vec<String>,
    /// Why the table could not be audited.
    pub error: Option<String>,
}

/// The catalogue rows of one audited table (one per audited companion).
pub fn catalogue_rows(
    table: &str,
    folder: &str,
    report: &AuditReport,
    stellar_mass: Option<f64>,
) -> Vec<CatalogueRow> {
    let fit = &report.fit;
    let solution = &fit.eccentric;
    let statement = &report.statement;
    let context = &report.context;
    let companion = context.companion.saturating_sub(1);
    let Some(c) = solution.companions.get(companion) else {
        return vec![error_row(table, folder, "the fit has no such companion")];
    };
    // The statement's recommended estimator (its stated rule, or the user's choice).
    let recommended = statement
        .recommended
        .as_ref()
        .and_then(|name| statement.rows.iter().find(|r| &r.name == name));
    let interval = recommended.and_then(|r| r.interval);
    let decision = statement.decision.as_ref();
    let mut flags = Vec::new();
    if context.scatter_warning.is_some() {
        flags.push("excess_scatter".to_string());
    }
    if context.detection.marginal {
        flags.push("marginal_period".to_string());
    }
    if context.jitter_fitted {
        flags.push("jitter_fitted".to_string());
    }
    if !solution.converged {
        flags.push("fit_unconverged".to_string());
    }
    if !fit.warnings.is_empty() {
        flags.push("fit_warnings".to_string());
    }
    // A posterior estimator whose run on the real data did not meet its convergence rule has
    // no value in the statement (its note says why).
    let posterior_unconverged = statement
        .rows
        .iter()
        .any(|r| r.name.starts_with("posterior_") && r.value.is_none());
    if posterior_unconverged {
        flags.push("unconverged_posterior".to_string());
    }
    if interval.is_some_and(|i| i.open_above) {
        flags.push("open_above_grid".to_string());
    }
    let partial = report.trials_done < report.trials_total;
    if partial {
        flags.push("partial".to_string());
    }
    let m_sin_i = stellar_mass.and_then(|m| {
        minimum_companion_mass(c.mass_function, m)
            .ok()
            .map(|msun| msun / JUPITER_MASS_IN_SOLAR_MASSES)
    });
    vec![CatalogueRow {
        table: table.to_string(),
        folder: folder.to_string(),
        status: if partial { "partial" } else { "ok" }.to_string(),
        companion: Some(companion + 1),
        period: Some(c.period.value),
        period_error: c.period.error,
        semi_amplitude: Some(c.semi_amplitude.value),
        semi_amplitude_error: c.semi_amplitude.error,
        lsq_e: Some(c.eccentricity.value),
        lsq_e_error: c.eccentricity.error,
        estimator: recommended.map(|r| r.name.clone()),
        e: recommended.and_then(|r| r.value),
        bias: recommended.map(|r| r.bias),
        bias_error: recommended.map(|r| r.bias_standard_error),
        e_low95: interval.map(|i| i.lower),
        e_high95: interval.map(|i| i.upper),
        e_open_above: interval.map(|i| i.open_above),
        circular_excluded: decision.map(|d| d.circular_excluded),
        circular_p: statement.fitted.lucy_sweeney_p,
        circular_mc_p: decision.map(|d| d.p.value),
        m_sin_i_mjup: m_sin_i,
        trials_done: Some(report.trials_done),
        trials_total: Some(report.trials_total),
        flags,
        error: None,
    }]
}

/// The catalogue row of a table that could not be audited.
pub fn error_row(table: &str, folder: &str, message: &str) -> CatalogueRow {
    CatalogueRow {
        table: table.to_string(),
        folder: folder.to_string(),
        status: "error".to_string(),
        companion: None,
        period: None,
        period_error: None,
        semi_amplitude: None,
        semi_amplitude_error: None,
        lsq_e: None,
        lsq_e_error: None,
        estimator: None,
        e: None,
        bias: None,
        bias_error: None,
        e_low95: None,
        e_high95: None,
        e_open_above: None,
        circular_excluded: None,
        circular_p: None,
        circular_mc_p: None,
        m_sin_i_mjup: None,
        trials_done: None,
        trials_total: None,
        flags: Vec::new(),
        error: Some(message.to_string()),
    }
}

/// Column names of the catalogue CSV, in order.
pub const CATALOGUE_COLUMNS: [&str; 25] = [
    "table",
    "folder",
    "status",
    "companion",
    "period",
    "period_error",
    "semi_amplitude",
    "semi_amplitude_error",
    "lsq_e",
    "lsq_e_error",
    "estimator",
    "e",
    "bias",
    "bias_error",
    "e_low95",
    "e_high95",
    "e_open_above",
    "circular_excluded",
    "circular_p",
    "circular_mc_p",
    "m_sin_i_mjup",
    "trials_done",
    "trials_total",
    "flags",
    "error",
];

fn opt<T: ToString>(v: &Option<T>) -> String {
    v.as_ref().map_or(String::new(), T::to_string)
}

/// A number in its shortest round-trip form: plain (0.15) from 10⁻⁵ to 10¹⁶, else with an
/// exponent (1.5e-77) instead of a long run of zeros.
pub fn number_text(v: f64) -> String {
    let a = v.abs();
    if a != 0.0 && a.is_finite() && !(1e-5..1e16).contains(&a) {
        format!("{v:e}")
    } else {
        v.to_string()
    }
}

fn num(v: &Option<f64>) -> String {
    v.map_or(String::new(), number_text)
}

fn yes_no(v: Option<bool>) -> String {
    match v {
        Some(true) => "yes".into(),
        Some(false) => "no".into(),
        None => String::new(),
    }
}

/// The catalogue as CSV: header and one line per row, numbers in shortest round-trip form,
/// flags joined by `;`, fields quoted only where needed (RFC 4180).
pub fn catalogue_csv(rows: &[CatalogueRow]) -> String {
    let header: Vec<String> = CATALOGUE_COLUMNS.iter().map(|s| s.to_string()).collect();
    let mut out = csv_line(&header);
    for r in rows {
        let fields = vec![
            r.table.clone(),
            r.folder.clone(),
            r.status.clone(),
            opt(&r.companion),
            num(&r.period),
            num(&r.period_error),
            num(&r.semi_amplitude),
            num(&r.semi_amplitude_error),
            num(&r.lsq_e),
            num(&r.lsq_e_error),
            opt(&r.estimator),
            num(&r.e),
            num(&r.bias),
            num(&r.bias_error),
            num(&r.e_low95),
            num(&r.e_high95),
            yes_no(r.e_open_above),
            yes_no(r.circular_excluded),
            num(&r.circular_p),
            num(&r.circular_mc_p),
            num(&r.m_sin_i_mjup),
            opt(&r.trials_done),
            opt(&r.trials_total),
            r.flags.join(";"),
            opt(&r.error),
        ];
        out.push_str(&csv_line(&fields));
    }
    out
}

/// The catalogue as pretty JSON (an array of rows) with a final line break.
pub fn catalogue_json(rows: &[CatalogueRow]) -> String {
    let mut out = serde_json::to_string_pretty(rows).expect("catalogue rows always serialise");
    out.push('\n');
    out
}

/// Rows read back from [`catalogue_json`] text (a table folder's own rows, or a catalogue).
pub fn rows_from_json(text: &str) -> Result<Vec<CatalogueRow>, String> {
    serde_json::from_str(text).map_err(|e| e.to_string())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn manifest_reads_choices_and_names_bad_cells() {
        let text = "# survey of three stars\nTable,trend,stellar_mass,velocity_unit,time\n\
                    a/star1.csv,yes,1.02,km/s,BJD\n star2.tsv ,,,,\n";
        let m = parse_manifest(text, "m.csv").unwrap();
        assert_eq!(m.entries.len(), 2);
        let e = &m.entries[0];
        assert_eq!(e.table, "a/star1.csv");
        assert_eq!(e.line, 3);
        assert_eq!(e.trend, Some(true));
        assert_eq!(e.stellar_mass, Some(1.02));
        assert_eq!(e.velocity_unit, Some(VelocityUnit::KilometresPerSecond));
        assert_eq!(m.entries[1].table, "star2.tsv");
        assert_eq!(m.entries[1].line, 4);

        let err = parse_manifest("table,mass\nx.csv,1\n", "m.csv")
            .unwrap_err()
            .to_string();
        assert!(
            err.starts_with("m.csv:1:2: unknown manifest column `mass`"),
            "{err}"
        );
        let err = parse_manifest("table,stellar_mass\nx.csv,1\ny.csv,heavy\n", "m.csv")
            .unwrap_err()
            .to_string();
        assert!(err.starts_with("m.csv:3:2: stellar_mass `heavy`"), "{err}");
        let err = parse_manifest("table,companions,periods\nx.csv,1,3;5\n", "m.csv")
            .unwrap_err()
            .to_string();
        assert!(
            err.starts_with("m.csv:2:3: 2 periods for 1 companion"),
            "{err}"
        );
        let err = parse_manifest("trend\nyes\n", "m.csv")
            .unwrap_err()
            .to_string();
        assert!(err.contains("needs a `table` column"), "{err}");
        let err = parse_manifest("table,trend\nx.csv\n", "m.csv")
            .unwrap_err()
            .to_string();
        assert!(err.starts_with("m.csv:2:2: 1 fields"), "{err}");
    }

    #[test]
    fn entry_settings_apply_the_row() {
        let m = parse_manifest("table,trend,max_period,time\nx.csv,yes,300,MJD\n", "m").unwrap();
        let s = entry_settings(&m.entries[0], &AuditSettings::default()).unwrap();
        assert_eq!(s.model.max_period, Some(300.0));
        assert!(s.read.time.is_some());
        assert!(s.model.trend);
        let m = parse_manifest("table,companions,periods\nx.csv,2,12.5\n", "m").unwrap();
        let s = entry_settings(&m.entries[0], &AuditSettings::default()).unwrap();
        assert_eq!(
            (s.model.companions, s.model.periods.clone()),
            (2, vec![12.5])
        );
        let m = parse_manifest("table,min_period,max_period\nx.csv,50,10\n", "m").unwrap();
        let err = entry_settings(&m.entries[0], &AuditSettings::default()).unwrap_err();
        assert!(
            err.to_string().starts_with("manifest line 2: model:"),
            "{err}"
        );
    }

    #[test]
    fn shards_split_evenly_and_parse() {
        let s: Shard = "1/3".parse().unwrap();
        let mine: Vec<u64> = (0..10).filter(|&i| s.contains(i)).collect();
        assert_eq!(mine, [1, 4, 7]);
        // Every item belongs to exactly one shard.
        for i in 0..50 {
            assert_eq!(
                (0..4)
                    .filter(|&k| Shard::new(k, 4).unwrap().contains(i))
                    .count(),
                1
            );
        }
        for bad in ["3/3", "1", "a/2", "0/0", "-1/2"] {
            assert!(bad.parse::<Shard>().is_err(), "{bad}");
        }
        assert_eq!(s.to_string(), "1/3");
    }

    #[test]
    fn folders_are_numbered_and_safe() {
        assert_eq!(table_folder(6, 12, "data/HD 1234.csv"), "007-HD_1234");
        assert_eq!(table_folder(0, 1500, "x.tsv"), "0001-x");
    }

    #[test]
    fn catalogue_csv_and_json_round_trip() {
        let rows = vec![error_row("bad.csv", "001-bad", "bad.csv:4:2: not a number")];
        let csv = catalogue_csv(&rows);
        assert!(csv.starts_with("table,folder,status,companion,period,"));
        assert!(csv.ends_with(",,bad.csv:4:2: not a number\n"), "{csv}");
        assert_eq!(rows_from_json(&catalogue_json(&rows)).unwrap(), rows);
        assert_eq!(number_text(0.15), "0.15");
        assert_eq!(number_text(15.0), "15");
        assert_eq!(
            number_text(1.5939935628679599e-77),
            "1.5939935628679599e-77"
        );
        assert_eq!(number_text(-2.5e-6), "-2.5e-6");
    }
}
