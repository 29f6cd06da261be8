//! The least-squares orbit fit for the page: `Dataset.fit(settings)` runs the core fit and keeps
//! it; in the page the fit runs in a worker (`www/fit-worker.js`: `Dataset.fitForTransfer`) and
//! the page's own `Dataset` adopts it (`adoptFit`), so `drawPeriodogram` and `drawPhaseFold` draw
//! it with eccaudit-plot on the main thread without fitting again.

use eccaudit_core::fit::figures::{phase_fold, search_periodogram};
use eccaudit_core::fit::{FitData, FitOptions, FitReport};
use eccaudit_core::periodogram::Periodogram;
use eccaudit_core::spec::{fit_model, JitterMode, ModelFit, ModelSpec};
use eccaudit_plot::fit::{periodogram_figure, phase_figure};
use eccaudit_plot::PhaseFoldFigure;
use serde::{Deserialize, Serialize};
use wasm_bindgen::prelude::*;
use web_sys::HtmlCanvasElement;

use crate::dataset::{Dataset, TableIdentity};
use crate::render;
use crate::{js_error, to_js};

/// Samples of the model curve over one phase.
const CURVE_POINTS: usize = 600;

/// Settings of a fit from the page: the model ([`ModelSpec`], same meaning and defaults as the
/// command line's options) and the seed of the random starts; absent fields take their
/// defaults and an unknown field is an error (so a misspelt setting is not silently ignored).
///
/// serde-wasm-bindgen (0.6) reads only the fields a struct names, so `deny_unknown_fields` never
/// fires for a JavaScript object; [`FitSettings::from_js`] checks the keys against
/// [`FitSettings::FIELDS`] first.
#[derive(Debug, Clone, Deserialize, Serialize)]
#[serde(default, deny_unknown_fields, rename_all = "camelCase")]
pub struct FitSettings {
    /// Keplerian companions (1 to 3).
    pub companions: usize,
    /// Given periods [d] of the first companions, in order.
    pub periods: Vec<f64>,
    /// Shortest period searched [d]; absent: the core's default (1 d).
    pub min_period: Option<f64>,
    /// Longest period searched [d]; absent: the time span.
    pub max_period: Option<f64>,
    /// Jitter mode: "auto", "fit" or "off".
    pub jitter: JitterMode,
    /// Fit a linear trend.
    pub trend: bool,
    /// False-alarm limit of a detection (above it the detection is marginal, fitted all the same).
    pub max_fap: f64,
    /// Seed of the random starts.
    pub seed: u64,
}

impl Default for FitSettings {
    fn default() -> Self {
        let model = ModelSpec::DEFAULT;
        Self {
            companions: model.companions,
            periods: model.periods,
            min_period: None,
            max_period: model.max_period,
            jitter: model.jitter,
            trend: model.trend,
            max_fap: model.max_fap,
            seed: FitOptions::default().seed,
        }
    }
}

impl FitSettings {
    /// The JavaScript names of the settings.
    pub const FIELDS: [&'static str; 8] = [
        "companions",
        "periods",
        "minPeriod",
        "maxPeriod",
        "jitter",
        "trend",
        "maxFap",
        "seed",
    ];

    /// Settings from a JavaScript object (`undefined`/`null` for the defaults); an unknown key
    /// is an error naming it and the known ones.
    fn from_js(value: JsValue) -> Result<Self, String> {
        if value.is_null() || value.is_undefined() {
            return Ok(Self::default());
        }
        if let Some(object) = value.dyn_ref::<js_sys::Object>() {
            for key in js_sys::Object::keys(object).iter() {
                let key = key.as_string().unwrap_or_default();
                if !Self::FIELDS.contains(&key.as_str()) {
                    return Err(format!(
                        "unknown field `{key}`, expected one of {}",
                        Self::FIELDS.map(|f| format!("`{f}`")).join(", ")
                    ));
                }
            }
        }
        serde_wasm_bindgen::from_value(value).map_err(|err| err.to_string())
    }

    /// The model specification these settings describe (not yet validated).
    pub fn spec(&self) -> ModelSpec {
        ModelSpec {
            companions: self.companions,
            periods: self.periods.clone(),
            trend: self.trend,
            jitter: self.jitter,
            min_period: self.min_period.unwrap_or(ModelSpec::DEFAULT.min_period),
            max_period: self.max_period,
            max_fap: self.max_fap,
            audit_companion: None,
        }
    }

    /// The starting options the model does not decide.
    fn base(&self) -> FitOptions {
        FitOptions {
            seed: self.seed,
            ..FitOptions::default()
        }
    }
}

/// The default model of every form (the core's [`ModelSpec::DEFAULT`]) as JSON.
#[wasm_bindgen(js_name = defaultModelSpec)]
pub fn default_model_spec() -> String {
    serde_json::to_string(&ModelSpec::DEFAULT).expect("the model spec serialises")
}

/// A fit kept with what its figures need.
pub(crate) struct StoredFit {
    data: FitData,
    report: FitReport,
    periodogram: Periodogram,
}

/// A fit made by one `Dataset` (in the page's fit worker) as it crosses `postMessage` to the
/// `Dataset` of the same table on the main thread: which table it belongs to, the core's
/// `ModelFit` (the object `Dataset.fit` returns, shown and exported by the page as it is) and the
/// periodogram of its period search (for the figure). Serialised with `F = &ModelFit`, read back
/// with `F = FitReport`, which takes the report's fields of the `ModelFit` object and leaves the
/// others (goodness, jitter, detections, notes) to the page. Numbers cross as JavaScript numbers
/// (structured clone), not as text, so every finite f64 arrives as it was computed and NaN stays
/// NaN (JSON text would turn NaN into null).
#[derive(Serialize, Deserialize)]
struct FitTransfer<F, P> {
    /// The table the fit was made for.
    table: TableIdentity,
    /// The fit (`ModelFit` when sent, its `FitReport` when adopted).
    fit: F,
    /// The periodogram of the fit's period search.
    periodogram: P,
}

#[wasm_bindgen]
impl Dataset {
    /// Fit the model of `settings` (a [`FitSettings`] object, or `undefined` for the defaults)
    /// by least squares, with the jitter mode and false-alarm checks of the core's `fit_model`;
    /// returns the core's `ModelFit` as a plain object (the fit report's fields, plus
    /// `goodness`, `jitter`, `detections` and `notes`, the lines to show first) and keeps it for
    /// the figures. On error the previous fit is kept.
    pub fn fit(&mut self, settings: JsValue) -> Result<JsValue, JsValue> {
        let (fit, periodogram) = self.run_fit(settings)?;
        let out = to_js(&fit)?;
        self.keep_fit(fit.report, periodogram);
        Ok(out)
    }

    /// The same fit as [`Dataset::fit`], for the page's fit worker: returns
    /// `{table, fit, periodogram}` — the table's identity (row count and SHA-256 of its values),
    /// the `ModelFit` object `fit` returns, and the periodogram — for
    /// [`Dataset::adopt_fit`] of the page's `Dataset` of the same table. Keeps the fit too.
    #[wasm_bindgen(js_name = fitForTransfer)]
    pub fn fit_for_transfer(&mut self, settings: JsValue) -> Result<JsValue, JsValue> {
        let (fit, periodogram) = self.run_fit(settings)?;
        let out = to_js(&FitTransfer {
            table: self.identity(),
            fit: &fit,
            periodogram: &periodogram,
        })?;
        self.keep_fit(fit.report, periodogram);
        Ok(out)
    }

    /// Keep a fit made elsewhere (`transfer`, what [`Dataset::fit_for_transfer`] returned in a
    /// worker) for the figures, without fitting again. The fit must belong to this table: a
    /// different row count or SHA-256 of the values is an error, and the fit kept before stays.
    #[wasm_bindgen(js_name = adoptFit)]
    pub fn adopt_fit(&mut self, transfer: JsValue) -> Result<(), JsValue> {
        let transfer: FitTransfer<FitReport, Periodogram> =
            serde_wasm_bindgen::from_value(transfer)
                .map_err(|err| js_error(format!("the fit worker's result: {err}")))?;
        let here = self.identity();
        if transfer.table != here {
            return Err(js_error(format!(
                "the fit belongs to another table ({} rows, SHA-256 {}), not to the one loaded \
                 ({} rows, SHA-256 {}): fit again",
                transfer.table.n_rows, transfer.table.sha256, here.n_rows, here.sha256
            )));
        }
        self.keep_fit(transfer.fit, transfer.periodogram);
        Ok(())
    }

    /// True when a fit is kept.
    #[wasm_bindgen(getter, js_name = hasFit)]
    pub fn has_fit(&self) -> bool {
        self.stored_fit().is_some()
    }

    /// Draw the periodogram of the kept fit's period search on `canvas`.
    #[wasm_bindgen(js_name = drawPeriodogram)]
    pub fn draw_periodogram(&self, canvas: HtmlCanvasElement) -> Result<(), JsValue> {
        render::on_canvas(
            &periodogram_figure(&self.fit_or_error()?.periodogram, ""),
            canvas,
        )
    }

    /// The same figure as [`Dataset::draw_periodogram`], as SVG text of `width` × `height` pixels.
    #[wasm_bindgen(js_name = drawPeriodogramSvg)]
    pub fn draw_periodogram_svg(&self, width: u32, height: u32) -> Result<String, JsValue> {
        let figure = periodogram_figure(&self.fit_or_error()?.periodogram, "");
        render::to_svg(&figure, width, height)
    }

    /// Draw companion `companion_idx` (0-based) of the kept fit's adopted solution folded on its
    /// period, with residuals, on `canvas`.
    #[wasm_bindgen(js_name = drawPhaseFold)]
    pub fn draw_phase_fold(
        &self,
        canvas: HtmlCanvasElement,
        companion_idx: usize,
    ) -> Result<(), JsValue> {
        render::on_canvas(&self.phase_fold_figure(companion_idx)?, canvas)
    }

    /// The same figure as [`Dataset::draw_phase_fold`], as SVG text of `width` × `height` pixels.
    #[wasm_bindgen(js_name = drawPhaseFoldSvg)]
    pub fn draw_phase_fold_svg(
        &self,
        width: u32,
        height: u32,
        companion_idx: usize,
    ) -> Result<String, JsValue> {
        render::to_svg(&self.phase_fold_figure(companion_idx)?, width, height)
    }
}

impl Dataset {
    /// The fit of `settings` (`fit_model`, then the periodogram of its period search): the one
    /// computation behind [`Dataset::fit`] and [`Dataset::fit_for_transfer`].
    fn run_fit(&self, settings: JsValue) -> Result<(ModelFit, Periodogram), JsValue> {
        let settings = FitSettings::from_js(settings)
            .map_err(|err| js_error(format!("fit settings: {err}")))?;
        let model = settings.spec().validate().map_err(js_error)?;
        let data = FitData::from_table(self.table());
        let base = settings.base();
        let fit = fit_model(&data, &model, &base).map_err(js_error)?;
        let options = model.fit_options(fit.jitter.fitted, &base);
        let periodogram = search_periodogram(&data, &options).map_err(js_error)?;
        Ok((fit, periodogram))
    }

    /// Keep `report` and its `periodogram` as this table's fit, for the figures.
    fn keep_fit(&mut self, report: FitReport, periodogram: Periodogram) {
        self.set_fit(Some(StoredFit {
            data: FitData::from_table(self.table()),
            report,
            periodogram,
        }));
    }

    /// The phase-fold figure of companion `companion_idx` (0-based) of the kept fit.
    fn phase_fold_figure(&self, companion_idx: usize) -> Result<PhaseFoldFigure, JsValue> {
        let fit = self.fit_or_error()?;
        let fold = phase_fold(
            &fit.data,
            fit.report.adopted_solution(),
            fit.report.reference_time,
            companion_idx + 1,
            CURVE_POINTS,
        )
        .map_err(js_error)?;
        Ok(phase_figure(&fold, &fit.data, &self.time_label(), ""))
    }
}

impl Dataset {
    fn fit_or_error(&self) -> Result<&StoredFit, JsValue> {
        self.stored_fit()
            .ok_or_else(|| js_error("no fit yet: run a fit before drawing its figures"))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn field_list_matches_the_struct() {
        // The key check of `from_js` must know every field serde knows, by the same names.
        let value = serde_json::to_value(FitSettings::default()).unwrap();
        let mut keys: Vec<&str> = value
            .as_object()
            .unwrap()
            .keys()
            .map(String::as_str)
            .collect();
        let mut fields = FitSettings::FIELDS.to_vec();
        keys.sort_unstable();
        fields.sort_unstable();
        assert_eq!(keys, fields);
    }

    #[test]
    fn settings_follow_the_core_model() {
        let defaults = FitSettings::default();
        assert_eq!(defaults.spec(), ModelSpec::DEFAULT);
        let none = FitSettings {
            companions: 0,
            ..FitSettings::default()
        };
        assert_eq!(
            none.spec().validate().unwrap_err().to_string(),
            "companions = 0: 1 to 3"
        );
        let only_max = FitSettings {
            max_period: Some(100.0),
            ..FitSettings::default()
        };
        assert_eq!(only_max.spec().min_period, 1.0);
        let json: FitSettings =
            serde_json::from_str(r#"{"jitter": "fit", "maxFap": 0.05}"#).unwrap();
        assert_eq!(json.jitter, JitterMode::Fit);
        assert_eq!(json.max_fap, 0.05);
    }
}
