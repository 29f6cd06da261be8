//! The invented demo tables, compiled into the module so the page needs no fetch to show them.

use serde::Serialize;
use wasm_bindgen::prelude::*;

/// One demo table as the page lists it.
#[derive(Debug, Serialize)]
struct DemoTable {
    file_name: &'static str,
    description: &'static str,
    text: &'static str,
}

const DEMO_TABLES: [DemoTable; 2] = [
    DemoTable {
        file_name: "velka17-nearly-circular.csv",
        description:
            "Invented star Velka 17: K ≈ 21 m/s, P ≈ 4.8 d, nearly circular; two instruments.",
        text: include_str!("../../../demo-data/velka17-nearly-circular.csv"),
    },
    DemoTable {
        file_name: "corvin4-eccentric.tsv",
        description: "Invented star Corvin 4: P ≈ 113 d, clearly eccentric; km/s, tab-separated.",
        text: include_str!("../../../demo-data/corvin4-eccentric.tsv"),
    },
];

/// The demo tables: `[{file_name, description, text}]`.
#[wasm_bindgen(js_name = demoTables)]
pub fn demo_tables() -> Result<JsValue, JsValue> {
    crate::to_js(&DEMO_TABLES[..])
}
