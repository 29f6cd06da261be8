//! A loaded velocity table, held on the wasm side so the page parses it once.

use eccaudit_core::audit::data_fingerprint;
use eccaudit_core::model::RvModel;
use eccaudit_core::orbit::OrbitalElements;
use eccaudit_core::table::{parse_table, ReadOptions, TimeSpec, VelocityTable, VelocityUnit};
use eccaudit_plot::{ModelCurve, VelocityFigure, VelocitySeries};
use serde::{Deserialize, Serialize};
use wasm_bindgen::prelude::*;
use web_sys::HtmlCanvasElement;

use crate::render;
use crate::{js_error, to_js};

/// Points in a model curve drawn over the data: at least this many…
const MIN_CURVE_POINTS: usize = 2000;
/// …and enough for this many per orbital period, up to a cap.
const CURVE_POINTS_PER_PERIOD: f64 = 60.0;
const MAX_CURVE_POINTS: usize = 20_000;

/// Elements of a model curve typed into the page (one companion, one γ).
#[derive(Debug, Clone, Deserialize)]
pub struct CurveElements {
    /// Period [d].
    pub period: f64,
    /// Semi-amplitude [m/s].
    pub semi_amplitude: f64,
    /// Eccentricity.
    pub ecc: f64,
    /// Argument of periastron [degrees].
    pub omega_deg: f64,
    /// Time of periastron [d, the table's convention].
    pub t_peri: f64,
    /// Systemic velocity added to every instrument [m/s].
    pub gamma: f64,
}

/// Which table a result belongs to: its row count and the SHA-256 of the values a fit reads
/// (times, velocities, uncertainties, instrument of each row, instrument names), so a fit made
/// from the same text in a worker is recognised, and one made for another table is refused.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
pub(crate) struct TableIdentity {
    /// Number of measurements.
    pub n_rows: usize,
    /// SHA-256 (lower-case hex) of the values, as little-endian bytes in row order.
    pub sha256: String,
}

/// A parsed velocity table.
#[wasm_bindgen]
pub struct Dataset {
    table: VelocityTable,
    /// The last successful least-squares fit of this table (see `fit.rs`).
    fit: Option<crate::fit::StoredFit>,
}

/// An empty string means "not chosen"; anything else must parse.
fn optional<T: std::str::FromStr>(text: &str) -> Result<Option<T>, JsValue>
where
    T::Err: std::fmt::Display,
{
    let text = text.trim();
    if text.is_empty() {
        Ok(None)
    } else {
        text.parse().map(Some).map_err(js_error)
    }
}

#[wasm_bindgen]
impl Dataset {
    /// Parse `text` (the contents of `source_name`). `velocity_unit` and
    /// `time_convention` are the page's menus: empty means "from the header".
    pub fn parse(
        text: &str,
        source_name: &str,
        velocity_unit: &str,
        time_convention: &str,
    ) -> Result<Dataset, JsValue> {
        let options = ReadOptions {
            source_name: source_name.to_string(),
            velocity_unit: optional::<VelocityUnit>(velocity_unit)?,
            time: optional::<TimeSpec>(time_convention)?,
            delimiter: None,
        };
        let table = parse_table(text, &options).map_err(js_error)?;
        Ok(Dataset { table, fit: None })
    }

    /// The table summary (`TableSummary` of the core, as a plain object).
    pub fn summary(&self) -> Result<JsValue, JsValue> {
        to_js(&self.table.summary())
    }

    /// Number of measurements.
    #[wasm_bindgen(getter, js_name = nRows)]
    pub fn n_rows(&self) -> usize {
        self.table.n_rows()
    }

    /// Draw the velocities on `canvas`, with a model curve when `model` is
    /// an object of [`CurveElements`] (`null`/`undefined` for none).
    pub fn draw(&self, canvas: HtmlCanvasElement, model: JsValue) -> Result<(), JsValue> {
        render::on_canvas(&self.velocity_figure(model)?, canvas)
    }

    /// The same figure as [`Dataset::draw`], as SVG text of `width` × `height` pixels.
    #[wasm_bindgen(js_name = drawSvg)]
    pub fn draw_svg(&self, width: u32, height: u32, model: JsValue) -> Result<String, JsValue> {
        render::to_svg(&self.velocity_figure(model)?, width, height)
    }
}

impl Dataset {
    /// The velocity figure, with the typed-in model curve when `model` is not null.
    fn velocity_figure(&self, model: JsValue) -> Result<VelocityFigure, JsValue> {
        let curve = if model.is_null() || model.is_undefined() {
            None
        } else {
            let elements: CurveElements =
                serde_wasm_bindgen::from_value(model).map_err(js_error)?;
            Some(self.model_curve(&elements).map_err(js_error)?)
        };
        Ok(VelocityFigure {
            series: self.series(),
            curve,
            time_label: self.time_label(),
        })
    }

    fn series(&self) -> Vec<VelocitySeries> {
        let table = &self.table;
        let mut series: Vec<VelocitySeries> = table
            .instrument_names()
            .iter()
            .map(|name| VelocitySeries {
                name: name.clone(),
                ..Default::default()
            })
            .collect();
        for row in 0..table.n_rows() {
            let s = &mut series[table.instrument_index()[row]];
            s.time.push(table.times()[row]);
            s.velocity.push(table.velocities()[row]);
            s.uncertainty.push(table.uncertainties()[row]);
        }
        series
    }

    pub(crate) fn table(&self) -> &VelocityTable {
        &self.table
    }

    /// This table's [`TableIdentity`].
    pub(crate) fn identity(&self) -> TableIdentity {
        let table = &self.table;
        let mut bytes = Vec::with_capacity(32 * table.n_rows());
        for column in [table.times(), table.velocities(), table.uncertainties()] {
            for value in column {
                bytes.extend_from_slice(&value.to_le_bytes());
            }
        }
        for &instrument in table.instrument_index() {
            bytes.extend_from_slice(&(instrument as u64).to_le_bytes());
        }
        for name in table.instrument_names() {
            bytes.extend_from_slice(&(name.len() as u64).to_le_bytes());
            bytes.extend_from_slice(name.as_bytes());
        }
        TableIdentity {
            n_rows: table.n_rows(),
            sha256: data_fingerprint(&bytes),
        }
    }

    pub(crate) fn stored_fit(&self) -> Option<&crate::fit::StoredFit> {
        self.fit.as_ref()
    }

    pub(crate) fn set_fit(&mut self, fit: Option<crate::fit::StoredFit>) {
        self.fit = fit;
    }

    pub(crate) fn time_label(&self) -> String {
        self.table.time_convention().label()
    }

    /// The typed-in model sampled over the table's span.
    fn model_curve(&self, elements: &CurveElements) -> Result<ModelCurve, String> {
        let companion = OrbitalElements::new(
            elements.period,
            elements.semi_amplitude,
            elements.ecc,
            elements.omega_deg.to_radians(),
            elements.t_peri,
        )
        .map_err(|e| e.to_string())?;
        let times = self.table.times();
        let (first, last) = (times[0], times[times.len() - 1]);
        let pad = 0.03 * (last - first).max(1.0);
        let (start, end) = (first - pad, last + pad);
        let model = RvModel::new(vec![companion], vec![elements.gamma], 0.0, start)
            .map_err(|e| e.to_string())?;
        let per_period = (CURVE_POINTS_PER_PERIOD * (end - start) / elements.period).ceil();
        let n_points = (per_period as usize).clamp(MIN_CURVE_POINTS, MAX_CURVE_POINTS);
        let time: Vec<f64> = (0..n_points)
            .map(|i| start + (end - start) * i as f64 / (n_points - 1) as f64)
            .collect();
        let mut velocity = vec![0.0; time.len()];
        model
            .velocities_one_instrument(&time, 0, &mut velocity)
            .map_err(|e| e.to_string())?;
        Ok(ModelCurve { time, velocity })
    }
}
