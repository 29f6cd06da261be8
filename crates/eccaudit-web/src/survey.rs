//! Surveys in the page: the catalogue rows of a finished `AuditRun`, error rows, table folder
//! names and the catalogue's CSV and JSON bytes, all from `eccaudit_core::survey`, so the page's
//! catalogue is the command line's byte for byte. Rows cross into JavaScript as JSON text.

use eccaudit_core::survey::{
    catalogue_csv, catalogue_json, catalogue_rows, error_row, rows_from_json, table_folder,
    CatalogueRow,
};
use wasm_bindgen::prelude::*;

use crate::audit::AuditRun;
use crate::js_error;

/// The folder name of table `index` (0-based) of `n_tables`, as `eccaudit survey` names it.
#[wasm_bindgen(js_name = surveyFolder)]
pub fn survey_folder(index: u32, n_tables: u32, table: &str) -> String {
    table_folder(index as usize, n_tables as usize, table)
}

/// The catalogue row (as JSON: an array of one row) of a table that could not be audited.
#[wasm_bindgen(js_name = surveyErrorRows)]
pub fn survey_error_rows(table: &str, folder: &str, message: &str) -> String {
    catalogue_json(&[error_row(table, folder, message)])
}

fn rows(rows_json: &str) -> Result<Vec<CatalogueRow>, JsValue> {
    rows_from_json(rows_json).map_err(|e| js_error(format!("catalogue rows: {e}")))
}

/// The catalogue as CSV (the bytes `eccaudit survey` writes to catalogue.csv) from rows as JSON.
#[wasm_bindgen(js_name = catalogueCsv)]
pub fn catalogue_csv_text(rows_json: &str) -> Result<String, JsValue> {
    Ok(catalogue_csv(&rows(rows_json)?))
}

/// The catalogue as pretty JSON (the bytes of catalogue.json) from rows as JSON.
#[wasm_bindgen(js_name = catalogueJson)]
pub fn catalogue_json_text(rows_json: &str) -> Result<String, JsValue> {
    Ok(catalogue_json(&rows(rows_json)?))
}

#[wasm_bindgen]
impl AuditRun {
    /// The catalogue rows of the last finished report (as JSON), for table `table` in folder
    /// `folder`.
    #[wasm_bindgen(js_name = catalogueRows)]
    pub fn catalogue_rows(&self, table: &str, folder: &str) -> Result<String, JsValue> {
        let report = &self.report()?.1;
        Ok(catalogue_json(&catalogue_rows(table, folder, report, None)))
    }
}
