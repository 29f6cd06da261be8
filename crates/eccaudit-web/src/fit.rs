//! The least-squares orbit fit for the page: `Dataset.fit(settings)` runs the core fit and keeps
//! it, `drawPeriodogram` and `drawPhaseFold` draw it with eccaudit-plot.

use eccaudit_core::fit::figures::{phase_fold, search_periodogram};
use eccaudit_core::fit::{fit_orbit, FitData, FitOptions, FitReport};
use eccaudit_core::periodogram::{FrequencyLimits, Periodogram};
use eccaudit_plot::fit::{periodogram_figure, phase_figure};
use eccaudit_plot::PhaseFoldFigure;
use serde::{Deserialize, Serialize};
use wasm_bindgen::prelude::*;
use web_sys::HtmlCanvasElement;

use crate::dataset::Dataset;
use crate::render;
use crate::{js_error, to_js};

/// Shortest period searched when only the longest is given [d] (as `eccaudit fit`).
const DEFAULT_MIN_PERIOD: f64 = 1.0;
/// Samples of the model curve over one phase.
const CURVE_POINTS: usize = 600;

/// Settings of a fit from the page; absent fields take their defaults and an unknown field is an
/// error (so a misspelt setting is not silently ignored).
///
/// serde-wasm-bindgen (0.6) reads only the fields a struct names, so `deny_unknown_fields` never
/// fires for a JavaScript object; [`FitSettings::from_js`] checks the keys against
/// [`FitSettings::FIELDS`] first.
#[derive(Debug, Clone, Deserialize, Serialize)]
#[serde(default, deny_unknown_fields, rename_all = "camelCase")]
pub struct FitSettings {
    /// Keplerian companions (≥ 1).
    pub companions: usize,
    /// Shortest period searched [d]; with `max_period` absent, the longest is the time span.
    pub min_period: Option<f64>,
    /// Longest period searched [d]; with `min_period` absent, the shortest is 1 d.
    pub max_period: Option<f64>,
    /// Fit one jitter per instrument.
    pub jitter: bool,
    /// Fit a linear trend.
    pub trend: bool,
    /// Seed of the random starts.
    pub seed: u64,
}

impl Default for FitSettings {
    fn default() -> Self {
        let core = FitOptions::default();
        Self {
            companions: core.n_companions,
            min_period: None,
            max_period: None,
            jitter: core.jitter,
            trend: core.trend,
            seed: core.seed,
        }
    }
}

impl FitSettings {
    /// The JavaScript names of the settings.
    pub const FIELDS: [&'static str; 6] = [
        "companions",
        "minPeriod",
        "maxPeriod",
        "jitter",
        "trend",
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

    /// The core options, with the period range filled in the way `eccaudit fit` fills it.
    fn options(&self, data: &FitData) -> Result<FitOptions, String> {
        if self.companions == 0 {
            return Err("companions must be at least 1".into());
        }
        let mut options = FitOptions {
            n_companions: self.companions,
            jitter: self.jitter,
            trend: self.trend,
            seed: self.seed,
            ..FitOptions::default()
        };
        if self.min_period.is_some() || self.max_period.is_some() {
            let times = data.times();
            let span = times.iter().copied().fold(f64::NEG_INFINITY, f64::max)
                - times.iter().copied().fold(f64::INFINITY, f64::min);
            let min_period = self.min_period.unwrap_or(DEFAULT_MIN_PERIOD);
            let max_period = self.max_period.unwrap_or(span);
            if !(min_period > 0.0 && max_period > min_period) {
                return Err(format!(
                    "period range [{min_period}, {max_period}] d: the shortest period must be \
                     positive and below the longest"
                ));
            }
            options.limits = FrequencyLimits::PeriodRange {
                min_period,
                max_period,
            };
        }
        Ok(options)
    }
}

/// A fit kept with what its figures need.
pub(crate) struct StoredFit {
    data: FitData,
    report: FitReport,
    periodogram: Periodogram,
}

#[wasm_bindgen]
impl Dataset {
    /// Fit Keplerian orbits by least squares with `settings` (a [`FitSettings`] object, or
    /// `undefined` for the defaults); returns the core's `FitReport` as a plain object and keeps
    /// it for the figures. On error the previous fit is kept.
    pub fn fit(&mut self, settings: JsValue) -> Result<JsValue, JsValue> {
        let settings = FitSettings::from_js(settings)
            .map_err(|err| js_error(format!("fit settings: {err}")))?;
        let data = FitData::from_table(self.table());
        let options = settings.options(&data).map_err(js_error)?;
        let report = fit_orbit(&data, &options).map_err(js_error)?;
        let periodogram = search_periodogram(&data, &options).map_err(js_error)?;
        let out = to_js(&report)?;
        self.set_fit(Some(StoredFit {
            data,
            report,
            periodogram,
        }));
        Ok(out)
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
    fn options_follow_the_command_line_rules() {
        let data = FitData::new(
            &[0.0, 10.0, 250.0],
            &[1.0, 2.0, 3.0],
            &[1.0, 1.0, 1.0],
            &[0, 0, 0],
            &["a".into()],
        );
        let only_max = FitSettings {
            max_period: Some(100.0),
            ..FitSettings::default()
        };
        assert_eq!(
            only_max.options(&data).unwrap().limits,
            FrequencyLimits::PeriodRange {
                min_period: 1.0,
                max_period: 100.0
            }
        );
        let only_min = FitSettings {
            min_period: Some(5.0),
            ..FitSettings::default()
        };
        assert_eq!(
            only_min.options(&data).unwrap().limits,
            FrequencyLimits::PeriodRange {
                min_period: 5.0,
                max_period: 250.0
            }
        );
        let none = FitSettings {
            companions: 0,
            ..FitSettings::default()
        };
        assert!(none.options(&data).unwrap_err().contains("at least 1"));
    }
}
