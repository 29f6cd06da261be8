//! The trial file: the one text format of injection–recovery trials, written by `eccaudit
//! inject`/`audit`/`survey`, read back by `--resume` and `eccaudit merge`, offered by the page.
//!
//! Layout (text in, text out; no I/O here):
//!
//! ```text
//! # eccaudit inject fingerprint=<16 hex digits> trials=<planned trials>
//! trial,cell,true_e,true_k,true_omega,true_mean_anomaly,<output>_status,<output>_point,…
//! 0,0,0,15,…
//! ```
//!
//! The first line names the settings ([`super::settings_fingerprint`]) and the planned trial
//! count; the header names the columns of the estimators' outputs ([`csv_header`]); each row
//! is one [`TrialRecord`] ([`record_to_csv_row`]), numbers in Rust's shortest round-trip form so a
//! row read back gives the same bits. A complete file ([`write_trial_file`]) holds each trial
//! once, in trial order. A file being appended to may end in a row cut short by an interruption
//! (no final line break): [`read_trial_file`] drops it. Fields are quoted only when they hold a
//! comma, a quote or a line break (RFC 4180), so the command line and the page write the same
//! bytes.

use thiserror::Error;

use super::engine::{Outcome, TrialRecord};
use super::estimators::{all_outputs, EccentricityEstimate, Estimator};
use super::InjectError;

/// First characters of a trial file; the fingerprint and the planned trial count follow.
pub const TRIAL_FILE_MAGIC: &str = "# eccaudit inject";

/// Why a trial file cannot be read.
#[derive(Debug, Clone, PartialEq, Error)]
pub enum TrialFileError {
    /// The first line is not a trial-file line.
    #[error("`{source_name}` is not a trial file of eccaudit (line 1 is `{first_line}`)")]
    NotATrialFile {
        /// File name in messages.
        source_name: String,
        /// Its first line (at most 80 characters).
        first_line: String,
    },
    /// The first line lacks a fingerprint or a trial count.
    #[error("`{source_name}` line 1: {reason}")]
    BadFirstLine {
        /// File name in messages.
        source_name: String,
        /// What is missing.
        reason: String,
    },
    /// The file was made with other settings.
    #[error(
        "`{source_name}` was made with other settings (fingerprint {found}, these settings \
         {expected}); use the same table, grid, seed and estimator options"
    )]
    OtherSettings {
        /// File name in messages.
        source_name: String,
        /// Fingerprint in the file.
        found: String,
        /// Fingerprint of these settings.
        expected: String,
    },
    /// The column header differs from these estimators'.
    #[error("`{source_name}` line 2: the columns differ from this run's (column {column}: `{found}`, expected `{expected}`)")]
    Columns {
        /// File name in messages.
        source_name: String,
        /// 1-based column of the first difference.
        column: usize,
        /// The file's column name there (empty if missing).
        found: String,
        /// The expected name (empty if the file has more columns).
        expected: String,
    },
    /// The CSV itself cannot be read.
    #[error("`{source_name}` line {line}: {reason}")]
    Csv {
        /// File name in messages.
        source_name: String,
        /// 1-based line.
        line: u64,
        /// The CSV reader's complaint.
        reason: String,
    },
    /// A row cannot be read as a trial.
    #[error("`{source_name}`: {error}")]
    Row {
        /// File name in messages.
        source_name: String,
        /// The row's error (with line and column).
        error: InjectError,
    },
}

/// The first line and header of a trial file read back.
#[derive(Debug, Clone, PartialEq)]
pub struct TrialFileHead {
    /// Settings fingerprint.
    pub fingerprint: String,
    /// Planned trials of the whole run.
    pub n_trials: u64,
}

/// A trial file read back: its first line and its complete rows, sorted by trial index, each
/// trial once (the first row of a repeated index is kept), indices beyond the planned count
/// dropped.
#[derive(Debug, Clone, PartialEq)]
pub struct TrialFile {
    /// The first line.
    pub head: TrialFileHead,
    /// The records.
    pub records: Vec<TrialRecord>,
}

/// The first line of a trial file, with its line break.
pub fn first_line(fingerprint: &str, n_trials: u64) -> String {
    format!("{TRIAL_FILE_MAGIC} fingerprint={fingerprint} trials={n_trials}\n")
}

/// One CSV line with its line break: fields joined by commas, a field quoted (quotes doubled)
/// only when it holds a comma, a quote or a line break (RFC 4180).
pub fn csv_line(fields: &[String]) -> String {
    let mut out = String::new();
    for (i, field) in fields.iter().enumerate() {
        if i > 0 {
            out.push(',');
        }
        if field.contains([',', '"', '\n', '\r']) {
            out.push('"');
            out.push_str(&field.replace('"', "\"\""));
            out.push('"');
        } else {
            out.push_str(field);
        }
    }
    out.push('\n');
    out
}

/// The start of a trial file: first line and column header.
pub fn file_start(fingerprint: &str, n_trials: u64, estimators: &[&dyn Estimator]) -> String {
    let mut out = first_line(fingerprint, n_trials);
    out.push_str(&csv_line(&csv_header(estimators)));
    out
}

/// One record as a line of the trial file (to append while a run goes on).
pub fn row_line(record: &TrialRecord, estimators: &[&dyn Estimator]) -> String {
    csv_line(&record_to_csv_row(record, estimators))
}

/// Sorts by trial index and keeps the first record of each index: the normal form of a trial
/// set. `n_trials` is the planned count of base trials; indices at or beyond it are the extra
/// (adaptive) trials of [`crate::inject::adaptive`] and are kept (the caller, which knows the
/// design, drops any whose cell it lacks: `InjectionDesign::has_trial`).
pub fn normalise_records(records: &mut Vec<TrialRecord>, n_trials: u64) {
    let _ = n_trials;
    records.sort_by_key(|r| r.trial);
    records.dedup_by_key(|r| r.trial);
}

/// A complete trial file: first line, header, and `records` in trial order, each index once
/// (the first of repeated indices); `n_trials` (the base trials planned) goes on the first line.
pub fn write_trial_file(
    fingerprint: &str,
    n_trials: u64,
    estimators: &[&dyn Estimator],
    records: &[TrialRecord],
) -> String {
    let mut sorted: Vec<&TrialRecord> = records.iter().collect();
    sorted.sort_by_key(|r| r.trial);
    sorted.dedup_by_key(|r| r.trial);
    let mut out = file_start(fingerprint, n_trials, estimators);
    for r in sorted {
        out.push_str(&row_line(r, estimators));
    }
    out
}

/// Reads the first line of a trial file (fingerprint and planned trials).
pub fn read_head(text: &str, source_name: &str) -> Result<TrialFileHead, TrialFileError> {
    let first = text.lines().next().unwrap_or("");
    let Some(rest) = first.strip_prefix(TRIAL_FILE_MAGIC) else {
        return Err(TrialFileError::NotATrialFile {
            source_name: source_name.to_string(),
            first_line: first.chars().take(80).collect(),
        });
    };
    let word = |key: &str| rest.split_whitespace().find_map(|w| w.strip_prefix(key));
    let bad = |reason: &str| TrialFileError::BadFirstLine {
        source_name: source_name.to_string(),
        reason: reason.to_string(),
    };
    let fingerprint = word("fingerprint=").ok_or_else(|| bad("no `fingerprint=`"))?;
    let n_trials = word("trials=")
        .ok_or_else(|| bad("no `trials=`"))?
        .parse::<u64>()
        .map_err(|_| bad("`trials=` is not a whole number"))?;
    Ok(TrialFileHead {
        fingerprint: fingerprint.to_string(),
        n_trials,
    })
}

/// Reads a trial file written for `estimators`. When `expected_fingerprint` is given, a file
/// made with other settings is refused. A last row without its line break (cut short by an
/// interruption) is dropped; the rest is returned in normal form ([`normalise_records`]).
/// Errors name `source_name`, the line and the column.
pub fn read_trial_file(
    text: &str,
    source_name: &str,
    estimators: &[&dyn Estimator],
    expected_fingerprint: Option<&str>,
) -> Result<TrialFile, TrialFileError> {
    let head = read_head(text, source_name)?;
    if let Some(expected) = expected_fingerprint {
        if head.fingerprint != expected {
            return Err(TrialFileError::OtherSettings {
                source_name: source_name.to_string(),
                found: head.fingerprint,
                expected: expected.to_string(),
            });
        }
    }
    // A row cut short by an interruption has no final line break: drop it.
    let complete = match text.rfind('\n') {
        Some(i) => &text[..=i],
        None => "",
    };
    let csv_error = |e: csv::Error| TrialFileError::Csv {
        source_name: source_name.to_string(),
        line: e.position().map_or(0, |p| p.line()),
        reason: e.to_string(),
    };
    let mut reader = csv::ReaderBuilder::new()
        .comment(Some(b'#'))
        .from_reader(complete.as_bytes());
    let found: Vec<String> = reader
        .headers()
        .map_err(csv_error)?
        .iter()
        .map(str::to_string)
        .collect();
    let expected = csv_header(estimators);
    if found != expected {
        let column = found
            .iter()
            .zip(&expected)
            .position(|(a, b)| a != b)
            .unwrap_or(found.len().min(expected.len()));
        return Err(TrialFileError::Columns {
            source_name: source_name.to_string(),
            column: column + 1,
            found: found.get(column).cloned().unwrap_or_default(),
            expected: expected.get(column).cloned().unwrap_or_default(),
        });
    }
    let mut records = Vec::new();
    for row in reader.records() {
        let row = row.map_err(csv_error)?;
        let line = row.position().map_or(0, |p| p.line());
        let fields: Vec<&str> = row.iter().collect();
        records.push(
            record_from_csv_row(&fields, estimators, line).map_err(|error| {
                TrialFileError::Row {
                    source_name: source_name.to_string(),
                    error,
                }
            })?,
        );
    }
    normalise_records(&mut records, head.n_trials);
    Ok(TrialFile { head, records })
}

/// Merges trial files of the same run (shards, or pieces of an interrupted run) given as
/// `(name, text)` pairs: the first lines and column headers must agree; each file's cut-short
/// last row is dropped; the result is the complete-file form ([`write_trial_file`]): every
/// trial once, in order (indices beyond the planned count, the extra trials an adaptive run
/// adds, are kept like the others). Works on the text alone (no estimators needed), so the rows come out
/// byte for byte as written. Returns the text and the number of distinct trials.
pub fn merge_trial_files(files: &[(&str, &str)]) -> Result<(String, u64), TrialFileError> {
    let Some((first_name, first_text)) = files.first() else {
        return Err(TrialFileError::NotATrialFile {
            source_name: "(no files)".into(),
            first_line: String::new(),
        });
    };
    let head = read_head(first_text, first_name)?;
    let mut header: Option<Vec<String>> = None;
    let mut rows: Vec<(u64, String)> = Vec::new();
    for (name, text) in files {
        let this = read_head(text, name)?;
        if this.fingerprint != head.fingerprint || this.n_trials != head.n_trials {
            return Err(TrialFileError::OtherSettings {
                source_name: name.to_string(),
                found: format!("{} ({} trials)", this.fingerprint, this.n_trials),
                expected: format!(
                    "{} ({} trials) of `{first_name}`",
                    head.fingerprint, head.n_trials
                ),
            });
        }
        let complete = match text.rfind('\n') {
            Some(i) => &text[..=i],
            None => "",
        };
        let csv_error = |e: csv::Error| TrialFileError::Csv {
            source_name: name.to_string(),
            line: e.position().map_or(0, |p| p.line()),
            reason: e.to_string(),
        };
        let mut reader = csv::ReaderBuilder::new()
            .comment(Some(b'#'))
            .from_reader(complete.as_bytes());
        let columns: Vec<String> = reader
            .headers()
            .map_err(csv_error)?
            .iter()
            .map(str::to_string)
            .collect();
        match &header {
            None => header = Some(columns),
            Some(h) if *h != columns => {
                let column = h
                    .iter()
                    .zip(&columns)
                    .position(|(a, b)| a != b)
                    .unwrap_or(h.len().min(columns.len()));
                return Err(TrialFileError::Columns {
                    source_name: name.to_string(),
                    column: column + 1,
                    found: columns.get(column).cloned().unwrap_or_default(),
                    expected: h.get(column).cloned().unwrap_or_default(),
                });
            }
            Some(_) => {}
        }
        for row in reader.records() {
            let row = row.map_err(csv_error)?;
            let line = row.position().map_or(0, |p| p.line());
            let field = row.get(0).unwrap_or("");
            let trial = field
                .trim()
                .parse::<u64>()
                .map_err(|_| TrialFileError::Row {
                    source_name: name.to_string(),
                    error: InjectError::CsvRow {
                        line,
                        column: "trial".into(),
                        value: field.to_string(),
                        reason: "not a whole number".into(),
                    },
                })?;
            let fields: Vec<String> = row.iter().map(str::to_string).collect();
            rows.push((trial, csv_line(&fields)));
        }
    }
    rows.sort_by_key(|r| r.0);
    rows.dedup_by_key(|r| r.0);
    let mut out = first_line(&head.fingerprint, head.n_trials);
    out.push_str(&csv_line(&header.unwrap_or_default()));
    for (_, line) in &rows {
        out.push_str(line);
    }
    Ok((out, rows.len() as u64))
}

/// Header of the trial CSV for these estimators.
pub fn csv_header(estimators: &[&dyn Estimator]) -> Vec<String> {
    let mut header: Vec<String> = [
        "trial",
        "cell",
        "true_e",
        "true_k",
        "true_omega",
        "true_mean_anomaly",
    ]
    .iter()
    .map(|s| s.to_string())
    .collect();
    for output in all_outputs(estimators) {
        let n = &output.name;
        for column in [
            "status",
            "point",
            "lower68",
            "upper68",
            "lower95",
            "upper95",
            "eccentric",
        ] {
            header.push(format!("{n}_{column}"));
        }
        for extra in &output.extra_names {
            header.push(format!("{n}_{extra}"));
        }
    }
    header
}

/// A record as CSV fields (floats in Rust's shortest round-trip form, so a row read back gives
/// the same bits).
pub fn record_to_csv_row(record: &TrialRecord, estimators: &[&dyn Estimator]) -> Vec<String> {
    let mut row = vec![
        record.trial.to_string(),
        record.cell.to_string(),
        record.eccentricity.to_string(),
        record.semi_amplitude.to_string(),
        record.omega.to_string(),
        record.mean_anomaly.to_string(),
    ];
    for (output, outcome) in all_outputs(estimators).iter().zip(&record.outcomes) {
        match outcome {
            Outcome::Estimate(e) => {
                row.push("ok".into());
                for v in [e.point, e.lower68, e.upper68, e.lower95, e.upper95] {
                    row.push(v.to_string());
                }
                row.push(match e.calls_eccentric {
                    Some(true) => "1".into(),
                    Some(false) => "0".into(),
                    None => String::new(),
                });
                row.extend(e.extra.iter().map(f64::to_string));
            }
            Outcome::Failed(message) => {
                row.push(format!("failed: {message}"));
                row.extend((0..6 + output.extra_names.len()).map(|_| String::new()));
            }
            Outcome::Skipped => {
                row.push("skipped".into());
                row.extend((0..6 + output.extra_names.len()).map(|_| String::new()));
            }
        }
    }
    row
}

/// Reads a record back from CSV fields written by [`record_to_csv_row`]. `line` (1-based) is
/// only used in error messages.
pub fn record_from_csv_row(
    fields: &[&str],
    estimators: &[&dyn Estimator],
    line: u64,
) -> Result<TrialRecord, InjectError> {
    let header = csv_header(estimators);
    if fields.len() != header.len() {
        return Err(InjectError::CsvRow {
            line,
            column: String::new(),
            value: format!("{} fields", fields.len()),
            reason: format!("expected {} fields", header.len()),
        });
    }
    let float = |i: usize| -> Result<f64, InjectError> {
        fields[i]
            .trim()
            .parse::<f64>()
            .map_err(|_| InjectError::CsvRow {
                line,
                column: header[i].clone(),
                value: fields[i].to_string(),
                reason: "not a number".into(),
            })
    };
    let integer = |i: usize| -> Result<u64, InjectError> {
        fields[i]
            .trim()
            .parse::<u64>()
            .map_err(|_| InjectError::CsvRow {
                line,
                column: header[i].clone(),
                value: fields[i].to_string(),
                reason: "not a whole number".into(),
            })
    };
    let mut record = TrialRecord {
        trial: integer(0)?,
        cell: integer(1)? as usize,
        eccentricity: float(2)?,
        semi_amplitude: float(3)?,
        omega: float(4)?,
        mean_anomaly: float(5)?,
        outcomes: Vec::new(),
    };
    let mut i = 6;
    for output in all_outputs(estimators) {
        let width = 7 + output.extra_names.len();
        let status = fields[i];
        if status == "ok" {
            let calls_eccentric = match fields[i + 6] {
                "1" => Some(true),
                "0" => Some(false),
                "" => None,
                other => {
                    return Err(InjectError::CsvRow {
                        line,
                        column: header[i + 6].clone(),
                        value: other.to_string(),
                        reason: "expected 1, 0 or empty".into(),
                    })
                }
            };
            let extra = (0..output.extra_names.len())
                .map(|j| float(i + 7 + j))
                .collect::<Result<Vec<_>, _>>()?;
            record
                .outcomes
                .push(Outcome::Estimate(EccentricityEstimate {
                    point: float(i + 1)?,
                    lower68: float(i + 2)?,
                    upper68: float(i + 3)?,
                    lower95: float(i + 4)?,
                    upper95: float(i + 5)?,
                    calls_eccentric,
                    extra,
                }));
        } else if status == "skipped" {
            record.outcomes.push(Outcome::Skipped);
        } else if let Some(message) = status.strip_prefix("failed: ") {
            record.outcomes.push(Outcome::Failed(message.to_string()));
        } else {
            return Err(InjectError::CsvRow {
                line,
                column: header[i].clone(),
                value: status.to_string(),
                reason: "expected `ok`, `skipped` or `failed: …`".into(),
            });
        }
        i += width;
    }
    Ok(record)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::inject::engine::run_trial;
    use crate::inject::engine::tests::design;
    use crate::inject::estimators::LeastSquaresEstimator;

    #[test]
    fn csv_rows_round_trip_exactly() {
        let d = design();
        let lsq = LeastSquaresEstimator::default();
        let estimators: [&dyn Estimator; 1] = [&lsq];
        let record = run_trial(&d, &estimators, 4).unwrap();
        let row = record_to_csv_row(&record, &estimators);
        assert_eq!(row.len(), csv_header(&estimators).len());
        let fields: Vec<&str> = row.iter().map(String::as_str).collect();
        let back = record_from_csv_row(&fields, &estimators, 2).unwrap();
        assert_eq!(back, record);
        let mut bad = fields.clone();
        bad[2] = "zero";
        let err = record_from_csv_row(&bad, &estimators, 7)
            .unwrap_err()
            .to_string();
        assert!(
            err.contains("line 7") && err.contains("true_e") && err.contains("zero"),
            "{err}"
        );
    }

    #[test]
    fn csv_lines_quote_only_what_needs_it() {
        let line = csv_line(&["1".into(), "failed: a, \"b\"".into(), "0.25".into()]);
        assert_eq!(line, "1,\"failed: a, \"\"b\"\"\",0.25\n");
    }

    /// A file written, cut short mid-row, shuffled and repeated reads back to the normal form,
    /// and writing that gives the same bytes as writing the original records.
    #[test]
    fn files_round_trip_and_drop_a_cut_row() {
        let d = design();
        let lsq = LeastSquaresEstimator::default();
        let estimators: [&dyn Estimator; 1] = [&lsq];
        let records: Vec<TrialRecord> = (0..6)
            .map(|t| run_trial(&d, &estimators, t).unwrap())
            .collect();
        let whole = write_trial_file("00aa", 6, &estimators, &records);
        assert!(whole.starts_with("# eccaudit inject fingerprint=00aa trials=6\ntrial,cell,"));
        let back = read_trial_file(&whole, "t.csv", &estimators, Some("00aa")).unwrap();
        assert_eq!(back.head.n_trials, 6);
        assert_eq!(
            write_trial_file("00aa", 6, &estimators, &back.records),
            whole
        );

        // Appended out of order, one repeated, the last row cut short.
        let mut appended = file_start("00aa", 6, &estimators);
        for t in [4, 1, 0, 4, 3, 2] {
            appended.push_str(&row_line(&records[t], &estimators));
        }
        let cut = row_line(&records[5], &estimators);
        appended.push_str(&cut[..cut.len() / 2]);
        let partial = read_trial_file(&appended, "t.csv", &estimators, Some("00aa")).unwrap();
        let trials: Vec<u64> = partial.records.iter().map(|r| r.trial).collect();
        assert_eq!(trials, [0, 1, 2, 3, 4]);
        assert_eq!(
            write_trial_file("00aa", 6, &estimators, &partial.records),
            write_trial_file("00aa", 6, &estimators, &records[..5])
        );

        // Shards (interleaved, one cut short, one repeating a trial) merge into the whole file.
        let shard = |k: u64| -> String {
            let mut text = file_start("00aa", 6, &estimators);
            for r in records.iter().filter(|r| r.trial % 3 == k) {
                text.push_str(&row_line(r, &estimators));
            }
            text
        };
        let (s0, s1, mut s2) = (shard(0), shard(1), shard(2));
        s2.push_str(&row_line(&records[0], &estimators));
        s2.push_str("5,0,0.4");
        let (merged, n) = merge_trial_files(&[("s2", &s2), ("s0", &s0), ("s1", &s1)]).unwrap();
        assert_eq!(n, 6);
        assert_eq!(merged, whole);
        let other = shard(1).replace("00aa", "00bb");
        let err = merge_trial_files(&[("s0", &s0), ("s1", &other)])
            .unwrap_err()
            .to_string();
        assert!(err.contains("`s1`") && err.contains("00bb"), "{err}");

        let err = read_trial_file(&whole, "t.csv", &estimators, Some("00bb"))
            .unwrap_err()
            .to_string();
        assert!(err.contains("`t.csv`") && err.contains("00bb"), "{err}");
        let err = read_trial_file("time,rv\n", "x.csv", &estimators, None)
            .unwrap_err()
            .to_string();
        assert!(
            err.contains("not a trial file") && err.contains("line 1"),
            "{err}"
        );
        let renamed = whole.replacen("true_e", "e_true", 1);
        let err = read_trial_file(&renamed, "t.csv", &estimators, None)
            .unwrap_err()
            .to_string();
        assert!(err.contains("line 2") && err.contains("column 3"), "{err}");
        let broken = whole.replacen("\n0,0,0,", "\n0,0,zero,", 1);
        let err = read_trial_file(&broken, "t.csv", &estimators, None)
            .unwrap_err()
            .to_string();
        assert!(
            err.contains("`t.csv`") && err.contains("line 3") && err.contains("true_e"),
            "{err}"
        );
    }
}
