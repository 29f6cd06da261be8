// eccaudit page: surveys — the full audit of several tables at once (dropped files or a folder),
// with the injection–recovery settings of the page, and the catalogue (DOM and workers only;
// every number and every byte of the catalogue comes from the wasm core).
//
// Tables run one after another; each table's trials go to a pool of audit workers
// (audit-worker.js, one per core) in small chunks, exactly as a single audit does. Table i of n
// (sorted by name) gets the folder name `eccaudit survey` would give it, so the catalogue's CSV
// and JSON are the bytes the command line writes for a manifest listing the same files in order.
import { AuditRun, catalogueCsv, catalogueJson, surveyErrorRows, surveyFolder } from "./pkg/eccaudit_web.js";
import { downloadText } from "./exports.js";
import { surveyDraws } from "./population-view.js";
import { $, el, messageOf, showError as showBox, tick, wireDropZone } from "./dom.js";
import { fixed, significant, withError } from "./format.js";

/** Most tables one survey takes in the page (a bound on what a dropped folder allocates). */
const MAX_TABLES = 2000;
/** Files that look like velocity tables. */
const TABLE_FILE = /\.(csv|tsv|txt|dat|rdb)$/i;

/**
 * Wire the "Survey" section. `settingsFor(table)` returns the audit settings (JSON) of the
 * page's injection–recovery form completed for `table` ({text, name, velocityUnit,
 * timeConvention}).
 */
export function wireSurvey({ settingsFor, population = null }) {
  let tables = [];   // [{name, text}], sorted by name
  let job = null;    // the survey in progress
  let rows = null;   // catalogue rows of the last finished survey
  const setState = (s) => { document.body.dataset.surveyState = s; };
  setState("idle");

  const showError = (message) => showBox("survey-error", message);

  async function choose(fileList) {
    showError("");
    const files = [...fileList].filter((f) => TABLE_FILE.test(f.name));
    if (files.length > MAX_TABLES) {
      showError(`${files.length} files: a survey in the page takes at most ${MAX_TABLES} tables (use eccaudit survey)`);
      return;
    }
    const read = await Promise.all(files.map(async (f) => ({ name: f.webkitRelativePath || f.name, text: await f.text() })));
    read.sort((a, b) => (a.name < b.name ? -1 : a.name > b.name ? 1 : 0));
    tables = read;
    $("survey-chosen").textContent = tables.length === 0
      ? "No velocity tables among the files (.csv, .tsv, .txt, .dat, .rdb)."
      : `${tables.length} table${tables.length === 1 ? "" : "s"}: ${tables.map((t) => t.name).join(", ")}`;
    $("survey-run").disabled = tables.length === 0 || job !== null;
  }

  function setRunning(running) {
    $("survey-run").disabled = running || tables.length === 0;
    $("survey-cancel").disabled = !running;
    $("survey-progress-box").hidden = !running;
  }

  function progress(tableIndex, nTables, done, total) {
    $("survey-progress").max = Math.max(1, nTables);
    $("survey-progress").value = tableIndex;
    $("survey-progress-text").textContent =
      `table ${Math.min(tableIndex + 1, nTables)} of ${nTables}` + (total > 0 ? ` · ${done} / ${total} trials` : "");
  }

  function renderCatalogue(list) {
    const heads = ["table", "status", "P [d]", "K [m/s]", "least-squares e", "estimator", "e", "bias",
      "calibrated 95% set of e", "circular excluded (p)", "flags or error"];
    const body = list.map((r) => {
      const set = r.e_low95 === null ? (r.e_open_above ? "above the grid" : "–")
        : `${fixed(r.e_low95, 2)}–${fixed(r.e_high95, 2)}${r.e_open_above ? "+" : ""}`;
      const circular = r.circular_excluded === null ? "–"
        : `${r.circular_excluded ? "yes" : "no"} (${significant(r.circular_p, 2)})`;
      return el("tr", { "data-status": r.status },
        el("td", {}, r.table), el("td", {}, r.status), el("td", {}, fixed(r.period, 4)),
        el("td", {}, fixed(r.semi_amplitude, 2)), el("td", {}, fixed(r.lsq_e, 3)), el("td", {}, r.estimator ?? "–"),
        el("td", {}, fixed(r.e, 3)),
        el("td", {}, r.bias === null ? "–" : withError(r.bias, r.bias_error, { digits: 3 })),
        el("td", {}, set), el("td", {}, circular),
        el("td", {}, r.error ?? r.flags.join(", ")));
    });
    $("survey-catalogue").replaceChildren(el("thead", {}, el("tr", {}, ...heads.map((h) => el("th", {}, h)))),
      el("tbody", {}, ...body));
    $("survey-results").hidden = list.length === 0;
  }

  function stopWorkers(j) {
    for (const w of j.workers) w.terminate();
    j.workers = [];
  }

  /**
   * Runs the trials of one table on the worker pool, batch after batch as the core's adaptive
   * rule asks (`run.nextBatch`, the command line's rule); resolves with every row.
   */
  function runTrials(j, run, table, settingsJson) {
    return new Promise((resolve, reject) => {
      const trialRows = [];
      let fresh = [];
      let next = 0;
      let batchEnd = 0;
      let outstanding = 0;
      let done = 0;
      let total = run.nTrials;
      let chunk = 1;
      let started = false;
      const idle = [];
      const feed = () => {
        while (idle.length > 0 && next < batchEnd) {
          const worker = idle.pop();
          const start = next;
          next = Math.min(batchEnd, start + chunk);
          worker.postMessage({ type: "run", start, end: next });
        }
      };
      const ask = () => {
        let batch;
        try {
          batch = run.nextBatch(fresh);
        } catch (err) {
          reject(err);
          return;
        }
        fresh = [];
        if (batch === null) {
          resolve(trialRows);
          return;
        }
        const [start, end] = batch;
        next = start;
        batchEnd = end;
        outstanding = end - start;
        total = done + outstanding;
        chunk = Math.max(1, Math.min(start >= run.nTrials ? 64 : 4, Math.ceil(outstanding / (j.workers.length * 16))));
        progress(j.tableIndex, j.nTables, done, total);
        feed();
      };
      j.fail = reject;
      for (const worker of j.workers) {
        worker.onmessage = (event) => {
          if (job !== j) return;
          const msg = event.data;
          if (msg.type === "ready") {
            idle.push(worker);
            if (!started) {
              started = true;
              ask();
            } else feed();
          } else if (msg.type === "rows") {
            for (const row of msg.rows) {
              trialRows.push(row);
              fresh.push(row);
            }
            done += msg.rows.length;
            outstanding -= msg.rows.length;
            idle.push(worker);
            progress(j.tableIndex, j.nTables, done, total);
            if (outstanding <= 0) ask();
            else feed();
          } else if (msg.type === "error") reject(new Error(msg.message));
        };
        worker.postMessage({ type: "init", text: table.text, name: table.name, settings: settingsJson });
      }
    });
  }

  async function start() {
    if (job || tables.length === 0) return;
    showError("");
    const list = tables;
    const n = list.length;
    const nWorkers = Math.max(1, navigator.hardwareConcurrency || 1);
    const j = { workers: [], nTables: n, tableIndex: 0, fail: null, startedAt: performance.now() };
    job = j;
    rows = null;
    renderCatalogue([]);
    setState("running");
    setRunning(true);
    for (let i = 0; i < nWorkers; i++) {
      const worker = new Worker(new URL("./audit-worker.js", import.meta.url), { type: "module", name: `survey-${i}` });
      worker.onerror = (event) => {
        event.preventDefault();
        if (job === j && j.fail) j.fail(new Error(`a worker stopped: ${event.message || "it could not start"}`));
      };
      j.workers.push(worker);
    }
    const collected = [];
    const saveDraws = $("survey-save-draws")?.checked === true;
    const draws = [];
    for (let i = 0; i < n; i++) {
      if (job !== j) return;
      j.tableIndex = i;
      const table = list[i];
      const folder = surveyFolder(i, n, table.name);
      $("survey-status").textContent = `Fitting ${table.name}…`;
      progress(i, n, 0, 0);
      await tick();
      let run = null;
      try {
        const settingsJson = settingsFor({ text: table.text, name: table.name, velocityUnit: "", timeConvention: "" });
        run = new AuditRun(table.text, table.name, settingsJson);
        $("survey-status").textContent = `Auditing ${table.name} (${run.nTrials} trials, then those its statement needs, on ${nWorkers} worker${nWorkers === 1 ? "" : "s"})…`;
        const trialRows = await runTrials(j, run, table, settingsJson);
        if (job !== j) { run.free(); return; }
        run.finish(trialRows);
        collected.push(...JSON.parse(run.catalogueRows(table.name, folder)));
        if (saveDraws) {
          // As `eccaudit survey --save-samples`: the posterior under uniform:0..0.99 after the
          // audit; a failure leaves this table without draws and the audit stands.
          $("survey-status").textContent = `Sampling the posterior of ${table.name} for the population…`;
          try {
            draws.push(...await surveyDraws({ text: table.text, name: table.name, folder, settings: settingsJson, spec: "uniform:0..0.99" }));
          } catch (err) {
            console.warn(`no posterior draws saved for ${table.name}: ${messageOf(err)}`);
          }
          if (job !== j) { run.free(); return; }
        }
      } catch (err) {
        if (job !== j) { run?.free(); return; }
        collected.push(...JSON.parse(surveyErrorRows(table.name, folder, messageOf(err))));
      }
      run?.free();
      renderCatalogue(collected);
    }
    stopWorkers(j);
    job = null;
    rows = collected;
    const seconds = (performance.now() - j.startedAt) / 1000;
    const failed = collected.filter((r) => r.status === "error").length;
    $("survey-status").textContent =
      `Done: ${n - failed} of ${n} tables audited in ${seconds.toFixed(1)} s` + (failed ? `; ${failed} could not be audited (see the table)` : "") + ".";
    if (saveDraws && population) population.useFiles(draws, "from the survey");
    setState("done");
    setRunning(false);
  }

  function cancel() {
    if (!job) return;
    const j = job;
    job = null;
    stopWorkers(j);
    $("survey-status").textContent = `Cancelled after ${j.tableIndex} of ${j.nTables} tables; nothing was kept.`;
    renderCatalogue([]);
    setState("cancelled");
    setRunning(false);
  }

  wireDropZone($("survey-drop"), $("survey-files"), (files) => choose(files));
  for (const id of ["survey-files", "survey-folder"]) {
    $(id).addEventListener("change", async (ev) => {
      await choose(ev.target.files);
      ev.target.value = "";
    });
  }
  $("survey-run").addEventListener("click", () => { start(); });
  $("survey-cancel").addEventListener("click", cancel);
  const exportCatalogue = (make, ext, type) => () => {
    if (!rows) return;
    downloadText(make(JSON.stringify(rows)), `eccaudit-catalogue.${ext}`, type);
  };
  $("survey-download-csv").addEventListener("click", exportCatalogue(catalogueCsv, "csv", "text/csv"));
  $("survey-download-json").addEventListener("click", exportCatalogue(catalogueJson, "json", "application/json"));
}
