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
