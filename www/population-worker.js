// eccaudit population worker: off the main thread, (a) the posterior draws the survey saves for one
// table, (b) the population of e inferred from saved draws.
// Messages in: { type: "draws", text, name, folder, settings, spec } → { type: "draws", files: [{ name, text }] };
//              { type: "infer", files: [{ name, text }], seed } → { type: "result", json, text, csv }.
// On failure: { type: "error", message }. The page cancels by terminating the worker.
import init, { populationFromSamples, surveySamples } from "./pkg/eccaudit_web.js";

const ready = init();

self.addEventListener("message", async (event) => {
  const msg = event.data;
  try {
    await ready;
    if (msg.type === "draws") {
      const files = JSON.parse(surveySamples(msg.text, msg.name, msg.folder, msg.settings, msg.spec));
      self.postMessage({ type: "draws", files });
    } else {
      const result = populationFromSamples(JSON.stringify(msg.files), msg.seed);
      self.postMessage({ type: "result", json: result.json, text: result.text, csv: result.csv });
    }
  } catch (err) {
    self.postMessage({ type: "error", message: err instanceof Error ? err.message : String(err) });
  }
});
