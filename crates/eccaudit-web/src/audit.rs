//! The whole audit in the page: `AuditRun` wraps the core's `AuditPlan` so Web Workers can run
//! ranges of trials and the page can summarise, state and draw them.
//!
//! Settings cross into wasm as JSON text and are parsed by `AuditSettings::from_json` in the
//! core (so unknown fields are refused exactly as on the command line). Trial records cross
//! `postMessage` as the rows of the trial CSV (`record_to_csv_row`), whose numbers are written
//! in shortest round-trip form and so read back bit for bit.

use eccaudit_core::audit::{data_fingerprint, AuditPlan, AuditReport, AuditSettings, DataIdentity};
use eccaudit_core::inject::{
    record_from_csv_row, record_to_csv_row, settings_fingerprint, trial_file, TrialRecord,
};
use eccaudit_core::table::{parse_table, TimeSpec, VelocityUnit};
use eccaudit_plot::{bias_figure, distribution_figure, BiasFigure};
use wasm_bindgen::prelude::*;
use web_sys::HtmlCanvasElement;

use crate::render;
use crate::{js_error, to_js};

/// The default settings of an audit, as JSON (the replay-file format).
#[wasm_bindgen(js_name = defaultAuditSettings)]
pub fn default_audit_settings() -> String {
    AuditSettings::default().to_json()
}

/// An empty menu value means "from the header".
fn menu<T: std::str::FromStr>(text: &str) -> Result<Option<T>, String>
where
    T::Err: std::fmt::Display,
{
    let text = text.trim();
    if text.is_empty() {
        Ok(None)
    } else {
        text.parse::<T>().map(Some).map_err(|e| e.to_string())
    }
}

/// `settings_json` completed for the table `table_text` loaded as `file_name`: the page's
/// reading menus (`velocity_unit`, `time_convention`; empty = from the header) and the data
/// identity (SHA-256 of the text's UTF-8 bytes). The result is the replay file the page offers
/// for download and hands to [`AuditRun`].
#[wasm_bindgen(js_name = auditSettingsFor)]
pub fn audit_settings_for(
    table_text: &str,
    file_name: &str,
    velocity_unit: &str,
    time_convention: &str,
    settings_json: &str,
) -> Result<String, JsValue> {
    let mut settings = AuditSettings::from_json(settings_json).map_err(js_error)?;
    settings.read.velocity_unit = menu::<VelocityUnit>(velocity_unit).map_err(js_error)?;
    settings.read.time = menu::<TimeSpec>(time_convention).map_err(js_error)?;
    settings.data = Some(DataIdentity {
        file_name: file_name.to_string(),
        sha256: data_fingerprint(table_text.as_bytes()),
    });
    Ok(settings.to_json())
}

/// A prepared audit of one table: the fit is done and the simulation design fixed.
#[wasm_bindgen]
pub struct AuditRun {
    plan: AuditPlan,
    settings: AuditSettings,
    /// The records and report of the last `finish`.
    finished: Option<(Vec<TrialRecord>, AuditReport)>,
    /// Records passed to `nextBatch` so far.
    collected: Vec<TrialRecord>,
}

#[wasm_bindgen]
impl AuditRun {
    /// Read `table_text` (the contents of `source_name`) with the settings' reading options,
    /// check it is the table the settings name (when they name one), fit it and fix the design.
    #[wasm_bindgen(constructor)]
    pub fn new(
        table_text: &str,
        source_name: &str,
        settings_json: &str,
    ) -> Result<AuditRun, JsValue> {
        let settings = AuditSettings::from_json(settings_json).map_err(js_error)?;
        settings
            .check_data(table_text.as_bytes())
            .map_err(js_error)?;
        let options = settings.read.options(source_name);
        let table = parse_table(table_text, &options).map_err(js_error)?;
        let plan = AuditPlan::new(&table, &settings).map_err(js_error)?;
        Ok(AuditRun {
            plan,
            settings,
            finished: None,
            collected: Vec::new(),
        })
    }

    /// Base trials in the design (the audit adds trials after them: see `nextBatch`).
    #[wasm_bindgen(getter, js_name = nTrials)]
    pub fn n_trials(&self) -> f64 {
        self.plan.n_trials() as f64
    }

    /// The next batch of trials the audit needs, given every row returned by `runTrials` so
    /// far (any order; rows already passed in an earlier call need not be passed again:
    /// they are kept), as `[start, end]`, or `null` when no more are needed. The page's workers
    /// run it and the page asks again: the same batches as the command line's threads.
    #[wasm_bindgen(js_name = nextBatch)]
    pub fn next_batch(&mut self, new_rows: JsValue) -> Result<JsValue, JsValue> {
        let records = parse_rows(&self.plan, new_rows)?;
        self.collected.extend(records);
        self.collected.sort_by_key(|r| r.trial);
        self.collected.dedup_by_key(|r| r.trial);
        match self.plan.next_batch(&self.collected) {
            Some(range) => to_js(&[range.start as f64, range.end as f64]),
            None => Ok(JsValue::NULL),
        }
    }

    /// The least-squares fit of the real data (the core's `FitReport`, a plain object).
    #[wasm_bindgen(getter)]
    pub fn fit(&self) -> Result<JsValue, JsValue> {
        to_js(self.plan.fit())
    }

    /// The settings this run uses, as JSON.
    #[wasm_bindgen(getter, js_name = settingsJson)]
    pub fn settings_json(&self) -> String {
        self.settings.to_json()
    }

    /// Run trials `start..end` (a range from `nextBatch`, or part of one); returns one row of strings per trial,
    /// the trial CSV's row, which `finish` reads back exactly.
    #[wasm_bindgen(js_name = runTrials)]
    pub fn run_trials(&self, start: f64, end: f64) -> Result<JsValue, JsValue> {
        let range = trial_index(start)?..trial_index(end)?;
        let records = self.plan.run_trials(range, &mut |_| {}).map_err(js_error)?;
        let estimators = self.plan.estimators();
        let rows: Vec<Vec<String>> = records
            .iter()
            .map(|r| record_to_csv_row(r, &estimators))
            .collect();
        to_js(&rows)
    }

    /// Summarise the rows returned by `runTrials` (any order, from any worker) and state the
    /// result; returns the core's `AuditReport` as a plain object and keeps it for the figures
    /// and downloads.
    pub fn finish(&mut self, rows: JsValue) -> Result<JsValue, JsValue> {
        let mut records = parse_rows(&self.plan, rows)?;
        trial_file::normalise_records(&mut records, self.plan.n_trials());
        let report = self.plan.finish(&records).map_err(js_error)?;
        let out = to_js(&report)?;
        self.finished = Some((records, report));
        Ok(out)
    }

    /// The last report as pretty JSON (the same text `eccaudit audit --json` prints).
    #[wasm_bindgen(js_name = reportJson)]
    pub fn report_json(&self) -> Result<String, JsValue> {
        serde_json::to_string_pretty(&self.report()?.1).map_err(js_error)
    }

    /// The last report's statement as text (as `eccaudit audit` prints it).
    #[wasm_bindgen(js_name = statementText)]
    pub fn statement_text(&self) -> Result<String, JsValue> {
        Ok(self.report()?.1.statement.text())
    }

    /// The finished trials as the CSV `eccaudit audit --out DIR` writes to `DIR/trials.csv`
    /// (so `--resume` can continue from it), rows in trial order.
    #[wasm_bindgen(js_name = trialsCsv)]
    pub fn trials_csv(&self) -> Result<String, JsValue> {
        let (records, _) = self.report()?;
        let estimators = self.plan.estimators();
        let fingerprint = settings_fingerprint(self.plan.design(), &estimators);
        Ok(trial_file::write_trial_file(
            &fingerprint,
            self.plan.n_trials(),
            &estimators,
            records,
        ))
    }

    /// Draw the last report's bias curve on `canvas`.
    #[wasm_bindgen(js_name = drawBias)]
    pub fn draw_bias(&self, canvas: HtmlCanvasElement) -> Result<(), JsValue> {
        render::on_canvas(&self.bias_figure()?, canvas)
    }

    /// The same figure as [`AuditRun::draw_bias`], as SVG text of `width` × `height` pixels.
    #[wasm_bindgen(js_name = drawBiasSvg)]
    pub fn draw_bias_svg(&self, width: u32, height: u32) -> Result<String, JsValue> {
        render::to_svg(&self.bias_figure()?, width, height)
    }

    /// Draw the last report's distributions of the estimates on `canvas`.
    #[wasm_bindgen(js_name = drawDistributions)]
    pub fn draw_distributions(&self, canvas: HtmlCanvasElement) -> Result<(), JsValue> {
        render::on_canvas(&distribution_figure(&self.report()?.1.injection), canvas)
    }

    /// The same figure as [`AuditRun::draw_distributions`], as SVG text of `width` × `height`
    /// pixels.
    #[wasm_bindgen(js_name = drawDistributionsSvg)]
    pub fn draw_distributions_svg(&self, width: u32, height: u32) -> Result<String, JsValue> {
        render::to_svg(
            &distribution_figure(&self.report()?.1.injection),
            width,
            height,
        )
    }
}

impl AuditRun {
    /// The bias curve of the last report, marked at the observed estimate.
    fn bias_figure(&self) -> Result<BiasFigure, JsValue> {
        let report = &self.report()?.1;
        let observed = report.statement.observed_least_squares();
        Ok(bias_figure(&report.injection, observed))
    }

    pub(crate) fn report(&self) -> Result<&(Vec<TrialRecord>, AuditReport), JsValue> {
        self.finished
            .as_ref()
            .ok_or_else(|| js_error("no result yet: finish the run first"))
    }
}

/// Trial records from rows of the trial CSV (as `runTrials` returns them).
fn parse_rows(plan: &AuditPlan, rows: JsValue) -> Result<Vec<TrialRecord>, JsValue> {
    let rows: Vec<Vec<String>> = serde_wasm_bindgen::from_value(rows).map_err(js_error)?;
    let estimators = plan.estimators();
    let mut records = Vec::with_capacity(rows.len());
    for (idx, row) in rows.iter().enumerate() {
        let fields: Vec<&str> = row.iter().map(String::as_str).collect();
        let record = record_from_csv_row(&fields, &estimators, idx as u64 + 1).map_err(js_error)?;
        if !plan.has_trial(record.trial) {
            return Err(js_error(format!(
                "row {}: trial {} is not in the design",
                idx + 1,
                record.trial
            )));
        }
        records.push(record);
    }
    Ok(records)
}

/// A trial index from JavaScript: a whole number ≥ 0.
fn trial_index(value: f64) -> Result<u64, JsValue> {
    if value.is_finite() && value >= 0.0 && value.fract() == 0.0 && value < 2f64.powi(53) {
        Ok(value as u64)
    } else {
        Err(js_error(format!(
            "trial index {value}: a whole number ≥ 0 is needed"
        )))
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use eccaudit_core::table::ReadOptions;

    #[test]
    fn settings_for_fill_the_identity_and_reading() {
        let json = audit_settings_for("t\n", "x.csv", "km/s", "", &default_audit_settings())
            .map_err(|_| ())
            .unwrap();
        let settings = AuditSettings::from_json(&json).unwrap();
        assert_eq!(settings.data.as_ref().unwrap().file_name, "x.csv");
        assert!(settings.check_data(b"t\n").is_ok());
        assert_eq!(
            settings.read.velocity_unit,
            Some(VelocityUnit::KilometresPerSecond)
        );
        assert_eq!(settings.read.time, None);
    }

    /// Records survive the trip through CSV rows bit for bit, so a split run summarises as the
    /// whole one does.
    #[test]
    fn rows_round_trip_exactly() {
        let text = include_str!("../../../demo-data/corvin4-eccentric.tsv");
        let mut settings = AuditSettings::default();
        settings.injection.eccentricities = vec![0.0, 0.3];
        settings.injection.trials_per_cell = 2;
        let table = parse_table(text, &ReadOptions::new("corvin4-eccentric.tsv")).unwrap();
        let plan = AuditPlan::new(&table, &settings).unwrap();
        let records = plan.run_trials(0..4, &mut |_| {}).unwrap();
        let estimators = plan.estimators();
        for (idx, record) in records.iter().enumerate() {
            let row = record_to_csv_row(record, &estimators);
            let fields: Vec<&str> = row.iter().map(String::as_str).collect();
            let back = record_from_csv_row(&fields, &estimators, idx as u64).unwrap();
            // Bit for bit: `{:?}` shows every digit of every float and prints NaN (an undefined
            // Bayes factor) equal to itself, which `==` would not.
            assert_eq!(format!("{back:?}"), format!("{record:?}"));
        }
    }
}
