// eccaudit page: the population of e from saved posterior draws (DOM and one worker only; every
// number, figure and byte of the downloads comes from the wasm core, as `eccaudit population`).
//
// The draws are the `posterior-e*.ecsv` files that `eccaudit survey --save-samples` or
// `eccaudit priors --save-samples` write. Files are taken in name order, the order
// `eccaudit population` gives them when listed the same way, so the page's CSV and JSON are
// the command line's bytes.
import { drawPopulationBeta, drawPopulationBetaSvg, drawPopulationDensity, drawPopulationDensitySvg,
  populationFigureSize } from "./pkg/eccaudit_web.js";
import { addFigureExports, downloadText } from "./exports.js";
import { $, showError as showBox } from "./dom.js";

/** Most files the page takes (the wasm side checks the same bound). */
const MAX_FILES = 5000;
const SAMPLES_FILE = /\.ecsv$/i;

/**
 * Draws of one table saved by the page's survey (`[{name, text}]`, the bytes and names
 * `eccaudit survey --save-samples` writes), computed in a population worker.
 */
export function surveyDraws({ text, name, folder, settings, spec }) {
  return new Promise((resolve, reject) => {
    const w = new Worker(new URL("./population-worker.js", import.meta.url), { type: "module", name: "survey-draws" });
    w.onmessage = (event) => {
      w.terminate();
      if (event.data.type === "draws") resolve(event.data.files);
      else reject(new Error(event.data.message));
    };
    w.onerror = (event) => {
      event.preventDefault();
      w.terminate();
      reject(new Error(`the worker stopped: ${event.message || "it could not start"}`));
    };
    w.postMessage({ type: "draws", text, name, folder, settings, spec });
  });
}

/** Wire the "Population" section; returns `useFiles(files, origin)` for the survey view. */
export function wirePopulation() {
  let files = [];
  let worker = null;
  let result = null;
  const setState = (s) => { document.body.dataset.populationState = s; };
  setState("idle");
  const showError = (message) => showBox("population-error", message);
  const setRunning = (running) => {
    $("population-run").disabled = running || files.length === 0;
    $("population-cancel").disabled = !running;
  };

  function useFiles(list, origin) {
    showError("");
    if (list.length > MAX_FILES) {
      showError(`${list.length} files: the page takes at most ${MAX_FILES} (use eccaudit population)`);
      return;
    }
    files = [...list].sort((a, b) => (a.name < b.name ? -1 : a.name > b.name ? 1 : 0));
    $("population-chosen").textContent = files.length === 0
      ? "No saved draws among the files (.ecsv written by --save-samples)."
      : `${files.length} file${files.length === 1 ? "" : "s"}${origin ? ` (${origin})` : ""}: ${files.map((f) => f.name).join(", ")}`;
    setRunning(false);
  }

  async function choose(fileList) {
    const chosen = [...fileList].filter((f) => SAMPLES_FILE.test(f.name));
    const read = await Promise.all(chosen.slice(0, MAX_FILES + 1)
      .map(async (f) => ({ name: f.webkitRelativePath || f.name, text: await f.text() })));
    useFiles(read, "");
  }

  function show(r) {
    $("population-summary").textContent = r.text;
    const [w, h] = populationFigureSize();
    for (const [id, draw] of [["population-density", drawPopulationDensity], ["population-beta", drawPopulationBeta]]) {
      const canvas = $(id);
      canvas.width = w;
      canvas.height = h;
      draw(r.json, canvas);
    }
    $("population-results").hidden = false;
  }

  function start() {
    if (worker || files.length === 0) return;
    showError("");
    result = null;
    $("population-results").hidden = true;
    const seed = Number.parseInt($("population-seed").value, 10);
    const w = new Worker(new URL("./population-worker.js", import.meta.url), { type: "module", name: "population" });
    worker = w;
    setState("running");
    setRunning(true);
    $("population-status").textContent = `Inferring the population from ${files.length} files…`;
    const startedAt = performance.now();
    const finish = (state, status) => {
      w.terminate();
      if (worker === w) worker = null;
      $("population-status").textContent = status;
      setState(state);
      setRunning(false);
    };
    w.onmessage = (event) => {
      if (worker !== w) return;
      const msg = event.data;
      if (msg.type === "result") {
        result = msg;
        show(msg);
        finish("done", `Done in ${((performance.now() - startedAt) / 1000).toFixed(1)} s.`);
      } else {
        showError(msg.message);
        finish("error", "");
      }
    };
    w.onerror = (event) => {
      event.preventDefault();
      if (worker !== w) return;
      showError(`the worker stopped: ${event.message || "it could not start"}`);
      finish("error", "");
    };
    w.postMessage({ type: "infer", files, seed: Number.isFinite(seed) && seed >= 0 ? seed : 1 });
  }

  function cancel() {
    if (!worker) return;
    worker.terminate();
    worker = null;
    $("population-status").textContent = "Cancelled; nothing was kept.";
    setState("cancelled");
    setRunning(false);
  }

  $("population-files").addEventListener("change", async (ev) => {
    await choose(ev.target.files);
    ev.target.value = "";
  });
  $("population-run").addEventListener("click", start);
  $("population-cancel").addEventListener("click", cancel);
  const download = (make, name, type) => () => { if (result) downloadText(make(result), name, type); };
  $("population-download-csv").addEventListener("click", download((r) => r.csv, "population.csv", "text/csv"));
  $("population-download-json").addEventListener("click", download((r) => r.json, "population.json", "application/json"));
  const current = () => {
    if (!result) throw new Error("nothing to export yet");
    return result.json;
  };
  addFigureExports($("population-density"), {
    fileStem: () => "population-density",
    svg: (width, height) => drawPopulationDensitySvg(current(), width, height),
  });
  addFigureExports($("population-beta"), {
    fileStem: () => "beta-ab",
    svg: (width, height) => drawPopulationBetaSvg(current(), width, height),
  });
  return { useFiles };
}
