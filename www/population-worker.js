// eccaudit population worker: infers the population of e from saved posterior draws off the main thread.
// Message in: { files: [{ name, text }], seed }. Message out: { type: "result", json, text, csv }
// or { type: "error", message }. The page cancels by terminating the worker.
import init, { populationFromSamples } from "./pkg/eccaudit_web.js";

const ready = init();

self.addEventListener("message", async (event) => {
  const { files, seed } = event.data;
  try {
    await ready;
    const result = populationFromSamples(JSON.stringify(files), seed);
    self.postMessage({ type: "result", json: result.json, text: result.text, csv: result.csv });
  } catch (err) {
    self.postMessage({ type: "error", message: err instanceof Error ? err.message : String(err) });
  }
});
