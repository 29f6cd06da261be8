//! eccaudit-web: the thin wasm-bindgen adapter between the page and eccaudit-core.
//!
//! Nothing scientific happens here: each export converts JavaScript values
//! into core types, calls the core, and converts the answer back. Errors
//! become JavaScript `Error`s in one place ([`js_error`]); a panic is
//! reported to the page through `globalThis.eccauditReportPanic` (see
//! [`install_panic_hook`]) instead of dying silently in the console.

mod audit;
mod bench;
mod canvas;
mod dataset;
mod demo;
mod fit;
mod population;
mod priors;
mod render;
mod survey;

pub use audit::{audit_settings_for, default_audit_settings, AuditRun};
pub use bench::KeplerBench;
pub use dataset::{CurveElements, Dataset};
pub use demo::demo_tables;
pub use fit::FitSettings;
pub use priors::{default_prior_specs, PriorSet};
pub use survey::{catalogue_csv_text, catalogue_json_text, survey_error_rows, survey_folder};

use serde::Serialize;
use wasm_bindgen::prelude::*;

/// Called once when the module is instantiated.
#[wasm_bindgen(start)]
pub fn start() {
    install_panic_hook();
}

/// The package version, for the page footer and exported settings.
#[wasm_bindgen]
pub fn version() -> String {
    env!("CARGO_PKG_VERSION").to_string()
}

/// Convert any displayable error into a JavaScript `Error` with that message.
pub fn js_error(err: impl std::fmt::Display) -> JsValue {
    js_sys::Error::new(&err.to_string()).into()
}

/// Serialise a core result for JavaScript as plain objects and arrays
/// (maps become objects, not `Map`s).
pub fn to_js<T: Serialize + ?Sized>(value: &T) -> Result<JsValue, JsValue> {
    value
        .serialize(&serde_wasm_bindgen::Serializer::json_compatible())
        .map_err(js_error)
}

/// Route panics to the page: log them, and hand the message to
/// `globalThis.eccauditReportPanic(message)` when the page defines it.
pub fn install_panic_hook() {
    std::panic::set_hook(Box::new(|info| {
        let message = info.to_string();
        web_sys::console::error_1(&JsValue::from_str(&message));
        let global = js_sys::global();
        if let Ok(report) = js_sys::Reflect::get(&global, &JsValue::from_str("eccauditReportPanic"))
        {
            if let Some(report) = report.dyn_ref::<js_sys::Function>() {
                let _ = report.call1(&JsValue::NULL, &JsValue::from_str(&message));
            }
        }
    }));
}
