// eccaudit fit worker: runs the least-squares fit off the main thread, so a long fit (several
// companions, a trend, a wide period grid, a big table) neither freezes the page nor resists Cancel.
// Message in:   { id, table: { text, name, velocityUnit, timeConvention }, settings } (the fit
//               form's settings, as Dataset.fit takes them).
// Messages out: { type: "working", id } once the table is read and the fit starts (the core's fit
//               reports no finer progress), then { type: "result", id, transfer } (what
//               Dataset.fitForTransfer returns, for the page's Dataset.adoptFit) or
//               { type: "error", id, message, fatal } (one line; fatal after a panic,
//               "internal error: …", or when the module did not load: the page then starts a fresh
//               worker). The page cancels by terminating the worker.
import init, { Dataset } from "./pkg/eccaudit_web.js";
import { messageOf } from "./dom.js";

const ready = init();
// One line, whatever the message: the page shows errors in one line.
const oneLine = (text) => text.split(/\s*\n\s*/).filter((s) => s !== "").join(" ");

// The table of the last request, parsed once and reused while the page sends the same one.
let loaded = null; // { table, dataset }
// The request being fitted, so a panic's report names it.
let currentId = null;

// A panic inside the module is reported to the page rather than lost in the worker's console.
globalThis.eccauditReportPanic = (message) =>
  postMessage({ type: "error", id: currentId, message: oneLine(`internal error: ${message}`), fatal: true });

const sameTable = (a, b) =>
  a.text === b.text && a.name === b.name && a.velocityUnit === b.velocityUnit && a.timeConvention === b.timeConvention;

function datasetFor(table) {
  if (loaded && sameTable(loaded.table, table)) return loaded.dataset;
  loaded?.dataset.free();
  loaded = null;
  const dataset = Dataset.parse(table.text, table.name, table.velocityUnit, table.timeConvention);
  loaded = { table, dataset };
  return dataset;
}

self.addEventListener("message", async (event) => {
  const { id, table, settings } = event.data;
  currentId = id;
  try {
    await ready;
  } catch (err) {
    // A worker whose module did not load cannot fit: the page starts a fresh one next time.
    postMessage({ type: "error", id, message: oneLine(`the fit worker could not load eccaudit: ${messageOf(err)}`), fatal: true });
    return;
  }
  try {
    const dataset = datasetFor(table);
    postMessage({ type: "working", id });
    const transfer = dataset.fitForTransfer(settings);
    postMessage({ type: "result", id, transfer });
  } catch (err) {
    postMessage({ type: "error", id, message: oneLine(messageOf(err)) });
  } finally {
    currentId = null;
  }
});
