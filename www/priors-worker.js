// eccaudit prior-set worker: runs ONE prior of a sensitivity set off the main thread.
// Message in: { requestJson, priorIndex, table: { text, name, velocityUnit, timeConvention } }.
// Messages out: { type: "progress", done, total, steps, tauTimes } (done/total: log-density
// evaluations against the run's budget; a run that converges stops before it), then { type: "result", part } or
// { type: "error", message }. The page cancels by terminating the worker.
import init, { Dataset } from "./pkg/eccaudit_web.js";

const ready = init();

self.addEventListener("message", async (event) => {
  const { requestJson, priorIndex, table } = event.data;
  let dataset = null;
  try {
    await ready;
    dataset = Dataset.parse(table.text, table.name, table.velocityUnit, table.timeConvention);
    const part = dataset.runPriorOfSet(requestJson, priorIndex, (done, total, steps, tauTimes) => {
      self.postMessage({ type: "progress", done, total, steps, tauTimes });
    });
    const chains = part.chains;
    self.postMessage({ type: "result", part }, [chains.samples.buffer, chains.log_densities.buffer]);
  } catch (err) {
    self.postMessage({ type: "error", message: err instanceof Error ? err.message : String(err) });
  } finally {
    if (dataset) dataset.free();
  }
});
