//! The prior-sensitivity set in the page: a worker runs one prior of the set
//! (`Dataset.runPriorOfSet`), and the page's [`PriorSet`] collects the runs in prior order,
//! assembles the core's `SensitivityReport` (the same JSON as `eccaudit priors --json`) and draws
//! its figures with eccaudit-plot.

use eccaudit_core::fit::FitData;
use eccaudit_core::posterior::{
    assemble_sensitivity_report, prior_label, sensitivity_run, sensitivity_start,
    LeastSquaresEccentricity, PosteriorError, PosteriorRun, SensitivityReport, SensitivityRequest,
    SensitivitySettings, DEFAULT_PRIOR_SPECS,
};
use eccaudit_core::sampler::Chains;
use eccaudit_plot::{
    corner_figure, corner_figure_size, eccentricity_figure, eccentricity_figure_size, trace_figure,
    trace_figure_size, CORNER_POINTS,
};
use serde::{Deserialize, Serialize};
use wasm_bindgen::prelude::*;
use web_sys::HtmlCanvasElement;

use crate::dataset::Dataset;
use crate::render;
use crate::{js_error, to_js};

/// Shortest time between two progress calls to JavaScript [ms].
const PROGRESS_INTERVAL_MS: f64 = 100.0;

/// The request as JSON text (a [`SensitivityRequest`]: unknown fields are refused) turned into
/// settings; a bad prior spec becomes an `Error` with a `priorNumber` property (1-based).
fn settings_from_json(request_json: &str) -> Result<SensitivitySettings, JsValue> {
    let request: SensitivityRequest = serde_json::from_str(request_json)
        .map_err(|err| js_error(format!("prior-set settings: {err}")))?;
    request.to_settings().map_err(|err| {
        let error = js_error(&err);
        if let PosteriorError::PriorInList { number, .. } = err {
            let _ = js_sys::Reflect::set(
                &error,
                &JsValue::from_str("priorNumber"),
                &JsValue::from_f64(number as f64),
            );
        }
        error
    })
}

/// What a worker hands back for one prior, besides the chains.
#[derive(Debug, Serialize, Deserialize)]
struct PriorPart {
    n_points: usize,
    least_squares: LeastSquaresEccentricity,
    run: PosteriorRun,
}

/// The chains' sizes and counters; the samples travel as `Float64Array`s beside them.
#[derive(Debug, Serialize, Deserialize)]
struct ChainsShape {
    n_walkers: usize,
    dim: usize,
    thin: usize,
    n_stored_steps: usize,
    accepted: Vec<u64>,
    proposals_per_walker: u64,
}

fn set(object: &JsValue, key: &str, value: &JsValue) -> Result<(), JsValue> {
    js_sys::Reflect::set(object, &JsValue::from_str(key), value).map(|_| ())
}

fn get(object: &JsValue, key: &str) -> Result<JsValue, JsValue> {
    js_sys::Reflect::get(object, &JsValue::from_str(key))
}

fn chains_to_js(chains: &Chains) -> Result<JsValue, JsValue> {
    let shape = ChainsShape {
        n_walkers: chains.n_walkers,
        dim: chains.dim,
        thin: chains.thin,
        n_stored_steps: chains.n_stored_steps,
        accepted: chains.accepted.clone(),
        proposals_per_walker: chains.proposals_per_walker,
    };
    let out = to_js(&shape)?;
    set(
        &out,
        "samples",
        &js_sys::Float64Array::from(chains.samples.as_slice()),
    )?;
    set(
        &out,
        "log_densities",
        &js_sys::Float64Array::from(chains.log_densities.as_slice()),
    )?;
    Ok(out)
}

fn chains_from_js(value: &JsValue) -> Result<Chains, JsValue> {
    let shape: ChainsShape = serde_wasm_bindgen::from_value(value.clone()).map_err(js_error)?;
    let array = |key: &str| -> Result<Vec<f64>, JsValue> {
        get(value, key)?
            .dyn_into::<js_sys::Float64Array>()
            .map(|a| a.to_vec())
            .map_err(|_| js_error(format!("chains.{key} must be a Float64Array")))
    };
    let chains = Chains {
        n_walkers: shape.n_walkers,
        dim: shape.dim,
        thin: shape.thin,
        n_stored_steps: shape.n_stored_steps,
        samples: array("samples")?,
        log_densities: array("log_densities")?,
        accepted: shape.accepted,
        proposals_per_walker: shape.proposals_per_walker,
    };
    let steps = chains.n_walkers * chains.n_stored_steps;
    if chains.samples.len() != steps * chains.dim || chains.log_densities.len() != steps {
        return Err(js_error(
            "chains: the sample arrays do not match the stated sizes",
        ));
    }
    Ok(chains)
}

#[wasm_bindgen]
impl Dataset {
    /// Run prior `prior_index` (0-based) of the set asked for by `request_json` (a
    /// `SensitivityRequest` as JSON text) on this table: the least-squares start, then the
    /// sampler, which extends the run until converged or out of budget.
    /// `progress(evaluations, maxEvaluations, stepsDone, autocorrelationTimes)` is called at
    /// most every 100 ms while sampling (`autocorrelationTimes`: run length in units of the
    /// largest τ at the last convergence check, NaN before the first).
    /// Returns `{n_points, least_squares, run, chains}` for [`PriorSet::add_run`]; meant for a
    /// worker (terminate the worker to cancel).
    #[wasm_bindgen(js_name = runPriorOfSet)]
    pub fn run_prior_of_set(
        &self,
        request_json: &str,
        prior_index: usize,
        progress: Option<js_sys::Function>,
    ) -> Result<JsValue, JsValue> {
        let settings = settings_from_json(request_json)?;
        let data = FitData::from_table(self.table());
        let start = sensitivity_start(&data, &settings).map_err(js_error)?;
        let mut last_call = f64::NEG_INFINITY;
        let mut observer = |p: eccaudit_core::posterior::PosteriorProgress| {
            if let Some(callback) = &progress {
                let now = js_sys::Date::now();
                if now - last_call >= PROGRESS_INTERVAL_MS {
                    last_call = now;
                    let args = js_sys::Array::of4(
                        &JsValue::from_f64(p.evaluations as f64),
                        &JsValue::from_f64(p.max_evaluations as f64),
                        &JsValue::from_f64(p.steps_done as f64),
                        &JsValue::from_f64(p.autocorrelation_times),
                    );
                    let _ = callback.apply(&JsValue::NULL, &args);
                }
            }
            eccaudit_core::sampler::Steer::Continue
        };
        let run = sensitivity_run(&data, &settings, &start, prior_index, &mut observer)
            .map_err(js_error)?;
        let chains = chains_to_js(&run.chains)?;
        let out = to_js(&PriorPart {
            n_points: data.n_points(),
            least_squares: start.least_squares,
            run,
        })?;
        set(&out, "chains", &chains)?;
        Ok(out)
    }
}

/// The default prior set written as editable specs, one string per prior.
#[wasm_bindgen(js_name = defaultPriorSpecs)]
pub fn default_prior_specs() -> Vec<String> {
    DEFAULT_PRIOR_SPECS.iter().map(|s| s.to_string()).collect()
}

/// The default request of the priors form (the core's [`SensitivityRequest::default`]: walkers,
/// steps, burn-in, seed, …) as JSON, so the page's controls default from the core.
#[wasm_bindgen(js_name = defaultPriorsRequest)]
pub fn default_priors_request() -> String {
    serde_json::to_string(&SensitivityRequest::default()).expect("the request serialises")
}

/// A prior-sensitivity set being collected on the page: its settings, the runs received so
/// far, and (once complete) the report.
#[wasm_bindgen]
pub struct PriorSet {
    settings: SensitivitySettings,
    header: Option<(usize, LeastSquaresEccentricity)>,
    runs: Vec<Option<PosteriorRun>>,
    report: Option<SensitivityReport>,
}

#[wasm_bindgen]
impl PriorSet {
    /// Read and check the request (JSON text of a `SensitivityRequest`); a bad prior spec throws
    /// an `Error` with `priorNumber`, its 1-based position in `priors`.
    #[wasm_bindgen(constructor)]
    pub fn new(request_json: &str) -> Result<PriorSet, JsValue> {
        let settings = settings_from_json(request_json)?;
        for prior in &settings.priors {
            settings
                .posterior
                .with_eccentricity(*prior)
                .priors
                .validate()
                .map_err(js_error)?;
        }
        let n_priors = settings.priors.len();
        Ok(PriorSet {
            settings,
            header: None,
            runs: vec![None; n_priors],
            report: None,
        })
    }

    /// Number of priors in the set.
    #[wasm_bindgen(getter, js_name = priorCount)]
    pub fn prior_count(&self) -> usize {
        self.settings.priors.len()
    }

    /// The label of each prior, in order.
    pub fn labels(&self) -> Vec<String> {
        self.settings.priors.iter().map(prior_label).collect()
    }

    /// The evaluation budget of one run (a run that converges stops earlier), for progress
    /// bars.
    #[wasm_bindgen(getter, js_name = budgetPerRun)]
    pub fn budget_per_run(&self) -> f64 {
        self.settings.length.max_evaluations as f64
    }

    /// Store the result of `Dataset.runPriorOfSet` for prior `prior_index`; once every prior has
    /// its run, the report is assembled.
    #[wasm_bindgen(js_name = addRun)]
    pub fn add_run(&mut self, prior_index: usize, part: JsValue) -> Result<(), JsValue> {
        let n_priors = self.runs.len();
        if prior_index >= n_priors {
            return Err(js_error(PosteriorError::PriorIndex {
                index: prior_index,
                n_priors,
            }));
        }
        let chains = chains_from_js(&get(&part, "chains")?)?;
        let PriorPart {
            n_points,
            least_squares,
            mut run,
        } = serde_wasm_bindgen::from_value(part).map_err(js_error)?;
        run.chains = chains;
        self.header = Some((n_points, least_squares));
        self.runs[prior_index] = Some(run);
        if self.runs.iter().all(Option::is_some) {
            let runs = self.runs.iter().flatten().cloned().collect();
            self.report = Some(
                assemble_sensitivity_report(n_points, least_squares, &self.settings, runs)
                    .map_err(js_error)?,
            );
        }
        Ok(())
    }

    /// True once every prior has its run.
    #[wasm_bindgen(getter, js_name = isComplete)]
    pub fn is_complete(&self) -> bool {
        self.report.is_some()
    }

    /// The report as pretty JSON text, exactly as `eccaudit priors --json` prints it.
    #[wasm_bindgen(js_name = reportJson)]
    pub fn report_json(&self) -> Result<String, JsValue> {
        serde_json::to_string_pretty(self.report_or_error()?).map_err(js_error)
    }

    /// Posterior over prior density of e, one panel per prior; sizes the canvas.
    #[wasm_bindgen(js_name = drawPosteriors)]
    pub fn draw_posteriors(&self, canvas: HtmlCanvasElement) -> Result<(), JsValue> {
        let report = self.report_or_error()?;
        let size = eccentricity_figure_size(report.runs.len());
        render::on_sized_canvas(&eccentricity_figure(report), canvas, size)
    }

    /// The same figure as [`PriorSet::draw_posteriors`], as SVG text of `width` × `height` pixels
    /// (the canvas's size after drawing).
    #[wasm_bindgen(js_name = drawPosteriorsSvg)]
    pub fn draw_posteriors_svg(&self, width: u32, height: u32) -> Result<String, JsValue> {
        render::to_svg(&eccentricity_figure(self.report_or_error()?), width, height)
    }

    /// Corner plot of prior `prior_index`'s samples; sizes the canvas.
    #[wasm_bindgen(js_name = drawCorner)]
    pub fn draw_corner(
        &self,
        canvas: HtmlCanvasElement,
        prior_index: usize,
    ) -> Result<(), JsValue> {
        let run = self.run_or_error(prior_index)?;
        let size = corner_figure_size(run.chains.dim);
        render::on_sized_canvas(&corner_figure(run, CORNER_POINTS), canvas, size)
    }

    /// The same figure as [`PriorSet::draw_corner`], as SVG text of `width` × `height` pixels.
    #[wasm_bindgen(js_name = drawCornerSvg)]
    pub fn draw_corner_svg(
        &self,
        width: u32,
        height: u32,
        prior_index: usize,
    ) -> Result<String, JsValue> {
        let run = self.run_or_error(prior_index)?;
        render::to_svg(&corner_figure(run, CORNER_POINTS), width, height)
    }

    /// Walker traces of prior `prior_index`; sizes the canvas.
    #[wasm_bindgen(js_name = drawTraces)]
    pub fn draw_traces(
        &self,
        canvas: HtmlCanvasElement,
        prior_index: usize,
    ) -> Result<(), JsValue> {
        let run = self.run_or_error(prior_index)?;
        let size = trace_figure_size(run.chains.dim);
        render::on_sized_canvas(&trace_figure(run), canvas, size)
    }

    /// The same figure as [`PriorSet::draw_traces`], as SVG text of `width` × `height` pixels.
    #[wasm_bindgen(js_name = drawTracesSvg)]
    pub fn draw_traces_svg(
        &self,
        width: u32,
        height: u32,
        prior_index: usize,
    ) -> Result<String, JsValue> {
        render::to_svg(
            &trace_figure(self.run_or_error(prior_index)?),
            width,
            height,
        )
    }
}

impl PriorSet {
    fn report_or_error(&self) -> Result<&SensitivityReport, JsValue> {
        self.report
            .as_ref()
            .ok_or_else(|| js_error("the prior set is not complete yet"))
    }

    fn run_or_error(&self, prior_index: usize) -> Result<&PosteriorRun, JsValue> {
        self.runs
            .get(prior_index)
            .and_then(Option::as_ref)
            .ok_or_else(|| js_error(format!("no run for prior {} yet", prior_index + 1)))
    }
}
