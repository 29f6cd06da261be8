// The injection reference job's per-trial cost in WebAssembly (node, one thread) and natively
// (`eccaudit audit --settings`, one thread), on the same table and settings.
//
//   node scripts/bench-reference-job.mjs [TRIALS_PER_E]     (default 10; needs www/pkg and
//                                                            target/release)
//
// The reference job of DEVELOPERS.md § Performance simulates a 30-epoch schedule; the audit
// engine that the page runs simulates a table, so this script writes a 30-epoch table shaped
// like that schedule (random epochs over 365 d, σ = 3 m/s, a circular P = 23.7 d, K = 15 m/s
// orbit plus noise; deterministic) and runs the same trials — e = 0, 0.1, …, 0.6, least squares
// with 8 starts plus the posterior under a uniform prior with 32 walkers × (500 + 1500) steps —
// through `AuditRun.runTrials` in wasm and through the command line. Both produce the same
// trial records (the parity tests check that); only the clock differs.
import { execFileSync } from "node:child_process";
import { mkdtempSync, readFileSync, rmSync, writeFileSync } from "node:fs";
import { tmpdir } from "node:os";
import path from "node:path";
import { performance } from "node:perf_hooks";
import { fileURLToPath } from "node:url";
import { initSync, AuditRun, auditSettingsFor, defaultAuditSettings } from "../www/pkg/eccaudit_web.js";
import { uniforms, gaussians } from "../tests/browser/fixed-random.mjs";

const ROOT = path.resolve(path.dirname(fileURLToPath(import.meta.url)), "..");
const CLI = path.join(process.env.CARGO_TARGET_DIR ?? path.join(ROOT, "target"), "release", "eccaudit");
const TRIALS = Number(process.argv[2] ?? 10);
const TMP = mkdtempSync(path.join(tmpdir(), "eccaudit-bench-reference-"));

initSync({ module: readFileSync(path.join(ROOT, "www", "pkg", "eccaudit_web_bg.wasm")) });

const random = uniforms(20261202);
const gaussian = gaussians(random);
const times = Array.from({ length: 30 }, () => 2460000 + 365 * random()).sort((a, b) => a - b);
const lines = ["bjd,rv [m/s],sigma [m/s]"];
for (const t of times) {
  const v = 15 * Math.sin((2 * Math.PI * (t - 2460000)) / 23.7) + 3 * gaussian();
  lines.push(`${t.toFixed(5)},${v.toFixed(3)},3.00`);
}
const table = `${lines.join("\n")}\n`;
const tablePath = path.join(TMP, "reference-30-epochs.csv");
writeFileSync(tablePath, table);

const settings = JSON.parse(defaultAuditSettings());
settings.seed = 7;
settings.injection.eccentricities = [0, 0.1, 0.2, 0.3, 0.4, 0.5, 0.6];
settings.injection.trials_per_cell = TRIALS;
settings.injection.posterior = { priors: ["uniform"], n_walkers: 32, n_steps: 1500, n_burn: 500 };
const settingsJson = auditSettingsFor(table, "reference-30-epochs.csv", "", "", JSON.stringify(settings));
const settingsPath = path.join(TMP, "settings.json");
writeFileSync(settingsPath, settingsJson);

try {
  const run = new AuditRun(table, "reference-30-epochs.csv", settingsJson);
  const n = run.nTrials;
  run.runTrials(0, 1); // warm-up (tier-up of the wasm code)
  const t0 = performance.now();
  run.runTrials(0, n);
  const wasmSeconds = (performance.now() - t0) / 1000;

  const t1 = performance.now();
  execFileSync(CLI, [
    "audit", tablePath, "--settings", settingsPath, "--threads", "1", "--quiet", "--json",
    "--out", path.join(TMP, "out"),
  ], { stdio: ["ignore", "ignore", "inherit"] });
  const nativeSeconds = (performance.now() - t1) / 1000;

  const perTrial = (s) => (1000 * s) / n;
  console.log(`reference-job trials (30 epochs, 8 LSQ starts + 32 walkers x (500 + 1500) steps), ${n} trials, one thread:`);
  console.log(`  wasm (node ${process.version}): ${wasmSeconds.toFixed(1)} s = ${perTrial(wasmSeconds).toFixed(1)} ms per trial -> ${(1.4 * perTrial(wasmSeconds)).toFixed(0)} s for 1400 trials`);
  console.log(`  native CLI:        ${nativeSeconds.toFixed(1)} s = ${perTrial(nativeSeconds).toFixed(1)} ms per trial (fit and summary included) -> ${(1.4 * perTrial(nativeSeconds)).toFixed(0)} s for 1400 trials`);
  console.log(`  ratio wasm / native: ${(wasmSeconds / nativeSeconds).toFixed(2)}`);
} finally {
  rmSync(TMP, { recursive: true, force: true });
}
