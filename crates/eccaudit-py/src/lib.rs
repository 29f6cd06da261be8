//! `eccaudit._core`: the Python extension module (PyO3). Thin adapter over `eccaudit-core`: Python
//! values in, one core call, JSON text and raw arrays out; the Python package `eccaudit` wraps it.
//!
//! Every number comes from the core, through the same settings types the command line and the
//! page use (`AuditSettings`, `SensitivityRequest`, ...), so a seed gives the CLI's numbers.
//! Long runs release the GIL, spread trials or priors over rayon's threads, report progress to a
//! Python callable and stop cleanly on KeyboardInterrupt (signals are checked every 50 ms while
//! the workers run; workers check a cancel flag before each trial or every 50 sampler steps).

mod request;
mod run;

use std::sync::atomic::Ordering;

use pyo3::exceptions::{PyRuntimeError, PyValueError};
use pyo3::prelude::*;
use pyo3::types::PyBytes;
use rayon::prelude::*;

use eccaudit_core::audit::{data_fingerprint, AuditPlan, AuditSettings, DataIdentity};
use eccaudit_core::fit::figures::{phase_fold, search_periodogram};
use eccaudit_core::fit::FitData;
use eccaudit_core::inject::{
    csv_header, record_to_csv_row, run_trial, summarise, Estimator, InjectionDesign,
    InjectionSummary, TrialRecord,
};
use eccaudit_core::posterior::{assemble_sensitivity_report, sensitivity_run, sensitivity_start};
use eccaudit_core::spec::fit_model;
use eccaudit_core::table::{
    infer_time_convention, parse_table, write_table_ecsv, Delimiter, ReadOptions, StatedBy,
    TableError as CoreTableError, TimeConvention, TimeSpec, VelocityTable, VelocityUnit,
};
use eccaudit_plot::{bias_figure, eccentricity_figure};

use request::{FitRequest, InjectRequest};
use run::{run_with_progress, Control};

pyo3::create_exception!(
    _core,
    TableError,
    PyValueError,
    "A velocity table that cannot be read: the message names the file, line and column; the \
     attributes `file`, `line` and `column` hold them (None when they do not apply)."
);

/// Turn a core table error into `TableError` with `file`, `line`, `column` attributes.
fn table_error(py: Python<'_>, err: &CoreTableError) -> PyErr {
    let value = serde_json::to_value(err).unwrap_or_default();
    let exc = TableError::new_err(err.to_string());
    let instance = exc.value(py);
    let get = |key: &str| value.get(key).and_then(|v| v.as_u64());
    let _ = instance.setattr("file", value.get("source_name").and_then(|v| v.as_str()));
    let _ = instance.setattr("line", get("line"));
    let _ = instance.setattr("column", get("column"));
    exc
}

fn value_error(message: impl ToString) -> PyErr {
    PyValueError::new_err(message.to_string())
}

fn json<T: serde::Serialize>(value: &T) -> PyResult<String> {
    serde_json::to_string(value).map_err(|e| PyRuntimeError::new_err(e.to_string()))
}

fn f64_bytes<'py>(py: Python<'py>, values: &[f64]) -> Bound<'py, PyBytes> {
    let mut bytes = Vec::with_capacity(values.len() * 8);
    for v in values {
        bytes.extend_from_slice(&v.to_le_bytes());
    }
    PyBytes::new(py, &bytes)
}

/// A checked velocity table (times in days in its convention; velocities and uncertainties in
/// m/s), as read by the core.
#[pyclass(module = "eccaudit._core", frozen)]
struct Table {
    inner: VelocityTable,
    /// File name and SHA-256 of the bytes read, when the table came from a file.
    identity: Option<DataIdentity>,
}

#[pymethods]
impl Table {
    /// Name of the source (file name).
    #[getter]
    fn source_name(&self) -> String {
        self.inner.source_name().to_string()
    }
    /// Number of rows.
    #[getter]
    fn n_rows(&self) -> usize {
        self.inner.n_rows()
    }
    /// Times [d] as little-endian f64 bytes.
    fn times_bytes<'py>(&self, py: Python<'py>) -> Bound<'py, PyBytes> {
        f64_bytes(py, self.inner.times())
    }
    /// Velocities [m/s] as little-endian f64 bytes.
    fn velocities_bytes<'py>(&self, py: Python<'py>) -> Bound<'py, PyBytes> {
        f64_bytes(py, self.inner.velocities())
    }
    /// Uncertainties [m/s] as little-endian f64 bytes.
    fn uncertainties_bytes<'py>(&self, py: Python<'py>) -> Bound<'py, PyBytes> {
        f64_bytes(py, self.inner.uncertainties())
    }
    /// Instrument name of each row.
    #[getter]
    fn instruments(&self) -> Vec<String> {
        let names = self.inner.instrument_names();
        self.inner
            .instrument_index()
            .iter()
            .map(|&i| names[i].clone())
            .collect()
    }
    /// Instrument names in order of first appearance.
    #[getter]
    fn instrument_names(&self) -> Vec<String> {
        self.inner.instrument_names().to_vec()
    }
    /// Readable time convention (`BJD`, `BJD - 2450000`, ...).
    #[getter]
    fn time_label(&self) -> String {
        self.inner.time_convention().label()
    }
    /// What the reader did or noticed (sorting, inferred conventions, ...).
    #[getter]
    fn notices(&self) -> Vec<String> {
        self.inner.notices().to_vec()
    }
    /// The summary as JSON (the same as `eccaudit table --json`).
    fn summary_json(&self) -> PyResult<String> {
        json(&self.inner.summary())
    }
    /// The table as ECSV text (astropy reads it with units).
    fn to_ecsv(&self) -> String {
        write_table_ecsv(&self.inner)
    }
    fn __repr__(&self) -> String {
        format!(
            "<eccaudit Table `{}`: {} rows, {} instrument(s), {}>",
            self.inner.source_name(),
            self.inner.n_rows(),
            self.inner.n_instruments(),
            self.inner.time_convention().label()
        )
    }
}

fn read_options(
    source_name: String,
    velocity_unit: Option<&str>,
    time: Option<&str>,
    delimiter: Option<&str>,
) -> PyResult<ReadOptions> {
    Ok(ReadOptions {
        source_name,
        velocity_unit: velocity_unit
            .map(str::parse::<VelocityUnit>)
            .transpose()
            .map_err(value_error)?,
        time: time
            .map(str::parse::<TimeSpec>)
            .transpose()
            .map_err(value_error)?,
        delimiter: delimiter
            .map(str::parse::<Delimiter>)
            .transpose()
            .map_err(value_error)?,
    })
}

/// Read a velocity table file (CSV, TSV, whitespace-separated, ECSV or VOTable).
#[pyfunction]
#[pyo3(signature = (path, velocity_unit=None, time=None, delimiter=None))]
fn read_table(
    py: Python<'_>,
    path: std::path::PathBuf,
    velocity_unit: Option<&str>,
    time: Option<&str>,
    delimiter: Option<&str>,
) -> PyResult<Table> {
    let source_name = path.display().to_string();
    let bytes = std::fs::read(&path).map_err(|e| {
        pyo3::exceptions::PyOSError::new_err(format!("cannot read `{source_name}`: {e}"))
    })?;
    let text = String::from_utf8(bytes.clone()).map_err(|_| {
        table_error(
            py,
            &CoreTableError::Malformed {
                source_name: source_name.clone(),
                line: 1,
                message: "the file is not UTF-8 text".to_string(),
            },
        )
    })?;
    let options = read_options(source_name.clone(), velocity_unit, time, delimiter)?;
    let inner = parse_table(&text, &options).map_err(|e| table_error(py, &e))?;
    let identity = DataIdentity {
        file_name: path
            .file_name()
            .map_or(source_name, |n| n.to_string_lossy().into_owned()),
        sha256: data_fingerprint(&bytes),
    };
    Ok(Table {
        inner,
        identity: Some(identity),
    })
}

/// Read a velocity table from text already in memory (any format `read_table` reads).
#[pyfunction]
#[pyo3(signature = (text, source_name, velocity_unit=None, time=None, delimiter=None))]
fn parse_text(
    py: Python<'_>,
    text: &str,
    source_name: String,
    velocity_unit: Option<&str>,
    time: Option<&str>,
    delimiter: Option<&str>,
) -> PyResult<Table> {
    let options = read_options(source_name, velocity_unit, time, delimiter)?;
    let inner = parse_table(text, &options).map_err(|e| table_error(py, &e))?;
    Ok(Table {
        inner,
        identity: None,
    })
}

/// Build a table from columns (velocities and uncertainties in m/s); `time` names the time
/// convention (`BJD`, `MJD`, `BJD-2450000`, ...), inferred from the magnitude when `None`.
#[pyfunction]
#[pyo3(signature = (source_name, times, velocities, uncertainties, instruments, time=None))]
fn table_from_columns(
    py: Python<'_>,
    source_name: &str,
    times: Vec<f64>,
    velocities: Vec<f64>,
    uncertainties: Vec<f64>,
    instruments: Vec<String>,
    time: Option<&str>,
) -> PyResult<Table> {
    let convention = match time {
        Some(text) => TimeConvention::stated(
            text.parse::<TimeSpec>().map_err(value_error)?,
            StatedBy::Explicit,
        ),
        None => infer_time_convention(&times, &mut Vec::new()),
    };
    let inner = VelocityTable::from_columns(
        source_name,
        &times,
        &velocities,
        &uncertainties,
        &instruments,
        convention,
    )
    .map_err(|e| table_error(py, &e))?;
    Ok(Table {
        inner,
        identity: None,
    })
}

/// Least-squares fit of the model (`fit_model`: jitter decision, goodness of fit, detections).
/// `options_json`: the `fit` settings (see `eccaudit.fit`). Returns the report JSON (as
/// `eccaudit fit --json`) and the figure data JSON.
#[pyfunction]
fn fit(py: Python<'_>, table: &Table, options_json: &str) -> PyResult<(String, String)> {
    let request: FitRequest = serde_json::from_str(options_json).map_err(value_error)?;
    let data = FitData::from_table(&table.inner);
    let (model, base) = request.model().map_err(value_error)?;
    let label = table.inner.time_convention().label();
    py.detach(|| -> PyResult<(String, String)> {
        let fit = fit_model(&data, &model, &base).map_err(value_error)?;
        let options = model.fit_options(fit.jitter.fitted, &base);
        let periodogram = search_periodogram(&data, &options).ok();
        let report = &fit.report;
        let solution = report.adopted_solution();
        let folds: Vec<_> = (1..=solution.companions.len())
            .filter_map(|c| phase_fold(&data, solution, report.reference_time, c, 600).ok())
            .collect();
        let figures = serde_json::json!({
            "time_label": label,
            "periodogram": periodogram,
            "phase_folds": folds,
            "reference_time": report.reference_time,
        });
        Ok((json(&fit)?, figures.to_string()))
    })
}

/// Trials as the CLI's trial CSV: header and rows of text.
type TrialRows = (Vec<String>, Vec<Vec<String>>);

fn trial_rows(records: &[TrialRecord], estimators: &[&dyn Estimator]) -> TrialRows {
    (
        csv_header(estimators),
        records
            .iter()
            .map(|r| record_to_csv_row(r, estimators))
            .collect(),
    )
}

/// Runs every trial of `design` on rayon's threads (or a pool of `threads`), checking the cancel
/// flag before each trial. Returns the records sorted by trial index, or `None` if cancelled.
fn run_design(
    design: &InjectionDesign,
    estimators: &[&dyn Estimator],
    control: &Control,
) -> Result<Option<Vec<TrialRecord>>, String> {
    let n = design.n_trials();
    control.total.store(n, Ordering::Relaxed);
    let results: Vec<Option<TrialRecord>> = (0..n)
        .into_par_iter()
        .map(|trial| -> Result<Option<TrialRecord>, String> {
            if control.cancelled() {
                return Ok(None);
            }
            let record = run_trial(design, estimators, trial).map_err(|e| e.to_string())?;
            control.done.fetch_add(1, Ordering::Relaxed);
            Ok(Some(record))
        })
        .collect::<Result<_, _>>()?;
    if control.cancelled() {
        return Ok(None);
    }
    Ok(Some(results.into_iter().flatten().collect()))
}

/// Runs the trials of an audit batch after batch, as its adaptive rule asks
/// (`AuditPlan::next_batch`, the same loop as the CLI and the page), checking the cancel flag
/// before each trial. Returns the records sorted by trial index, or `None` if cancelled.
fn run_audit(plan: &AuditPlan, control: &Control) -> Result<Option<Vec<TrialRecord>>, String> {
    let mut records: Vec<TrialRecord> = Vec::new();
    while let Some(batch) = plan.next_batch(&records) {
        let pending: Vec<u64> = batch
            .filter(|t| records.binary_search_by_key(t, |r| r.trial).is_err())
            .collect();
        if pending.is_empty() {
            break;
        }
        control
            .total
            .fetch_add(pending.len() as u64, Ordering::Relaxed);
        let results: Vec<Option<TrialRecord>> = pending
            .into_par_iter()
            .map(|trial| -> Result<Option<TrialRecord>, String> {
                if control.cancelled() {
                    return Ok(None);
                }
                let mut record = plan
                    .run_trials(trial..trial + 1, &mut |_| {})
                    .map_err(|e| e.to_string())?;
                control.done.fetch_add(1, Ordering::Relaxed);
                Ok(record.pop())
            })
            .collect::<Result<_, _>>()?;
        if control.cancelled() {
            return Ok(None);
        }
        records.extend(results.into_iter().flatten());
        records.sort_by_key(|r| r.trial);
    }
    Ok(Some(records))
}

fn bias_json(summary: &InjectionSummary, observed: Option<f64>) -> serde_json::Value {
    let figure = bias_figure(summary, observed);
    serde_json::json!({
        "observed": figure.observed,
        "curves": figure.curves.iter().map(|c| serde_json::json!({
            "name": c.name, "true_e": c.true_e, "q025": c.q025, "q16": c.q16,
            "median": c.median, "q84": c.q84, "q975": c.q975,
        })).collect::<Vec<_>>(),
    })
}

/// Injection–recovery at the table's epochs and uncertainties. Returns the summary JSON (as
/// `eccaudit inject --json`), the trials (CSV header and rows) and the bias figure JSON.
#[pyfunction]
#[pyo3(signature = (table, settings_json, threads=None, progress=None))]
fn inject(
    py: Python<'_>,
    table: &Table,
    settings_json: &str,
    threads: Option<usize>,
    progress: Option<Py<PyAny>>,
) -> PyResult<(String, TrialRows, String)> {
    let request: InjectRequest = serde_json::from_str(settings_json).map_err(value_error)?;
    let inner = &table.inner;
    let result = run_with_progress(py, threads, progress, |control| {
        let design = request.design(inner)?;
        let (lsq, posteriors) = request.estimators(&design)?;
        let estimators: Vec<&dyn Estimator> = std::iter::once(&lsq as &dyn Estimator)
            .chain(posteriors.iter().map(|p| p as &dyn Estimator))
            .collect();
        let Some(records) = run_design(&design, &estimators, control)? else {
            return Ok(None);
        };
        let summary = summarise(&design, &estimators, &records);
        Ok(Some((
            serde_json::to_string(&summary).map_err(|e| e.to_string())?,
            trial_rows(&records, &estimators),
            bias_json(&summary, None).to_string(),
        )))
    })?;
    Ok(result)
}

/// The audit of the replay-file settings `settings_json` (fields missing take their defaults).
/// Returns the report JSON (as `eccaudit audit --json`), the settings JSON used (a replay
/// file), the trials (CSV header and rows), the statement text and the bias figure JSON.
#[pyfunction]
#[pyo3(signature = (table, settings_json, threads=None, progress=None))]
fn audit(
    py: Python<'_>,
    table: &Table,
    settings_json: &str,
    threads: Option<usize>,
    progress: Option<Py<PyAny>>,
) -> PyResult<(String, String, TrialRows, String, String)> {
    let mut settings = AuditSettings::from_json(settings_json).map_err(value_error)?;
    if settings.data.is_none() {
        settings.data = table.identity.clone();
    } else if let Some(identity) = &table.identity {
        if let Some(wanted) = &settings.data {
            if wanted.sha256 != identity.sha256 {
                return Err(value_error(format!(
                    "the settings were made for `{}` (SHA-256 {}), but this table's SHA-256 is {}",
                    wanted.file_name, wanted.sha256, identity.sha256
                )));
            }
        }
    }
    let settings_text = settings.to_json();
    let inner = &table.inner;
    let result = run_with_progress(py, threads, progress, |control| {
        let plan = AuditPlan::new(inner, &settings).map_err(|e| e.to_string())?;
        let estimators = plan.estimators();
        let Some(records) = run_audit(&plan, control)? else {
            return Ok(None);
        };
        let report = plan.finish(&records).map_err(|e| e.to_string())?;
        let observed = report.statement.observed_least_squares();
        Ok(Some((
            serde_json::to_string(&report).map_err(|e| e.to_string())?,
            settings_text.clone(),
            trial_rows(&records, &estimators),
            report.statement.text(),
            bias_json(&report.injection, observed).to_string(),
        )))
    })?;
    Ok(result)
}

/// One prior's chains: parameter names, (stored steps, walkers, dim), samples and
/// log-densities as little-endian f64 bytes (step-major).
type ChainData<'py> = (
    Vec<String>,
    (usize, usize, usize),
    Bound<'py, PyBytes>,
    Bound<'py, PyBytes>,
);

/// Posterior of e under a set of priors (`request_json`: the `SensitivityRequest` fields, as
/// the `priors` command's flags). Priors run in parallel; the numbers equal the CLI's.
/// Returns the report JSON (as `eccaudit priors --json`), the chains and the figure JSON.
#[pyfunction]
#[pyo3(signature = (table, request_json, threads=None, progress=None))]
fn priors<'py>(
    py: Python<'py>,
    table: &Table,
    request_json: &str,
    threads: Option<usize>,
    progress: Option<Py<PyAny>>,
) -> PyResult<(String, Vec<ChainData<'py>>, String)> {
    let request: eccaudit_core::posterior::SensitivityRequest =
        serde_json::from_str(request_json).map_err(value_error)?;
    let settings = request.to_settings().map_err(value_error)?;
    let data = FitData::from_table(&table.inner);
    // The model's checks (chi2 test, jitter decision, false-alarm probabilities), as
    // `eccaudit priors --json` reports them beside the runs.
    let model = request.model.validate().map_err(value_error)?;
    let check = fit_model(&data, &model, &settings.fit)
        .map_err(value_error)?
        .check();
    let report = run_with_progress(py, threads, progress, |control| {
        let start = sensitivity_start(&data, &settings).map_err(|e| e.to_string())?;
        let n = settings.priors.len();
        let steps: Vec<std::sync::atomic::AtomicU64> = (0..n)
            .map(|_| std::sync::atomic::AtomicU64::new(0))
            .collect();
        let runs: Vec<Option<_>> = (0..n)
            .into_par_iter()
            .map(|i| {
                let mut observer = |p: eccaudit_core::posterior::PosteriorProgress| {
                    control
                        .total
                        .store((p.total_steps * p.n_priors) as u64, Ordering::Relaxed);
                    let before = steps[i].swap(p.steps_done as u64, Ordering::Relaxed);
                    control.done.fetch_add(
                        (p.steps_done as u64).saturating_sub(before),
                        Ordering::Relaxed,
                    );
                    if control.cancelled() {
                        eccaudit_core::sampler::Steer::Cancel
                    } else {
                        eccaudit_core::sampler::Steer::Continue
                    }
                };
                match sensitivity_run(&data, &settings, &start, i, &mut observer) {
                    Ok(run) => Ok(Some(run)),
                    Err(_) if control.cancelled() => Ok(None),
                    Err(e) => Err(e.to_string()),
                }
            })
            .collect::<Result<_, _>>()?;
        if control.cancelled() {
            return Ok(None);
        }
        let runs = runs.into_iter().flatten().collect();
        let report =
            assemble_sensitivity_report(data.n_points(), start.least_squares, &settings, runs)
                .map_err(|e| e.to_string())?;
        Ok(Some(report))
    })?;
    let chains = report
        .runs
        .iter()
        .map(|run| {
            let c = &run.chains;
            (
                run.parameter_names.clone(),
                (c.n_stored_steps, c.n_walkers, c.dim),
                f64_bytes(py, &c.samples),
                f64_bytes(py, &c.log_densities),
            )
        })
        .collect();
    let figure = eccentricity_figure(&report);
    let figure_json = serde_json::json!({
        "reference": figure.reference,
        "panels": figure.panels.iter().map(|p| serde_json::json!({
            "title": p.title, "e": p.e, "posterior": p.posterior, "prior": p.prior, "median": p.median,
        })).collect::<Vec<_>>(),
    });
    let mut value = serde_json::to_value(&report).map_err(value_error)?;
    if let Some(object) = value.as_object_mut() {
        object.insert(
            "model_check".into(),
            serde_json::to_value(&check).map_err(value_error)?,
        );
    }
    Ok((value.to_string(), chains, figure_json.to_string()))
}

/// The default audit settings as JSON (a replay file with every field).
#[pyfunction]
fn default_audit_settings() -> String {
    AuditSettings::default().to_json()
}

/// The extension module.
#[pymodule]
#[pyo3(name = "_core")]
fn core_module(m: &Bound<'_, PyModule>) -> PyResult<()> {
    m.add("TableError", m.py().get_type::<TableError>())?;
    m.add_class::<Table>()?;
    m.add_function(wrap_pyfunction!(read_table, m)?)?;
    m.add_function(wrap_pyfunction!(parse_text, m)?)?;
    m.add_function(wrap_pyfunction!(table_from_columns, m)?)?;
    m.add_function(wrap_pyfunction!(fit, m)?)?;
    m.add_function(wrap_pyfunction!(priors, m)?)?;
    m.add_function(wrap_pyfunction!(inject, m)?)?;
    m.add_function(wrap_pyfunction!(audit, m)?)?;
    m.add_function(wrap_pyfunction!(default_audit_settings, m)?)?;
    m.add("__version__", env!("CARGO_PKG_VERSION"))?;
    Ok(())
}
