//! The population of e in the page: the inference from saved posterior draws (run in a worker by `www/population-worker.js`), its text, JSON and CSV, and its two figures on canvas or as SVG, all from `eccaudit_core::population` and `eccaudit_plot`.

use eccaudit_core::audit::AuditSettings;
use eccaudit_core::fit::FitData;
use eccaudit_core::population::{
    infer_population, kipping_2013_marks, parse_samples_ecsv, population_csv, samples_file_name,
    survey_table_samples, write_samples_ecsv, PopulationSettings,
};
use eccaudit_core::sampler::Steer;
use eccaudit_core::table::parse_table;
use eccaudit_plot::{BetaParameterFigure, PopulationDensityFigure, POPULATION_FIGURE_SIZE};
use serde::Deserialize;
use serde_json::Value;
use wasm_bindgen::prelude::*;
use web_sys::HtmlCanvasElement;

use crate::js_error;
use crate::render::{on_canvas, to_svg};

/// One saved-draws file as the page read it.
#[derive(Deserialize)]
struct SamplesFile {
    name: String,
    text: String,
}

/// Most files one population takes in the page (a bound on what a dropped folder allocates).
const MAX_FILES: usize = 5000;

/// The population report of the saved draws in `files_json` (`[{name, text}, …]`, in the
/// order given) with the command line's defaults and `seed`: `{json, text, csv}` — the bytes
/// `eccaudit population --out` writes as population.json and population.csv, and its text
/// summary. A malformed file is an error naming the file, line and column.
#[wasm_bindgen(js_name = populationFromSamples)]
pub fn population_from_samples(files_json: &str, seed: u32) -> Result<JsValue, JsValue> {
    let files: Vec<SamplesFile> = serde_json::from_str(files_json).map_err(js_error)?;
    if files.len() > MAX_FILES {
        return Err(js_error(format!(
            "{} files: the page takes at most {MAX_FILES} (use eccaudit population)",
            files.len()
        )));
    }
    let samples = files
        .iter()
        .map(|f| parse_samples_ecsv(&f.text, &f.name))
        .collect::<Result<Vec<_>, _>>()
        .map_err(js_error)?;
    let defaults = PopulationSettings::default();
    let settings = PopulationSettings {
        sampler: eccaudit_core::sampler::SamplerSettings {
            seed: u64::from(seed),
            ..defaults.sampler
        },
        ..defaults
    };
    let report =
        infer_population(&samples, &settings, &mut || Steer::Continue).map_err(js_error)?;
    let out = js_sys::Object::new();
    let set = |key: &str, value: String| {
        js_sys::Reflect::set(&out, &key.into(), &value.into()).map(|_| ())
    };
    set(
        "json",
        serde_json::to_string_pretty(&report).map_err(js_error)?,
    )?;
    set("text", report.to_string())?;
    set("csv", population_csv(&report))?;
    Ok(out.into())
}

/// The posterior draws the survey saves for one table (the bytes `eccaudit survey
/// --save-samples SPEC` writes), as JSON `[{name, text}, …]`, one file per companion named
/// `FOLDER/posterior-e.ecsv` (or `-cN` with several): the table read with the audit settings'
/// units and time convention, the posterior under `spec` with their model and seed. Meant for a
/// worker.
#[wasm_bindgen(js_name = surveySamples)]
pub fn survey_samples(
    table_text: &str,
    source_name: &str,
    folder: &str,
    settings_json: &str,
    spec: &str,
) -> Result<String, JsValue> {
    let settings = AuditSettings::from_json(settings_json).map_err(js_error)?;
    let options = settings.read.options(source_name);
    let table = parse_table(table_text, &options).map_err(js_error)?;
    let data = FitData::from_table(&table);
    let samples = survey_table_samples(&data, source_name, &settings, spec).map_err(js_error)?;
    let files: Vec<serde_json::Value> = samples
        .iter()
        .map(|s| {
            serde_json::json!({
                "name": format!("{folder}/{}", samples_file_name(s.companion, settings.model.companions)),
                "text": write_samples_ecsv(s),
            })
        })
        .collect();
    serde_json::to_string(&files).map_err(js_error)
}

fn numbers(v: &Value) -> Vec<f64> {
    v.as_array()
        .map(|a| a.iter().map(|x| x.as_f64().unwrap_or(f64::NAN)).collect())
        .unwrap_or_default()
}

fn parse(report_json: &str) -> Result<Value, JsValue> {
    serde_json::from_str(report_json).map_err(|e| js_error(format!("population report: {e}")))
}

/// The density figure from a report's JSON (the fields `population_density_figure` reads).
fn density_figure(report_json: &str) -> Result<PopulationDensityFigure, JsValue> {
    let v = parse(report_json)?;
    let d = &v["beta"]["density"];
    Ok(PopulationDensityFigure {
        e: numbers(&d["e"]),
        median: numbers(&d["median"]),
        band68: (numbers(&d["lower68"]), numbers(&d["upper68"])),
        band95: (numbers(&d["lower95"]), numbers(&d["upper95"])),
        histogram_median: numbers(&v["histogram"]["density"]["median"]),
        stars: v["stars"]
            .as_array()
            .map(|stars| {
                stars
                    .iter()
                    .filter(|s| s["used"] == Value::Bool(true))
                    .map(|s| numbers(&s["draw_density"]))
                    .collect()
            })
            .unwrap_or_default(),
    })
}

/// The (a, b) figure from a report's JSON, Kipping's (2013) values marked.
fn beta_figure(report_json: &str) -> Result<BetaParameterFigure, JsValue> {
    let v = parse(report_json)?;
    let draws = v["beta"]["draws"]
        .as_array()
        .map(|d| {
            d.iter()
                .map(|p| {
                    let p = numbers(p);
                    (
                        p.first().copied().unwrap_or(f64::NAN),
                        p.get(1).copied().unwrap_or(f64::NAN),
                    )
                })
                .collect()
        })
        .unwrap_or_default();
    Ok(BetaParameterFigure {
        draws,
        marks: kipping_2013_marks(),
    })
}

/// Draws the population density over each star's posterior on `canvas`.
#[wasm_bindgen(js_name = drawPopulationDensity)]
pub fn draw_population_density(
    report_json: &str,
    canvas: HtmlCanvasElement,
) -> Result<(), JsValue> {
    on_canvas(&density_figure(report_json)?, canvas)
}

/// The same figure as SVG text (`width` × `height` pixels).
#[wasm_bindgen(js_name = drawPopulationDensitySvg)]
pub fn draw_population_density_svg(
    report_json: &str,
    width: u32,
    height: u32,
) -> Result<String, JsValue> {
    to_svg(&density_figure(report_json)?, width, height)
}

/// Draws the (a, b) posterior of the Beta population on `canvas`.
#[wasm_bindgen(js_name = drawPopulationBeta)]
pub fn draw_population_beta(report_json: &str, canvas: HtmlCanvasElement) -> Result<(), JsValue> {
    on_canvas(&beta_figure(report_json)?, canvas)
}

/// The same figure as SVG text.
#[wasm_bindgen(js_name = drawPopulationBetaSvg)]
pub fn draw_population_beta_svg(
    report_json: &str,
    width: u32,
    height: u32,
) -> Result<String, JsValue> {
    to_svg(&beta_figure(report_json)?, width, height)
}

/// Size in pixels of both population figures, `[width, height]`.
#[wasm_bindgen(js_name = populationFigureSize)]
pub fn population_figure_size() -> Vec<u32> {
    vec![POPULATION_FIGURE_SIZE.0, POPULATION_FIGURE_SIZE.1]
}
