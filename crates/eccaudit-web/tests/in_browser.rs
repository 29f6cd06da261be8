//! The adapter in headless Chromium (wasm-bindgen-test): parse, summarise, draw, and fail politely.
#![cfg(target_arch = "wasm32")]

use eccaudit_web::{demo_tables, Dataset};
use wasm_bindgen::{JsCast, JsValue};
use wasm_bindgen_test::*;
use web_sys::{CanvasRenderingContext2d, HtmlCanvasElement};

wasm_bindgen_test_configure!(run_in_browser);

const VELKA: &str = include_str!("../../../demo-data/velka17-nearly-circular.csv");

fn canvas() -> HtmlCanvasElement {
    let document = web_sys::window().unwrap().document().unwrap();
    let canvas: HtmlCanvasElement = document
        .create_element("canvas")
        .unwrap()
        .dyn_into()
        .unwrap();
    canvas.set_width(640);
    canvas.set_height(360);
    document.body().unwrap().append_child(&canvas).unwrap();
    canvas
}

fn painted_pixels(canvas: &HtmlCanvasElement) -> usize {
    let context: CanvasRenderingContext2d = canvas
        .get_context("2d")
        .unwrap()
        .unwrap()
        .dyn_into()
        .unwrap();
    let data = context
        .get_image_data(0.0, 0.0, 640.0, 360.0)
        .unwrap()
        .data();
    data.chunks(4)
        .filter(|px| px[3] > 0 && (px[0] < 250 || px[1] < 250 || px[2] < 250))
        .count()
}

#[wasm_bindgen_test]
fn demo_table_parses_and_its_summary_counts_rows() {
    let dataset = Dataset::parse(VELKA, "velka17.csv", "", "").unwrap();
    assert_eq!(dataset.n_rows(), 26);
    let summary = dataset.summary().unwrap();
    let n_instruments =
        js_sys::Reflect::get(&summary, &JsValue::from_str("n_instruments")).unwrap();
    assert_eq!(n_instruments.as_f64(), Some(2.0));
}

#[wasm_bindgen_test]
fn drawing_paints_the_canvas() {
    let dataset = Dataset::parse(VELKA, "velka17.csv", "", "").unwrap();
    let canvas = canvas();
    assert_eq!(painted_pixels(&canvas), 0, "a new canvas is blank");
    dataset.draw(canvas.clone(), JsValue::NULL).unwrap();
    assert!(painted_pixels(&canvas) > 5_000);
}

#[wasm_bindgen_test]
fn bad_input_becomes_an_error_with_file_and_line() {
    let err = Dataset::parse(
        "time,rv [m/s],err\n1,2,3\n2,x,1\n3,4,1\n",
        "bad.csv",
        "",
        "",
    )
    .err()
    .expect("a non-numeric velocity is refused");
    let message = err.dyn_into::<js_sys::Error>().unwrap().message();
    assert!(String::from(message).starts_with("bad.csv:3:2:"));

    let err = Dataset::parse(VELKA, "velka17.csv", "furlongs/fortnight", "")
        .err()
        .unwrap();
    let message = String::from(err.dyn_into::<js_sys::Error>().unwrap().message());
    assert!(message.contains("furlongs/fortnight"), "{message}");
}

#[wasm_bindgen_test]
fn demo_tables_are_listed_with_their_text() {
    let demos = demo_tables().unwrap();
    let demos: js_sys::Array = demos.dyn_into().unwrap();
    assert_eq!(demos.length(), 2);
    let first = demos.get(0);
    let text = js_sys::Reflect::get(&first, &JsValue::from_str("text")).unwrap();
    assert_eq!(text.as_string().as_deref(), Some(VELKA));
}

const CORVIN: &str = include_str!("../../../demo-data/corvin4-eccentric.tsv");

fn error_message(err: JsValue) -> String {
    String::from(err.dyn_into::<js_sys::Error>().unwrap().message())
}

#[wasm_bindgen_test]
fn fit_returns_the_report_and_its_figures_paint() {
    let mut dataset = Dataset::parse(CORVIN, "corvin4.tsv", "", "").unwrap();
    assert!(!dataset.has_fit());
    let err = dataset.draw_periodogram(canvas()).err().unwrap();
    assert!(error_message(err).contains("no fit yet"));

    let settings = js_sys::JSON::parse(r#"{"companions": 1, "jitter": "off"}"#).unwrap();
    let report = dataset.fit(settings).unwrap();
    assert!(dataset.has_fit());
    // The demo header's truth is P = 112.6 d, e = 0.47; the fit lands near it (tests/cli/fit.rs).
    let period = js_sys::Reflect::get(&report, &"eccentric".into())
        .and_then(|s| js_sys::Reflect::get(&s, &"companions".into()))
        .and_then(|c| js_sys::Reflect::get(&c, &0.into()))
        .and_then(|c| js_sys::Reflect::get(&c, &"period".into()))
        .and_then(|p| js_sys::Reflect::get(&p, &"value".into()))
        .unwrap()
        .as_f64()
        .unwrap();
    assert!((period - 112.6).abs() < 1.5, "P = {period}");

    let periodogram = canvas();
    dataset.draw_periodogram(periodogram.clone()).unwrap();
    assert!(painted_pixels(&periodogram) > 5_000);
    let fold = canvas();
    dataset.draw_phase_fold(fold.clone(), 0).unwrap();
    assert!(painted_pixels(&fold) > 5_000);
    let err = dataset.draw_phase_fold(canvas(), 1).err().unwrap();
    assert!(error_message(err).contains("companion 2 does not exist"));
}

#[wasm_bindgen_test]
fn fit_settings_typos_and_failures_are_errors_that_keep_the_last_fit() {
    let mut dataset = Dataset::parse(CORVIN, "corvin4.tsv", "", "").unwrap();
    dataset.fit(JsValue::UNDEFINED).unwrap();
    let typo = js_sys::JSON::parse(r#"{"companion": 2}"#).unwrap();
    let message = error_message(dataset.fit(typo).err().unwrap());
    assert!(message.contains("unknown field `companion`"), "{message}");
    let range = js_sys::JSON::parse(r#"{"minPeriod": 50, "maxPeriod": 10}"#).unwrap();
    let message = error_message(dataset.fit(range).err().unwrap());
    assert!(
        message.contains("max_period = 10: must be above min_period = 50"),
        "{message}"
    );
    assert!(dataset.has_fit(), "a failed fit keeps the previous one");
    dataset.draw_phase_fold(canvas(), 0).unwrap();
}

#[wasm_bindgen_test]
fn a_fit_made_elsewhere_is_adopted_bit_for_bit_and_only_by_its_table() {
    // Two fitted companions, a trend and fitted jitters on Velka 17: a report with every kind of
    // field (options, tagged enums, NaN-free numbers, covariance) crosses as the worker sends it.
    let settings = r#"{"companions": 2, "trend": true, "jitter": "fit", "minPeriod": 2}"#;
    let mut worker = Dataset::parse(VELKA, "velka17.csv", "", "").unwrap();
    let transfer = worker
        .fit_for_transfer(js_sys::JSON::parse(settings).unwrap())
        .unwrap();
    // What `fit` returns is the transfer's `fit`, the same JSON.
    let mut direct = Dataset::parse(VELKA, "velka17.csv", "", "").unwrap();
    let report = direct.fit(js_sys::JSON::parse(settings).unwrap()).unwrap();
    let fit = js_sys::Reflect::get(&transfer, &"fit".into()).unwrap();
    assert_eq!(
        js_sys::JSON::stringify(&fit).unwrap(),
        js_sys::JSON::stringify(&report).unwrap()
    );

    // The page's Dataset of the same table adopts it without fitting and draws the same figures
    // (SVG text) as the Dataset that fitted.
    let mut page = Dataset::parse(VELKA, "velka17.csv", "", "").unwrap();
    assert!(!page.has_fit());
    page.adopt_fit(transfer.clone()).unwrap();
    assert!(page.has_fit());
    assert_eq!(
        page.draw_periodogram_svg(640, 360).unwrap(),
        direct.draw_periodogram_svg(640, 360).unwrap()
    );
    for companion in 0..2 {
        assert_eq!(
            page.draw_phase_fold_svg(640, 360, companion).unwrap(),
            direct.draw_phase_fold_svg(640, 360, companion).unwrap()
        );
    }

    // Another table (one row fewer) refuses it and keeps its own fit.
    let shorter: String = {
        let lines: Vec<&str> = VELKA.lines().collect();
        lines[..lines.len() - 1].join("\n")
    };
    let mut other = Dataset::parse(&shorter, "velka17.csv", "", "").unwrap();
    other.fit(JsValue::UNDEFINED).unwrap();
    let before = other.draw_periodogram_svg(640, 360).unwrap();
    let message = error_message(other.adopt_fit(transfer).err().unwrap());
    assert!(
        message.starts_with("the fit belongs to another table"),
        "{message}"
    );
    assert_eq!(other.draw_periodogram_svg(640, 360).unwrap(), before);
    // Not a transfer at all: one line naming what was wrong.
    let message = error_message(page.adopt_fit(JsValue::from_str("fit")).err().unwrap());
    assert!(
        message.starts_with("the fit worker's result: "),
        "{message}"
    );
}
