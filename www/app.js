// eccaudit page: DOM and events only. Every number comes from the wasm core.
import init, { Dataset, demoTables, version } from "./pkg/eccaudit_web.js";

const $ = (id) => document.getElementById(id);

const state = {
  dataset: null,      // the loaded table (a wasm handle); kept when a new load fails
  model: null,        // elements of the overlaid curve, or null
};

// Build DOM nodes from text only: user strings never become HTML.
function el(tag, attrs = {}, ...children) {
  const node = document.createElement(tag);
  for (const [key, value] of Object.entries(attrs)) {
    if (key === "class") node.className = value;
    else node.setAttribute(key, value);
  }
  for (const child of children) {
    node.append(child instanceof Node ? child : document.createTextNode(String(child)));
  }
  return node;
}

function showError(box, message) {
  box.textContent = message;
  box.hidden = false;
}

function hideError(box) {
  box.hidden = true;
  box.textContent = "";
}

function messageOf(err) {
  if (err instanceof Error) return err.message;
  return String(err);
}

// Counts finished load attempts (good or bad), so tests can wait for one.
let loadAttempts = 0;
function loadTable(text, sourceName) {
  try {
    return tryLoadTable(text, sourceName);
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
  state.model = null;
  renderSummary(dataset.summary());
  redraw();
  return true;
}

function fmt(value, digits = 2) {
  if (value === null || value === undefined || Number.isNaN(value)) return "–";
  return Number(value).toFixed(digits);
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
      `instrument${summary.n_instruments === 1 ? "" : "s"} over ${fmt(summary.overall.baseline_days, 1)} days ` +
      `(time: ${summary.time_convention_label}, ${STATED_BY[summary.time_convention.stated_by]}; ` +
      `velocities read in ${summary.velocity_unit_in_source}, shown in m/s).`),
  );
  const head = el("tr", {},
    el("th", {}, "instrument"), el("th", {}, "N"), el("th", {}, "first"), el("th", {}, "last"),
    el("th", {}, "median σ [m/s]"), el("th", {}, "rms [m/s]"), el("th", {}, "weighted rms [m/s]"));
  const rows = summary.instruments.map((inst, idx) =>
    el("tr", {},
      el("td", {}, el("span", { class: `swatch swatch-${idx % 7}` }), inst.name),
      el("td", {}, inst.n_rows), el("td", {}, fmt(inst.first_time, 3)), el("td", {}, fmt(inst.last_time, 3)),
      el("td", {}, fmt(inst.median_uncertainty_m_s)), el("td", {}, fmt(inst.rms_m_s)),
      el("td", {}, fmt(inst.weighted_rms_m_s))));
  const all = summary.overall;
  rows.push(el("tr", { class: "total" },
    el("td", {}, "all"), el("td", {}, summary.n_rows), el("td", {}, fmt(all.first_time, 3)),
    el("td", {}, fmt(all.last_time, 3)), el("td", {}, fmt(all.median_uncertainty_m_s)),
    el("td", {}, fmt(all.rms_m_s)), el("td", {}, fmt(all.weighted_rms_m_s))));
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
  zone.addEventListener("keydown", (ev) => {
    if (ev.key === "Enter" || ev.key === " ") { ev.preventDefault(); $("file-input").click(); }
  });
  for (const name of ["dragenter", "dragover"]) {
    zone.addEventListener(name, (ev) => { ev.preventDefault(); zone.classList.add("dragging"); });
  }
  for (const name of ["dragleave", "drop"]) {
    zone.addEventListener(name, () => zone.classList.remove("dragging"));
  }
  zone.addEventListener("drop", (ev) => {
    ev.preventDefault();
    const [file] = ev.dataTransfer.files;
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

async function main() {
  // A panic inside the wasm module reports here instead of vanishing in the console.
  globalThis.eccauditReportPanic = (message) => showError($("load-error"), `internal error: ${message}`);
  await init();
  $("build-info").textContent = `eccaudit ${version()}`;
  const { demos, select } = wireLoader();
  wireModelForm();
  if (demos.length > 0) {
    select.value = "0";
    loadTable(demos[0].text, demos[0].file_name);
  }
  document.body.dataset.ready = "true";
}

main().catch((err) => {
  showError($("load-error"), `eccaudit could not start: ${messageOf(err)}`);
});
