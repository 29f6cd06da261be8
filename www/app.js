// eccaudit page: DOM and events only. Every number comes from the wasm core.
import init, { Dataset, defaultModelSpec, demoTables, version } from "./pkg/eccaudit_web.js";
import { wireAudit } from "./audit-view.js";
import { wireSurvey } from "./survey-view.js";
import { wirePopulation } from "./population-view.js";
import { initPriorsView } from "./priors-view.js";
import { addFigureExports, addTableExports, stem } from "./exports.js";
import { $, el, hideError, messageOf, showError, tick, wireDropZone } from "./dom.js";
import { fixed, significant, withError } from "./format.js";

const state = {
  dataset: null,      // the loaded table (a wasm handle); kept when a new load fails
  model: null,        // elements of the overlaid curve, or null
  fit: null,          // the last fit report of this table (plain object), or null
  // The fit running in the fit worker: { id, dataset, started, timer }, or null.
  fitJob: null,
  // The loaded table as {text, name, velocityUnit, timeConvention}: what the views and their
  // workers read it from, or null.
  table: null,
  audit: null,        // the injection–recovery view (audit-view.js)
};

// Counts finished load attempts (good or bad), so tests can wait for one.
let loadAttempts = 0;
async function loadTable(text, sourceName) {
  try {
    if (!tryLoadTable(text, sourceName)) return false;
    // Draw in a task of its own, so parsing and drawing a large table do not hold the main
    // thread in one piece.
    await tick();
    redraw();
    return true;
  } finally {
    document.body.dataset.loadAttempts = String(++loadAttempts);
  }
}

function tryLoadTable(text, sourceName) {
  let dataset;
  try {
    dataset = Dataset.parse(text, sourceName, $("velocity-unit").value, $("time-convention").value);
  } catch (err) {
    showError($("load-error"), messageOf(err));
    return false;
  }
  hideError($("load-error"));
  if (state.dataset) state.dataset.free();
  state.dataset = dataset;
  state.table = { text, name: sourceName, velocityUnit: $("velocity-unit").value, timeConvention: $("time-convention").value };
  state.audit?.tableChanged();
  state.model = null;
  clearFit();
  renderSummary(dataset.summary());
  return true;
}

const STATED_BY = {
  header: "stated in the header",
  explicit: "chosen on this page",
  inferred: "inferred from the magnitude of the times",
};

function renderSummary(summary) {
  const box = $("summary");
  box.replaceChildren();
  box.append(
    el("p", { class: "facts", "data-testid": "summary-facts" },
      `${summary.source_name}: ${summary.n_rows} measurements from ${summary.n_instruments} ` +
      `instrument${summary.n_instruments === 1 ? "" : "s"} over ${fixed(summary.overall.baseline_days, 1)} days ` +
      `(time: ${summary.time_convention_label}, ${STATED_BY[summary.time_convention.stated_by]}; ` +
      `velocities read in ${summary.velocity_unit_in_source}, shown in m/s).`),
  );
  const head = el("tr", {},
    el("th", {}, "instrument"), el("th", {}, "N"), el("th", {}, "first"), el("th", {}, "last"),
    el("th", {}, "median σ [m/s]"), el("th", {}, "rms [m/s]"), el("th", {}, "weighted rms [m/s]"));
  const rows = summary.instruments.map((inst, idx) =>
    el("tr", {},
      el("td", {}, el("span", { class: `swatch swatch-${idx % 7}` }), inst.name),
      el("td", {}, inst.n_rows), el("td", {}, fixed(inst.first_time, 3)), el("td", {}, fixed(inst.last_time, 3)),
      el("td", {}, fixed(inst.median_uncertainty_m_s)), el("td", {}, fixed(inst.rms_m_s)),
      el("td", {}, fixed(inst.weighted_rms_m_s))));
  const all = summary.overall;
  rows.push(el("tr", { class: "total" },
    el("td", {}, "all"), el("td", {}, summary.n_rows), el("td", {}, fixed(all.first_time, 3)),
    el("td", {}, fixed(all.last_time, 3)), el("td", {}, fixed(all.median_uncertainty_m_s)),
    el("td", {}, fixed(all.rms_m_s)), el("td", {}, fixed(all.weighted_rms_m_s))));
  box.append(el("table", { "data-testid": "summary-table" }, el("thead", {}, head), el("tbody", {}, ...rows)));
  if (summary.notices.length > 0) {
    box.append(el("ul", { class: "notices" }, ...summary.notices.map((n) => el("li", {}, n))));
  }
}

function redraw() {
  if (!state.dataset) return;
  try {
    state.dataset.draw($("velocity-canvas"), state.model);
    hideError($("model-error"));
  } catch (err) {
    showError($("model-error"), messageOf(err));
  }
}

function readElements(form) {
  const data = new FormData(form);
  const number = (name) => {
    const raw = String(data.get(name) ?? "").trim();
    if (raw === "") throw new Error(`${name}: a number is needed`);
    const value = Number(raw);
    if (!Number.isFinite(value)) throw new Error(`${name}: '${raw}' is not a number`);
    return value;
  };
  return {
    period: number("period"),
    semi_amplitude: number("semi_amplitude"),
    ecc: number("ecc"),
    omega_deg: number("omega_deg"),
    t_peri: number("t_peri"),
    gamma: number("gamma"),
  };
}

function wireLoader() {
  const zone = $("drop-zone");
  const readFile = async (file) => loadTable(await file.text(), file.name);
  $("file-input").addEventListener("change", (ev) => {
    const [file] = ev.target.files;
    if (file) readFile(file);
    ev.target.value = "";
  });
  wireDropZone(zone, $("file-input"), ([file]) => {
    if (file) readFile(file);
  });

  const demos = demoTables();
  const select = $("demo-select");
  select.replaceChildren(el("option", { value: "" }, "—"), ...demos.map((demo, idx) =>
    el("option", { value: String(idx), title: demo.description }, demo.file_name)));
  select.addEventListener("change", () => {
    const demo = demos[Number(select.value)];
    if (demo) loadTable(demo.text, demo.file_name);
  });
  return { demos, select };
}

function wireModelForm() {
  const form = $("elements");
  form.addEventListener("submit", (ev) => {
    ev.preventDefault();
    try {
      state.model = readElements(form);
    } catch (err) {
      showError($("model-error"), messageOf(err));
      return;
    }
    redraw();
  });
  $("clear-model").addEventListener("click", () => {
    state.model = null;
    redraw();
  });
}

// ---- Orbit fit (least squares) ----

// Counts finished fit attempts (good or bad), so tests can wait for one.
let fitAttempts = 0;

function readFitSettings(form) {
  const data = new FormData(form);
  const period = (name, label) => {
    const raw = String(data.get(name) ?? "").trim();
    if (raw === "") return undefined;
    const value = Number(raw);
    if (!Number.isFinite(value)) throw new Error(`${label}: '${raw}' is not a number`);
    return value;
  };
  const periods = String(data.get("periods") ?? "").split(/[,\s]+/).filter((s) => s !== "").map((s) => {
    const v = Number(s);
    if (!Number.isFinite(v)) throw new Error(`periods: '${s}' is not a number`);
    return v;
  });
  const maxFap = period("maxFap", "FAP limit");
  const settings = {
    companions: Number(data.get("companions")),
    periods,
    jitter: String(data.get("jitter")),
    trend: data.get("trend") === "on",
  };
  const minPeriod = period("minPeriod", "min period");
  const maxPeriod = period("maxPeriod", "max period");
  if (minPeriod !== undefined) settings.minPeriod = minPeriod;
  if (maxPeriod !== undefined) settings.maxPeriod = maxPeriod;
  if (maxFap !== undefined) settings.maxFap = maxFap;
  return settings;
}

/**
 * The model of the fit form as the core's ModelSpec (snake_case, as in the replay file), used
 * by the fit, the prior set and the audit alike. Throws on a value that is not a number.
 */
function currentModelSpec() {
  const s = readFitSettings($("fit-settings"));
  const spec = JSON.parse(defaultModelSpec());
  spec.companions = s.companions;
  spec.periods = s.periods;
  spec.jitter = s.jitter;
  spec.trend = s.trend;
  if (s.minPeriod !== undefined) spec.min_period = s.minPeriod;
  if (s.maxPeriod !== undefined) spec.max_period = s.maxPeriod;
  if (s.maxFap !== undefined) spec.max_fap = s.maxFap;
  return spec;
}

// The form's defaults come from the core (defaultModelSpec), not from the HTML.
function fillModelDefaults(form) {
  const spec = JSON.parse(defaultModelSpec());
  form.elements.companions.value = String(spec.companions);
  form.elements.jitter.value = spec.jitter;
  form.elements.trend.checked = spec.trend;
  form.elements.maxFap.value = String(spec.max_fap);
  form.elements.minPeriod.placeholder = String(spec.min_period);
}

function clearFit() {
  if (state.fitJob) stopFit("cancelled", "Fit cancelled: a new table was loaded.");
  else $("fit-progress").textContent = "";
  state.fit = null;
  hideError($("fit-error"));
  $("fit-results").hidden = true;
  for (const id of ["fit-status", "fit-solution-note", "lucy-sweeney"]) $(id).textContent = "";
  $("fit-warnings").replaceChildren();
  $("fit-elements").replaceChildren();
  $("fold-companion").replaceChildren();
  for (const id of ["periodogram-canvas", "phase-canvas"]) {
    const canvas = $(id);
    canvas.getContext("2d").clearRect(0, 0, canvas.width, canvas.height);
  }
}

// A fitted value with its formal error: the error to two significant digits, the value to match.
const estimate = (e, fallbackDigits) => withError(e?.value, e?.error, { fallbackDigits });

function adoptedSolution(report) {
  return report.adopted === "circular" && report.circular ? report.circular : report.eccentric;
}

function renderFitStatus(report) {
  const solution = adoptedSolution(report);
  const status = $("fit-status");
  status.classList.toggle("not-converged", !solution.converged);
  status.textContent =
    `${solution.converged ? "Converged" : "Not converged: the best point found is shown"}. ` +
    `${report.n_reached_best} of ${report.n_starts_last_stage} starts reached the best χ² ` +
    `(${report.n_starts} starts in all). Adopted: ${report.adopted} solution. ` +
    `χ² = ${fixed(report.goodness.chi_squared, 2)} for ${report.goodness.dof} degrees of freedom ` +
    `(p = ${significant(report.goodness.p_value, 3)}). ` +
    `Jitter: ${report.jitter.reason}.`;
  // The notes (excess scatter, marginal detections) come first.
  $("fit-warnings").replaceChildren(
    ...report.notes.map((w) => el("li", { class: "note" }, w)),
    ...report.warnings.map((w) => el("li", {}, w)),
  );
}

function renderElements(report) {
  const solution = adoptedSolution(report);
  const comps = solution.companions;
  const names = comps.map((_, c) => `companion ${c + 1}`);
  const row = (label, cells) => el("tr", {}, el("td", {}, label), ...cells.map((c) => el("td", {}, c)));
  const spanRow = (label, text) =>
    el("tr", {}, el("td", {}, label), el("td", { colspan: String(comps.length) }, text));
  const ecc = (c) => (c.held_circular ? "0 (held circular)" : estimate(c.eccentricity, 3));
  const omega = (c) => (c.held_circular ? "–" : estimate(c.omega_deg, 1));
  const rows = [
    row("P [d]", comps.map((c) => estimate(c.period, 4))),
    row("K [m/s]", comps.map((c) => estimate(c.semi_amplitude, 2))),
    row("e", comps.map(ecc)),
    row("ω [°]", comps.map(omega)),
    row("Tp [d]", comps.map((c) => estimate(c.time_of_periastron, 2))),
  ];
  rows.push(el("tr", { class: "group" }, el("td", { colspan: String(comps.length + 1) }, "instruments")));
  for (const inst of solution.instruments) {
    rows.push(spanRow(`γ ${inst.name} [m/s]`, estimate(inst.offset, 2)));
    if (inst.jitter !== null && inst.jitter !== undefined) {
      rows.push(spanRow(`jitter ${inst.name} [m/s]`, fixed(inst.jitter, 2)));
    }
  }
  if (solution.trend) rows.push(spanRow("trend [m/s/d]", estimate(solution.trend, 4)));
  rows.push(el("tr", { class: "group" }, el("td", { colspan: String(comps.length + 1) }, "goodness of fit")));
  rows.push(spanRow("χ²", `${fixed(solution.chi_squared, 2)} (${solution.dof} degrees of freedom)`));
  rows.push(spanRow("reduced χ²", fixed(solution.reduced_chi_squared, 3)));
  rows.push(spanRow("rms [m/s]", fixed(solution.rms, 2)));
  const head = el("tr", {}, el("th", {}, ""), ...names.map((n) => el("th", {}, n)));
  $("fit-elements").replaceChildren(el("thead", {}, head), el("tbody", {}, ...rows));
  $("fit-solution-note").textContent =
    `${report.adopted === "circular" ? "Circular refit" : "Eccentric solution (minimum χ²)"}; ` +
    `± are formal 1σ errors from the covariance. Reference epoch ${fixed(report.reference_time, 3)}.`;

  const tests = report.eccentric.companions
    .map((c, idx) => ({ c, idx }))
    .filter(({ c }) => c.lucy_sweeney)
    .map(({ c, idx }) => {
      const ls = c.lucy_sweeney;
      const decision = ls.significant
        ? "eccentricity significant"
        : "not significant: kept circular";
      return `companion ${idx + 1}: ê = ${fixed(ls.eccentricity, 3)}, σe = ${fixed(ls.eccentricity_error, 3)}, ` +
        `p = ${Number(ls.probability).toExponential(2)} (threshold ${ls.threshold}) → ${decision}`;
    });
  $("lucy-sweeney").textContent =
    `Lucy–Sweeney test: ${tests.length > 0 ? tests.join("; ") : "not computed"}. ` +
    `Adopted: ${report.adopted} solution.`;
}

function drawFitFigures() {
  if (!state.dataset || !state.fit) return;
  state.dataset.drawPeriodogram($("periodogram-canvas"));
  const idx = Number($("fold-companion").value || "0");
  state.dataset.drawPhaseFold($("phase-canvas"), idx);
}

function renderFit(report) {
  const n = adoptedSolution(report).companions.length;
  const select = $("fold-companion");
  select.replaceChildren(...Array.from({ length: n }, (_, c) =>
    el("option", { value: String(c) }, `${c + 1}: P = ${fixed(adoptedSolution(report).companions[c].period.value, 2)} d`)));
  $("companion-choice").hidden = n < 2;
  renderFitStatus(report);
  renderElements(report);
  $("fit-results").hidden = false;
  drawFitFigures();
}

// The least-squares fit runs in a module worker (fit-worker.js), started at the first fit and
// again after a cancel (terminating is the only way to stop a fit in progress). The page's
// Dataset adopts the worker's result (Dataset.adoptFit) and draws its figures here.
let fitWorker = null;

function startFitWorker() {
  if (fitWorker) return fitWorker;
  fitWorker = new Worker(new URL("./fit-worker.js", import.meta.url), { type: "module" });
  fitWorker.addEventListener("message", (event) => onFitMessage(event.data));
  fitWorker.addEventListener("error", (event) => {
    event.preventDefault();
    dropFitWorker();
    const detail = event.message ? `: ${event.message}` : "";
    if (state.fitJob) finishFit("error", `the fit worker could not run${detail}`);
  });
  return fitWorker;
}

function dropFitWorker() {
  fitWorker?.terminate();
  fitWorker = null;
}

function setFitBusy(busy) {
  const button = $("fit-button");
  button.textContent = busy ? "Fitting…" : "Fit";
  button.classList.toggle("busy", busy);
  button.setAttribute("aria-busy", String(busy));
  button.title = busy ? "Fitting; press again to start over with the settings as they are now" : "";
  $("fit-cancel").disabled = !busy;
}

// The one-line state of a running fit, with the time it has taken (ticking here, on the main
// thread, while the worker fits).
function showFitProgress() {
  const job = state.fitJob;
  if (!job) return;
  const seconds = Math.floor((performance.now() - job.started) / 1000);
  const what = job.working ? "Fitting in the background" : "Starting the fit worker";
  $("fit-progress").textContent = `${what}… ${seconds} s (the page stays usable; Cancel stops it).`;
}

// An error line, and the reassurance that the fit shown before is still the one shown.
function keptFitNote(message) {
  if (!state.fit) return message;
  return `${message}${/[.!?]$/.test(message) ? "" : "."} The previous fit is still shown.`;
}

// End the running fit: `outcome` is "done", "error" or "cancelled"; `message` goes to the error
// box for an error and to the progress line otherwise.
function finishFit(outcome, message = "") {
  const job = state.fitJob;
  if (!job) return;
  clearInterval(job.timer);
  state.fitJob = null;
  setFitBusy(false);
  if (outcome === "error") {
    $("fit-progress").textContent = "";
    showError($("fit-error"), keptFitNote(message));
  } else {
    $("fit-progress").textContent = message;
  }
  document.body.dataset.fitOutcome = outcome;
  document.body.dataset.fitAttempts = String(++fitAttempts);
}

// Stop the running fit by terminating its worker; the next fit starts a fresh one.
function stopFit(outcome, message) {
  dropFitWorker();
  finishFit(outcome, message);
}

function cancelFit() {
  if (!state.fitJob) return;
  stopFit("cancelled", keptFitNote("Fit cancelled."));
}

function onFitMessage(msg) {
  const job = state.fitJob;
  if (!job || msg.id !== job.id) return; // a message of a fit that was cancelled or replaced
  if (msg.type === "working") {
    job.working = true;
    showFitProgress();
  } else if (msg.type === "error") {
    // After a panic the worker's module is unusable: start a fresh one next time.
    if (msg.fatal) dropFitWorker();
    finishFit("error", msg.message);
  } else if (msg.type === "result") {
    try {
      if (job.dataset !== state.dataset) throw new Error("the table changed during the fit: fit again");
      state.dataset.adoptFit(msg.transfer);
      state.fit = msg.transfer.fit;
      hideError($("fit-error"));
      renderFit(state.fit);
    } catch (err) {
      finishFit("error", messageOf(err));
      return;
    }
    finishFit("done");
  }
}

let fitIds = 0;
function runFit(form) {
  let settings;
  try {
    if (!state.dataset || !state.table) throw new Error("load a velocity table first");
    settings = readFitSettings(form);
  } catch (err) {
    if (state.fitJob) stopFit("cancelled", "");
    showError($("fit-error"), keptFitNote(messageOf(err)));
    document.body.dataset.fitOutcome = "error";
    document.body.dataset.fitAttempts = String(++fitAttempts);
    return;
  }
  // A new request replaces a fit still running.
  if (state.fitJob) stopFit("cancelled", "");
  hideError($("fit-error"));
  const job = { id: ++fitIds, dataset: state.dataset, started: performance.now(), working: false, timer: null };
  job.timer = setInterval(showFitProgress, 1000);
  state.fitJob = job;
  setFitBusy(true);
  showFitProgress();
  startFitWorker().postMessage({ id: job.id, table: state.table, settings });
}

function wireFit() {
  const form = $("fit-settings");
  fillModelDefaults(form);
  form.addEventListener("submit", (ev) => {
    ev.preventDefault();
    runFit(form);
  });
  $("fit-cancel").addEventListener("click", cancelFit);
  $("fold-companion").addEventListener("change", () => {
    try {
      state.dataset.drawPhaseFold($("phase-canvas"), Number($("fold-companion").value));
    } catch (err) {
      showError($("fit-error"), messageOf(err));
    }
  });
}

// PNG/SVG under each figure, CSV/JSON under each table of this view (exports.js).
function wireExports() {
  const named = (what) => () => `${stem(state.table?.name)}-${what}`;
  const dataset = () => {
    if (!state.dataset) throw new Error("load a velocity table first");
    return state.dataset;
  };
  addFigureExports($("velocity-canvas"), {
    fileStem: named("velocities"),
    svg: (w, h) => dataset().drawSvg(w, h, state.model),
  });
  addFigureExports($("periodogram-canvas"), {
    fileStem: named("periodogram"),
    svg: (w, h) => dataset().drawPeriodogramSvg(w, h),
  });
  addFigureExports($("phase-canvas"), {
    fileStem: () => `${named("phase-fold")()}-${Number($("fold-companion").value || "0") + 1}`,
    svg: (w, h) => dataset().drawPhaseFoldSvg(w, h, Number($("fold-companion").value || "0")),
  });
  addTableExports($("summary"), {
    name: "summary-table",
    table: () => $("summary").querySelector("table"),
    fileStem: named("summary"),
    json: () => state.dataset?.summary(),
  });
  addTableExports($("fit-elements"), { fileStem: named("elements"), json: () => state.fit });
}

async function main() {
  // A panic inside the wasm module reports here instead of vanishing in the console.
  globalThis.eccauditReportPanic = (message) => showError($("load-error"), `internal error: ${message}`);
  await init();
  $("build-info").textContent = `eccaudit ${version()}`;
  const { demos, select } = wireLoader();
  wireModelForm();
  wireFit();
  wireExports();
  state.audit = wireAudit({ currentTable: () => state.table, el, currentModel: currentModelSpec });
  const population = wirePopulation();
  wireSurvey({ settingsFor: state.audit.settingsFor, population });
  initPriorsView({ currentTable: () => state.table, currentModel: currentModelSpec });
  if (demos.length > 0) {
    select.value = "0";
    await loadTable(demos[0].text, demos[0].file_name);
  }
  document.body.dataset.ready = "true";
  // Offline use: the service worker keeps copies of the page's own files.
  if ("serviceWorker" in navigator) {
    navigator.serviceWorker.register("./sw.js").catch((err) => console.warn(`offline copy unavailable: ${messageOf(err)}`));
  }
}

main().catch((err) => {
  showError($("load-error"), `eccaudit could not start: ${messageOf(err)}`);
});
