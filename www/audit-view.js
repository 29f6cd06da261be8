// eccaudit page: the injection–recovery run and the statement (DOM and workers only; every
// number comes from the wasm core).
//
// The main thread builds one AuditRun (the fit of the table, the design); a pool of module Web
// Workers, each with its own AuditRun of the same table and settings, takes small chunks of
// trial indices from a shared queue until none is left; the main thread's AuditRun summarises
// the rows and draws. Results depend only on the settings and the table, never on the split.
import { AuditRun, auditSettingsFor, defaultAuditSettings } from "./pkg/eccaudit_web.js";
import { addFigureExports, addTableExports, downloadText as download, stem } from "./exports.js";
import { $, messageOf, tick } from "./dom.js";
import { clockText, fixed, gridValue, rate } from "./format.js";

/** Trials per chunk: a few, so progress moves smoothly and idle workers find work. Extra
 * (adaptive) batches are mostly quick least-squares trials, sent in larger chunks. */
function chunkSize(nTrials, nWorkers, extra) {
  return Math.max(1, Math.min(extra ? 64 : 4, Math.ceil(nTrials / (nWorkers * (extra ? 8 : 16)))));
}

async function copyText(text) {
  try {
    await navigator.clipboard.writeText(text);
    return "Copied to the clipboard.";
  } catch {
    // Fallback for pages without the asynchronous clipboard (e.g. not a secure context).
    const area = document.createElement("textarea");
    area.className = "offscreen";
    area.value = text;
    document.body.append(area);
    area.select();
    let ok = false;
    try { ok = document.execCommand("copy"); } catch { ok = false; }
    area.remove();
    return ok ? "Copied to the clipboard." : "Could not copy: select the paragraph and copy it by hand.";
  }
}

/**
 * Wire the "Injection–recovery" and "Statement" sections.
 * `currentTable()` returns the loaded table as {text, name, velocityUnit, timeConvention} or null;
 * `el` builds DOM nodes from text; `currentModel()` returns the model of the fit form (the
 * core's ModelSpec), which the audit fits and simulates. Returns {tableChanged()} for the
 * loader to call.
 */
export function wireAudit({ currentTable, el, currentModel }) {
  const form = $("audit-settings");
  const defaults = JSON.parse(defaultAuditSettings());
  form.elements.eccentricities.value = defaults.injection.eccentricities.map(gridValue).join(", ");
  form.elements.trials.value = String(defaults.injection.trials_per_cell);
  form.elements.seed.value = String(defaults.seed);
  form.elements.max_circular.value = String(defaults.injection.max_circular_trials ?? 10000);
  form.elements.estimator.value = defaults.injection.estimator ?? "";
  form.elements.jitter.value = String(defaults.injection.jitter);
  form.elements.audit_companion.value = String(defaults.model.audit_companion ?? 1);
  form.elements.period_search.checked = defaults.injection.period_search;
  form.elements.posterior_walkers.value = String(defaults.injection.posterior.n_walkers);
  form.elements.posterior_steps.value = String(defaults.injection.posterior.n_steps);
  form.elements.posterior_burn.value = String(defaults.injection.posterior.n_burn);
  form.elements.posterior_trials.value = defaults.injection.posterior.trials_per_cell === null ? "" : String(defaults.injection.posterior.trials_per_cell);
  form.elements.posterior_max_evaluations.value = String(defaults.injection.posterior.max_evaluations);

  let job = null;      // the run in progress: {run, workers, ...}
  let shown = null;    // the result on the page: {run, report, settingsJson, tableName}
  const setState = (s) => { document.body.dataset.auditState = s; };
  const setWorkers = (n) => { document.body.dataset.auditWorkers = String(n); };
  setState("idle");
  setWorkers(0);

  function readSettings(table) {
    const data = new FormData(form);
    const number = (name, label, check) => {
      const raw = String(data.get(name) ?? "").trim();
      const value = Number(raw);
      if (raw === "" || !Number.isFinite(value) || !check(value)) throw new Error(`${label}: '${raw}' ${check.need}`);
      return value;
    };
    const whole = Object.assign((v) => Number.isSafeInteger(v) && v >= 0, { need: "must be a whole number ≥ 0" });
    const positiveWhole = Object.assign((v) => Number.isSafeInteger(v) && v >= 1, { need: "must be a whole number ≥ 1" });
    const nonNegative = Object.assign((v) => v >= 0, { need: "must be a number ≥ 0" });
    const grid = String(data.get("eccentricities") ?? "").split(/[,\s]+/).filter((s) => s !== "").map((s) => {
      const v = Number(s);
      if (!Number.isFinite(v)) throw new Error(`true e: '${s}' is not a number`);
      return v;
    });
    if (grid.length === 0) throw new Error("true e: give at least one eccentricity");
    const settings = JSON.parse(defaultAuditSettings());
    settings.injection.eccentricities = grid;
    settings.injection.trials_per_cell = number("trials", "trials per e", positiveWhole);
    settings.model = currentModel();
    // The page audits one companion per run (the CLI replay of these settings audits the same one).
    settings.model.audit_companion = number("audit_companion", "audited companion", positiveWhole);
    settings.injection.jitter = number("jitter", "added noise", nonNegative);
    settings.injection.period_search = data.get("period_search") === "on";
    settings.seed = number("seed", "seed", whole);
    const maxCircular = number("max_circular", "circular trials", positiveWhole);
    // The replay file carries the cap only when it is not the default (as the command line's).
    if (maxCircular !== (defaults.injection.max_circular_trials ?? 10000)) settings.injection.max_circular_trials = maxCircular;
    else delete settings.injection.max_circular_trials;
    const estimator = String(data.get("estimator") ?? "").trim();
    if (estimator !== "") settings.injection.estimator = estimator;
    else delete settings.injection.estimator;
    const even = Object.assign((v) => Number.isSafeInteger(v) && v >= 2 && v % 2 === 0, { need: "must be an even whole number ≥ 2" });
    settings.injection.posterior.n_walkers = number("posterior_walkers", "posterior walkers", even);
    settings.injection.posterior.n_steps = number("posterior_steps", "posterior steps", positiveWhole);
    settings.injection.posterior.n_burn = number("posterior_burn", "posterior burn-in", whole);
    // Empty = the posterior runs in every base simulation (null in the replay file).
    const posteriorTrials = String(data.get("posterior_trials") ?? "").trim();
    settings.injection.posterior.trials_per_cell = posteriorTrials === "" ? null : number("posterior_trials", "posterior trials per e", whole);
    settings.injection.posterior.max_evaluations = number("posterior_max_evaluations", "posterior evaluations per trial", positiveWhole);
    return auditSettingsFor(table.text, table.name, table.velocityUnit, table.timeConvention, JSON.stringify(settings));
  }

  function showError(message) {
    const box = $("audit-error");
    box.textContent = message;
    box.hidden = !message;
  }

  function setRunning(running) {
    $("audit-run").disabled = running;
    $("audit-cancel").disabled = !running;
    $("audit-progress-box").hidden = !running && !job;
  }

  function progress(done, total, startedAt) {
    const bar = $("audit-progress");
    bar.max = Math.max(1, total);
    bar.value = done;
    let eta = "";
    if (startedAt !== null && done > 0 && done < total) {
      const perTrial = (performance.now() - startedAt) / 1000 / done;
      eta = ` · about ${clockText(perTrial * (total - done))} left`;
    }
    $("audit-progress-text").textContent = `${done} / ${total} trials${eta}`;
  }

  function stopWorkers(j) {
    for (const w of j.workers) w.terminate();
    j.workers = [];
    setWorkers(0);
  }

  function cancel(reason) {
    if (!job) return;
    const j = job;
    job = null;
    stopWorkers(j);
    j.run.free();
    const kept = shown ? "the result below is the earlier, complete run" : "no result is shown";
    $("audit-status").textContent =
      `Cancelled (${reason}) after ${j.done} of ${j.total} trials; those trials were discarded and nothing changed: ${kept}.`;
    setState("cancelled");
    setRunning(false);
    $("audit-progress-box").hidden = true;
  }

  function fail(message) {
    if (job) {
      stopWorkers(job);
      job.run.free();
      job = null;
    }
    showError(`Injection–recovery not run: ${message}`);
    $("audit-status").textContent = "";
    setState("error");
    setRunning(false);
    $("audit-progress-box").hidden = true;
  }

  /** The per-e table of one estimator output (chosen in the menu; the recommended one first). */
  function renderSummary(report) {
    const menu = $("audit-estimator");
    const names = report.injection.outputs.map((o) => o.name);
    const recommended = report.statement.recommended;
    const ordered = recommended && names.includes(recommended)
      ? [recommended, ...names.filter((n) => n !== recommended)] : names;
    const keep = names.includes(menu.value) && menu.dataset.forRun === String(report.injection.fingerprint) ? menu.value : ordered[0];
    menu.replaceChildren(...ordered.map((n) => el("option", { value: n }, n === recommended ? `${n} (recommended)` : n)));
    menu.value = keep;
    menu.dataset.forRun = String(report.injection.fingerprint);
    const index = names.indexOf(menu.value);
    const head = el("tr", {}, ...["true e", "trials", "bias", "scatter", "RMSE",
      "68% coverage", "95% coverage", "false-eccentric rate", "failed", "not converged"].map((h) => el("th", {}, h)));
    const rows = report.injection.cells.map((cell) => {
      const o = cell.outputs[index];
      return el("tr", {},
        el("td", {}, gridValue(cell.cell.eccentricity)),
        el("td", {}, String(o.n_estimates)),
        el("td", {}, o.n_estimates > 0 ? `${fixed(o.bias, 3)} ± ${fixed(o.bias_standard_error, 3)}` : "–"),
        el("td", {}, fixed(o.scatter, 3)),
        el("td", {}, fixed(o.rmse, 3)),
        el("td", {}, rate(o.coverage68)),
        el("td", {}, rate(o.coverage95)),
        el("td", {}, cell.cell.eccentricity === 0 ? rate(o.false_eccentric_rate) : "–"),
        el("td", {}, o.n_failed > 0 ? rate(o.failed_share) : "0"),
        el("td", {}, o.unconverged_share == null ? "–" : o.n_unconverged > 0 ? rate(o.unconverged_share) : "0"));
    });
    $("audit-summary").replaceChildren(el("thead", {}, head), el("tbody", {}, ...rows));
  }

  function render() {
    const { run, report, tableName } = shown;
    $("audit-results").hidden = false;
    renderSummary(report);
    run.drawBias($("bias-canvas"));
    run.drawDistributions($("distributions-canvas"));
    const s = report.statement;
    $("statement-source").textContent =
      `${tableName}: ${report.trials_done} trials (${s.trials_per_cell} per e + ${report.extra_trials} added where the statement needs them), seed ${s.seed}.`;
    $("statement-paragraph").textContent = s.paragraph;
    $("statement-text").textContent = run.statementText();
    $("audit-report-json").textContent = run.reportJson();
    $("statement-empty").hidden = true;
    $("statement-body").hidden = false;
  }

  function clearShown() {
    if (shown) shown.run.free();
    shown = null;
    $("audit-results").hidden = true;
    $("statement-body").hidden = true;
    $("statement-empty").hidden = false;
    $("audit-report-json").textContent = "";
    $("copy-status").textContent = "";
  }

  function finishJob(j) {
    stopWorkers(j);
    job = null;
    try {
      const report = j.run.finish(j.rows);
      if (shown) shown.run.free();
      shown = { run: j.run, report, settingsJson: j.settingsJson, tableName: j.tableName };
      render();
      const seconds = (performance.now() - j.createdAt) / 1000;
      $("audit-status").textContent =
        `Done: ${report.trials_done} trials in ${clockText(seconds)} on ${j.nWorkers} worker${j.nWorkers === 1 ? "" : "s"}.`;
      setState("done");
    } catch (err) {
      j.run.free();
      showError(`Injection–recovery not summarised: ${messageOf(err)}`);
      setState("error");
    }
    setRunning(false);
    $("audit-progress-box").hidden = true;
  }

  /** Send chunks of the current batch to idle workers. */
  function dispatch(j) {
    while (j.idle.length > 0 && j.next < j.batchEnd) {
      const worker = j.idle.pop();
      const start = j.next;
      const end = Math.min(j.batchEnd, start + j.chunk);
      j.next = end;
      worker.postMessage({ type: "run", start, end });
    }
  }

  /** Ask the core for the next batch (the same rule as the command line); finish when none. */
  function nextBatch(j) {
    let batch;
    try {
      batch = j.run.nextBatch(j.fresh);
    } catch (err) {
      fail(messageOf(err));
      return;
    }
    j.fresh = [];
    if (batch === null) {
      finishJob(j);
      return;
    }
    const [start, end] = batch;
    const extra = start >= j.base;
    j.next = start;
    j.batchEnd = end;
    j.outstanding = end - start;
    j.total = j.done + (end - start);
    j.chunk = chunkSize(end - start, j.nWorkers, extra);
    if (extra && j.startedAt !== null) j.etaFrom = null;
    progress(j.done, j.total, j.etaFrom);
    dispatch(j);
  }

  async function start() {
    if (job) return;
    showError("");
    const table = currentTable();
    if (!table) { fail("load a velocity table first"); return; }
    let settingsJson;
    try {
      settingsJson = readSettings(table);
    } catch (err) {
      fail(messageOf(err));
      return;
    }
    setState("running");
    setRunning(true);
    $("audit-progress-box").hidden = false;
    $("audit-status").textContent = "Fitting the table and fixing the simulations…";
    progress(0, 0, null);
    await tick();
    let run;
    try {
      run = new AuditRun(table.text, table.name, settingsJson);
    } catch (err) {
      fail(messageOf(err));
      return;
    }
    const base = run.nTrials;
    const nWorkers = Math.max(1, Math.min(navigator.hardwareConcurrency || 1, base));
    const j = {
      run, settingsJson, tableName: table.name, base, total: base, nWorkers, chunk: 1,
      next: 0, batchEnd: 0, outstanding: 0, done: 0, rows: [], fresh: [], idle: [], workers: [],
      createdAt: performance.now(), startedAt: null, etaFrom: null, batchAsked: false,
    };
    job = j;
    $("audit-status").textContent = `Running ${base} trials, then those the statement needs, on ${nWorkers} worker${nWorkers === 1 ? "" : "s"}…`;
    progress(0, base, null);
    for (let i = 0; i < nWorkers; i++) {
      const worker = new Worker(new URL("./audit-worker.js", import.meta.url), { type: "module", name: `audit-${i}` });
      j.workers.push(worker);
      worker.onmessage = (event) => {
        if (job !== j) return;  // a cancelled run's late message
        const msg = event.data;
        if (msg.type === "ready") {
          if (j.startedAt === null) {
            j.startedAt = performance.now();
            j.etaFrom = j.startedAt;
          }
          j.idle.push(worker);
          if (!j.batchAsked) {
            j.batchAsked = true;
            nextBatch(j);
          } else {
            dispatch(j);
          }
        } else if (msg.type === "rows") {
          for (const row of msg.rows) {
            j.rows.push(row);
            j.fresh.push(row);
          }
          j.done += msg.rows.length;
          j.outstanding -= msg.rows.length;
          j.idle.push(worker);
          progress(j.done, j.total, j.etaFrom);
          if (j.outstanding <= 0) nextBatch(j);
          else dispatch(j);
        } else if (msg.type === "error") {
          fail(msg.message);
        }
      };
      worker.onerror = (event) => {
        event.preventDefault();
        if (job === j) fail(`a worker stopped: ${event.message || "it could not start"}`);
      };
      worker.postMessage({ type: "init", text: table.text, name: table.name, settings: settingsJson });
    }
    setWorkers(j.workers.length);
  }

  form.addEventListener("submit", (ev) => {
    ev.preventDefault();
    start();
  });
  $("audit-cancel").addEventListener("click", () => cancel("by you"));
  $("audit-estimator").addEventListener("change", () => { if (shown) renderSummary(shown.report); });

  $("copy-statement").addEventListener("click", async () => {
    if (!shown) return;
    $("copy-status").textContent = await copyText(shown.report.statement.paragraph);
  });
  $("download-settings").addEventListener("click", () => {
    if (shown) download(shown.settingsJson, `${stem(shown.tableName)}-eccaudit-settings.json`, "application/json");
  });
  $("download-results").addEventListener("click", () => {
    if (shown) download(shown.run.reportJson(), `${stem(shown.tableName)}-eccaudit-results.json`, "application/json");
  });
  $("download-trials").addEventListener("click", () => {
    if (shown) download(shown.run.trialsCsv(), `${stem(shown.tableName)}-eccaudit-trials.csv`, "text/csv");
  });

  const result = () => {
    if (!shown) throw new Error("run an audit first");
    return shown;
  };
  const named = (what) => () => `${stem(result().tableName)}-${what}`;
  addFigureExports($("bias-canvas"), { fileStem: named("bias"), svg: (w, h) => result().run.drawBiasSvg(w, h) });
  addFigureExports($("distributions-canvas"), {
    fileStem: named("distributions"), svg: (w, h) => result().run.drawDistributionsSvg(w, h),
  });
  addTableExports($("audit-summary"), { fileStem: named("injection-summary"), json: () => result().report.injection });

  return {
    /** The settings of the form (JSON) completed for `table` (throws on a bad entry). */
    settingsFor: readSettings,
    /** A new table was loaded: stop any run and drop the result of the old table. */
    tableChanged() {
      if (job) cancel("a new table was loaded");
      clearShown();
      if (document.body.dataset.auditState !== "cancelled") $("audit-status").textContent = "";
    },
  };
}
