// eccaudit audit worker: loads the wasm module itself, builds one AuditRun from the table and
// the settings, then runs the trial ranges it is sent and posts each range's rows back.
//
// Messages in:  {type: "init", text, name, settings} then {type: "run", start, end} (repeated).
// Messages out: {type: "ready", nTrials} | {type: "rows", start, end, rows} | {type: "error", message}.
import init, { AuditRun } from "./pkg/eccaudit_web.js";

let run = null;
const messageOf = (err) => (err instanceof Error ? err.message : String(err));

// A panic inside the module is reported to the page rather than lost in the worker's console.
globalThis.eccauditReportPanic = (message) => postMessage({ type: "error", message: `internal error: ${message}` });

self.onmessage = async (event) => {
  const msg = event.data;
  try {
    if (msg.type === "init") {
      await init();
      run?.free();  // a survey sends one table after another
      run = null;
      run = new AuditRun(msg.text, msg.name, msg.settings);
      postMessage({ type: "ready", nTrials: run.nTrials });
    } else if (msg.type === "run") {
      if (!run) throw new Error("the worker has no audit yet");
      const rows = run.runTrials(msg.start, msg.end);
      postMessage({ type: "rows", start: msg.start, end: msg.end, rows });
    }
  } catch (err) {
    postMessage({ type: "error", message: messageOf(err) });
  }
};
