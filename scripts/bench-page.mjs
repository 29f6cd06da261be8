// The same audit run in the page (Web Workers, wasm) and by the native command line, timed.
//
//   node scripts/bench-page.mjs [TRIALS_PER_E] [--reference]
//                                   (default 20; needs www/pkg and target/release)
//   node scripts/bench-page.mjs --table FILE [--defaults]
//                                   a table of your own (e.g. the 40-epoch table of
//                                   scripts/bench-audit.sh); --defaults keeps the page's default
//                                   grid, trials and sampler (the issue-11 speed target)
//
// Loads the first demo table in headless Chromium, runs the injection–recovery view with
// e = 0, 0.1, …, 0.6 and the page's default estimators (least squares with 8 starts, the
// posterior under a uniform prior), downloads the replay settings, then runs
// `eccaudit audit --settings` on them with as many threads as the page had workers.
import { execFileSync } from "node:child_process";
import { mkdtempSync, readFileSync, rmSync } from "node:fs";
import { tmpdir } from "node:os";
import path from "node:path";
import { performance } from "node:perf_hooks";
import { fileURLToPath } from "node:url";
import { openApp } from "../tests/browser/harness.mjs";

const ROOT = path.resolve(path.dirname(fileURLToPath(import.meta.url)), "..");
const CLI = path.join(process.env.CARGO_TARGET_DIR ?? path.join(ROOT, "target"), "release", "eccaudit");
const TRIALS = Number(process.argv.find((a) => /^\d+$/.test(a)) ?? 20);
// --reference: the posterior of the reference job (32 walkers × (500 + 1500) steps) instead of
// the page's default, shorter sampler.
const REFERENCE = process.argv.includes("--reference");
const TMP = mkdtempSync(path.join(tmpdir(), "eccaudit-bench-page-"));
const TABLE_AT = process.argv.indexOf("--table");
const TABLE = TABLE_AT > 0 ? path.resolve(process.argv[TABLE_AT + 1]) : null;
const DEFAULTS = process.argv.includes("--defaults");

const app = await openApp();
try {
  const { page } = app;
  await app.load();
  if (TABLE) {
    const attempts = await page.evaluate(() => Number(document.body.dataset.loadAttempts ?? 0));
    await page.setInputFiles("#file-input", { name: path.basename(TABLE), mimeType: "text/plain", buffer: readFileSync(TABLE) });
    await page.waitForFunction((n) => Number(document.body.dataset.loadAttempts) > n, attempts);
  }
  if (!DEFAULTS) {
    await page.fill("#audit-settings [name='eccentricities']", "0, 0.1, 0.2, 0.3, 0.4, 0.5, 0.6");
    await page.fill("#audit-settings [name='trials']", String(TRIALS));
    await page.fill("#audit-settings [name='seed']", "7");
  }
  if (REFERENCE) {
    await page.fill("#audit-settings [name='posterior_walkers']", "32");
    await page.fill("#audit-settings [name='posterior_steps']", "1500");
    await page.fill("#audit-settings [name='posterior_burn']", "500");
  }
  const t0 = performance.now();
  await page.click("#audit-run");
  await page.waitForSelector("body[data-audit-state='done']", { timeout: 3_600_000 });
  const pageSeconds = (performance.now() - t0) / 1000;
  // The view runs one worker per core (navigator.hardwareConcurrency, at least 1).
  const workers = Math.max(1, Number(await page.evaluate(() => navigator.hardwareConcurrency ?? 1)));
  const [download] = await Promise.all([page.waitForEvent("download"), page.click("#download-settings")]);
  const settings = path.join(TMP, "settings.json");
  await download.saveAs(settings);

  const t1 = performance.now();
  execFileSync(CLI, [
    "audit", TABLE ?? path.join(ROOT, "demo-data", "velka17-nearly-circular.csv"), "--settings", settings,
    "--threads", String(Math.max(workers, 1)), "--quiet", "--json", "--out", path.join(TMP, "out"),
  ], { stdio: ["ignore", "ignore", "inherit"] });
  const nativeSeconds = (performance.now() - t1) / 1000;
  const done = Number((await page.textContent("#audit-status")).match(/Done: (\d+) trials/)?.[1] ?? 7 * TRIALS);
  const n = done;
  const sampler = REFERENCE ? "32 walkers x (500 + 1500) steps" : "the default sampler";
  const what = TABLE ? path.basename(TABLE) : "velka17";
  const grid = DEFAULTS ? "the default grid and trials" : `7 e x ${TRIALS} trials`;
  console.log(`audit of ${what}, ${grid} (${done} trials with the adaptive ones), ${sampler}, ${workers} workers/threads:`);
  console.log(`  page (wasm, Chromium): ${pageSeconds.toFixed(1)} s  (${(1000 * pageSeconds / n).toFixed(0)} ms per trial)`);
  console.log(`  native CLI:            ${nativeSeconds.toFixed(1)} s  (${(1000 * nativeSeconds / n).toFixed(0)} ms per trial)`);
  console.log(`  ratio page / native:   ${(pageSeconds / nativeSeconds).toFixed(2)}`);
} finally {
  await app.close();
  rmSync(TMP, { recursive: true, force: true });
}
