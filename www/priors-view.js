// eccaudit page, "Eccentricity priors": DOM and events only. Each prior of the set is sampled in
// its own worker (priors-worker.js), up to navigator.hardwareConcurrency at once; the wasm
// PriorSet collects the runs in prior order and assembles the same report as
// `eccaudit priors --json`, which is kept in window.eccauditPriorsReport for inspection.
import { PriorSet, defaultPriorSpecs, defaultPriorsRequest } from "./pkg/eccaudit_web.js";
import { addFigureExports, addTableExports, stem } from "./exports.js";
import { $, el, hideError as hideBox, messageOf, showError as showBox } from "./dom.js";
import { duration, fixed as fixedTo, withError as withErrorTo } from "./format.js";

const view = {
  currentTable: () => null, // { text, name, velocityUnit, timeConvention } of the loaded table
  currentModel: () => ({}), // the model of the fit form (the core's ModelSpec)
  running: null,            // { workers, cancelled } while a set runs
  shown: null,              // the PriorSet whose results are on the page
};

// Counts finished run attempts (done, failed or cancelled), so tests can wait for one.
let attempts = 0;
function finishAttempt(outcome) {
  document.body.dataset.priorsOutcome = outcome;
  document.body.dataset.priorsAttempts = String(++attempts);
}

const showError = (message) => showBox("priors-error", message);
const hideError = () => hideBox("priors-error");

// The non-empty lines of the prior list, each with its line number in the text area.
function priorLines() {
  return $("priors-specs").value.split("\n")
    .map((text, idx) => ({ text: text.trim(), line: idx + 1 }))
    .filter((entry) => entry.text !== "");
}

function readInteger(form, name, label) {
  const raw = String(new FormData(form).get(name) ?? "").trim();
  const value = Number(raw);
  if (raw === "" || !Number.isSafeInteger(value) || value < 0) {
    throw new Error(`${label}: '${raw}' is not a whole number ≥ 0`);
  }
  return value;
}

// The request as the CLI's flags would give it (field names of the core's SensitivityRequest).
function readRequest(form, lines) {
  return {
    priors: lines.map((entry) => entry.text),
    walkers: readInteger(form, "walkers", "walkers"),
    steps: readInteger(form, "steps", "steps"),
    burn: readInteger(form, "burn", "burn-in"),
    seed: readInteger(form, "seed", "seed"),
    model: view.currentModel(),
  };
}

function setRunning(running) {
  $("priors-run").disabled = running;
  $("priors-cancel").disabled = !running;
  $("priors-progress").hidden = !running;
}

function runSet(form) {
  if (view.running) return;
  const table = view.currentTable();
  if (!table) {
    showError("Load a velocity table first.");
    finishAttempt("error");
    return;
  }
  const lines = priorLines();
  let set;
  let requestJson;
  try {
    requestJson = JSON.stringify(readRequest(form, lines));
    set = new PriorSet(requestJson);
  } catch (err) {
    const number = err && err.priorNumber;
    const where = number && lines[number - 1] ? `Line ${lines[number - 1].line}: ` : "";
    showError(`${where}${messageOf(err)}`);
    finishAttempt("error");
    return;
  }
  hideError();
  const nPriors = set.priorCount;
  // Progress counts log-density evaluations against each run's budget; a run that converges
  // jumps to its end, so the time left is an upper bound.
  const stepsPerRun = set.budgetPerRun;
  const done = new Array(nPriors).fill(0);
  const detail = new Array(nPriors).fill("");
  const started = performance.now();
  const running = { workers: new Set(), cancelled: false };
  view.running = running;
  setRunning(true);
  const bar = $("priors-bar");
  const eta = $("priors-eta");
  const labels = set.labels();
  const updateProgress = () => {
    const total = nPriors * stepsPerRun;
    const sum = done.reduce((a, b) => a + b, 0);
    bar.max = total;
    bar.value = sum;
    const elapsed = (performance.now() - started) / 1000;
    const remaining = sum > 0 ? (elapsed * (total - sum)) / sum : Infinity;
    const finished = done.filter((d) => d >= stepsPerRun).length;
    const live = detail.filter((d) => d).join("; ");
    eta.textContent = `${finished} of ${nPriors} priors done · ${Math.floor((100 * sum) / total)} % ` +
      `of the budget · at most ${duration(remaining)} left` + (live ? ` · ${live}` : "");
  };
  updateProgress();

  let next = 0;
  let completed = 0;
  const stop = (outcome, message) => {
    running.cancelled = true;
    for (const worker of running.workers) worker.terminate();
    running.workers.clear();
    view.running = null;
    setRunning(false);
    if (message) showError(message);
    if (outcome !== "done") set.free();
    finishAttempt(outcome);
  };
  const launch = () => {
    const index = next++;
    const worker = new Worker(new URL("./priors-worker.js", import.meta.url), { type: "module" });
    running.workers.add(worker);
    worker.addEventListener("message", (event) => {
      if (running.cancelled) return;
      const msg = event.data;
      if (msg.type === "progress") {
        done[index] = msg.done;
        detail[index] = Number.isFinite(msg.tauTimes)
          ? `prior ${index + 1}: step ${msg.steps}, ${Math.round(msg.tauTimes)} τ at the last check`
          : `prior ${index + 1}: step ${msg.steps}`;
        updateProgress();
      } else if (msg.type === "result") {
        worker.terminate();
        running.workers.delete(worker);
        try {
          set.addRun(index, msg.part);
        } catch (err) {
          stop("error", `Prior ${index + 1} (${labels[index]}): ${messageOf(err)}`);
          return;
        }
        done[index] = stepsPerRun;
        detail[index] = "";
        completed++;
        updateProgress();
        if (completed === nPriors) {
          stop("done");
          showResults(set);
        } else if (next < nPriors) {
          launch();
        }
      } else if (msg.type === "error") {
        running.cancelled = true;
        stop("error", `Prior ${index + 1} (${labels[index]}): ${msg.message}. Previous results are kept.`);
      }
    });
    worker.addEventListener("error", (event) => {
      if (running.cancelled) return;
      running.cancelled = true;
      stop("error", `Prior ${index + 1}: the worker failed: ${event.message ?? "unknown error"}`);
    });
    worker.postMessage({ requestJson, priorIndex: index, table });
  };
  const parallel = Math.max(1, Math.min(nPriors, navigator.hardwareConcurrency || 1));
  for (let i = 0; i < parallel; i++) launch();

  $("priors-cancel").onclick = () => {
    running.cancelled = true;
    stop("cancelled");
    eta.textContent = "";
  };
}

// Posterior summaries are shown to three decimals.
const fixed = (value, digits = 3) => fixedTo(value, digits);
const interval = ([lo, hi]) => `[${fixed(lo)}, ${fixed(hi)}]`;
const withError = (value, error) => withErrorTo(value, error, { digits: 3 });

function bayesFactorText(bf) {
  if (bf.status === "estimated") return withError(bf.bf01, bf.bf01_error);
  if (bf.status === "upper_limit") return `< ${bf.bf01.toExponential(2)}`;
  return `undefined: ${bf.note}`;
}

function renderTable(report) {
  const head = el("tr", {},
    el("th", {}, "#"), el("th", {}, "prior on e"), el("th", {}, "median"), el("th", {}, "mode"),
    el("th", {}, "mean"), el("th", {}, "68% interval"), el("th", {}, "95% interval"),
    el("th", { title: "Posterior probability that e < 0.05, with its Monte-Carlo error" }, "P(e<0.05)"),
    el("th", { title: "Information gained from prior to posterior, KL divergence in nats" }, "KL [nats]"),
    el("th", { title: "Savage–Dickey Bayes factor, circular over eccentric; above 1 favours a circular orbit" },
      "BF01 (circ/ecc)"),
    el("th", {}, "converged"));
  const rows = report.runs.map((run, idx) => {
    const s = run.summary;
    return el("tr", { "data-testid": "priors-row" },
      el("td", {}, idx + 1), el("td", { class: "label" }, s.prior_label),
      el("td", { "data-testid": "priors-median" }, withError(s.median, s.median_mc_error)),
      el("td", {}, fixed(s.mode)), el("td", {}, fixed(s.mean)),
      el("td", {}, interval(s.interval_68)), el("td", {}, interval(s.interval_95)),
      el("td", {}, withError(s.p_nearly_circular, s.p_nearly_circular_mc_error)),
      el("td", {}, withError(s.information_gain.nats, s.information_gain.standard_error)),
      el("td", { class: s.bayes_factor.status === "undefined" ? "label" : "" }, bayesFactorText(s.bayes_factor)),
      el("td", { class: s.converged ? "" : "not-converged" }, s.converged ? "yes" : "NO (see below)"));
  });
  $("priors-table").replaceChildren(el("thead", {}, head), el("tbody", {}, ...rows));
  // As the command line's text report: the first failed check of each run that did not
  // converge (all checks on demand), and runs whose start was moved inside the truncation.
  const notes = [];
  report.runs.forEach((run, idx) => {
    const s = run.summary;
    if (!s.converged) {
      const issues = s.verdict.split("\n").slice(1).map((line) => line.replace(/^- /, ""));
      notes.push(el("li", { class: "not-converged" },
        `Prior ${idx + 1} not converged: ${issues[0] ?? s.verdict}`,
        el("details", {}, el("summary", {}, `all ${issues.length} failed checks`),
          el("ul", {}, ...issues.map((issue) => el("li", {}, issue))))));
    }
    if (run.start.eccentricity_moved) {
      notes.push(el("li", {}, `Prior ${idx + 1}: the least-squares e lies outside this prior's ` +
        "truncation; walkers started inside it."));
    }
  });
  $("priors-notes").replaceChildren(...notes);
}

function drawChosen() {
  const set = view.shown;
  if (!set) return;
  const index = Number($("priors-choice").value);
  try {
    set.drawCorner($("priors-corner"), index);
    set.drawTraces($("priors-traces"), index);
  } catch (err) {
    showError(messageOf(err));
  }
}

function showResults(set) {
  const json = set.reportJson();
  const report = JSON.parse(json);
  if (view.shown) view.shown.free();
  view.shown = set;
  window.eccauditPriorsReport = report;
  const ls = report.least_squares;
  const s = report.sampler;
  $("priors-status").textContent =
    `${report.n_points} epochs; least squares P = ${fixed(ls.period, 4)} d, e = ${fixed(ls.e)}` +
    `${ls.e_error === null ? "" : ` ± ${fixed(ls.e_error)}`}. ` +
    `Sampler: ${report.length.n_ensembles} independent ensembles of ${s.n_walkers}+ walkers, ` +
    `${s.n_burn} burn-in steps, ` +
    (report.length.until_converged
      ? `each run extended until converged (at most ${report.length.max_evaluations} evaluations), `
      : `${s.n_steps} steps, `) +
    `seed ${s.seed}. ` +
    `Spread of the posterior median over the set: ${fixed(report.median_spread)}.`;
  renderTable(report);
  $("priors-methods").replaceChildren(...report.methods.map((m) => el("li", {}, m)));
  $("priors-choice").replaceChildren(...report.runs.map((run, idx) =>
    el("option", { value: String(idx) }, `${idx + 1}. ${run.summary.prior_label}`)));
  $("priors-results").hidden = false;
  set.drawPosteriors($("priors-canvas"));
  drawChosen();
}

/**
 * Wire the section; `currentTable()` returns the loaded table's text and read options,
 * `currentModel()` the model of the fit form (companions, trend, jitter mode, …).
 */
export function initPriorsView({ currentTable, currentModel }) {
  view.currentTable = currentTable;
  view.currentModel = currentModel;
  $("priors-specs").value = defaultPriorSpecs().join("\n");
  const form = $("priors-settings");
  // The sampler controls default from the core (defaultPriorsRequest), not from the HTML.
  const defaults = JSON.parse(defaultPriorsRequest());
  for (const name of ["walkers", "steps", "burn", "seed"]) form.elements[name].value = String(defaults[name]);
  form.addEventListener("submit", (ev) => {
    ev.preventDefault();
    runSet(form);
  });
  $("priors-choice").addEventListener("change", drawChosen);
  $("priors-reset").addEventListener("click", () => {
    $("priors-specs").value = defaultPriorSpecs().join("\n");
  });
  wireExports();
}

// PNG/SVG under each figure and CSV/JSON under the table (exports.js).
function wireExports() {
  const set = () => {
    if (!view.shown) throw new Error("run the prior set first");
    return view.shown;
  };
  const chosen = () => Number($("priors-choice").value);
  const named = (what) => () => `${stem(view.currentTable()?.name)}-${what}`;
  addFigureExports($("priors-canvas"), { fileStem: named("posteriors"), svg: (w, h) => set().drawPosteriorsSvg(w, h) });
  addFigureExports($("priors-corner"), {
    fileStem: () => named("corner")() + `-prior-${chosen() + 1}`, svg: (w, h) => set().drawCornerSvg(w, h, chosen()),
  });
  addFigureExports($("priors-traces"), {
    fileStem: () => named("traces")() + `-prior-${chosen() + 1}`, svg: (w, h) => set().drawTracesSvg(w, h, chosen()),
  });
  addTableExports($("priors-table").parentElement, {
    name: "priors-table", table: () => $("priors-table"), fileStem: named("priors"), json: () => set().reportJson(),
  });
}
