//! eccaudit-web: the thin wasm-bindgen adapter between the page and eccaudit-core.
//!
//! Nothing scientific happens here: each export converts JavaScript values
//! into core types, calls the core, and converts the answer back. Errors
//! become JavaScript `Error`s in one place ([`js_error`]); a panic is
//! reported to the page through `globalThis.eccauditReportPanic` (see
//! [`install_panic_hook`]) instead of dying silently in the console.

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
