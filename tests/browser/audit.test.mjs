// The whole audit in the page: injection–recovery in Web Workers, the statement, the downloads;
// the page's numbers equal `eccaudit audit --settings` on the downloaded replay file; Cancel
// stops the workers and keeps nothing; the page starts offline once loaded (service worker).
import { test } from "node:test";
import assert from "node:assert/strict";
import { execFileSync } from "node:child_process";
import { existsSync, readFileSync, writeFileSync } from "node:fs";
import path from "node:path";
import { pageForThisFile, tempDirForThisFile, ROOT, CLI, ARTIFACTS } from "./harness.mjs";
import { uniforms, gaussians } from "./fixed-random.mjs";

const TMP = tempDirForThisFile("audit-test");

const app = pageForThisFile();

async function setGrid({ e, trials, seed }) {
  const { page } = app;
  await page.fill("#audit-settings [name='eccentricities']", e);
  await page.fill("#audit-settings [name='trials']", String(trials));
  await page.fill("#audit-settings [name='seed']", String(seed));
}

async function runToEnd() {
  const { page } = app;
  await page.click("#audit-run");
  await page.waitForSelector("body[data-audit-state='done'], body[data-audit-state='error']", { timeout: 300_000 });
  assert.equal(await page.isHidden("#audit-error"), true, await page.textContent("#audit-error"));
}

const saveDownload = (buttonId, name) => app.saveDownload(buttonId, path.join(TMP, name));

test("a small audit of Corvin 4 in the page gives exactly the command line's report", async () => {
  const { page } = app;
  await app.selectDemo(1);
  await setGrid({ e: "0, 0.3", trials: 4, seed: 5 });
  // The form shows the default posterior sampler; a shorter one set here must reach the replay
  // file and the command line.
  assert.equal(await page.inputValue("#audit-settings [name='posterior_walkers']"), "16");
  await page.fill("#audit-settings [name='posterior_walkers']", "12");
  await page.fill("#audit-settings [name='posterior_steps']", "400");
  await page.fill("#audit-settings [name='posterior_burn']", "200");
  await runToEnd();
  // 8 base trials, then the trials the statement needs (the circular decision, the interval).
  const done = Number((await page.textContent("#audit-status")).match(/^Done: (\d+) trials in /)[1]);
  assert.ok(done > 8, `${done} trials`);

  const paragraph = await page.textContent("#statement-paragraph");
  assert.ok(paragraph.length > 100, paragraph);
  // One estimator at a time (the recommended one first in the menu), one row per injected e:
  // least squares, Lucy–Sweeney, and the default posterior (uniform prior) as median, mean, mode.
  const outputs = ["lsq", "lucy_sweeney", "posterior_uniform_median", "posterior_uniform_mean", "posterior_uniform_mode"];
  const options = await page.$$eval("#audit-estimator option", (os) => os.map((o) => o.value));
  assert.deepEqual([...options].sort(), [...outputs].sort());
  const rows = await page.$$eval("#audit-summary tbody tr", (trs) => trs.map((tr) => [...tr.children].map((td) => td.textContent)));
  assert.deepEqual(rows.map((r) => r[0]), ["0", "0.3"], JSON.stringify(rows));
  await page.selectOption("#audit-estimator", "posterior_uniform_mode");
  const modeRows = await page.$$eval("#audit-summary tbody tr", (trs) => trs.map((tr) => tr.children[1].textContent));
  assert.deepEqual(modeRows.length, 2);
  assert.ok(await app.paintedPixels("#bias-canvas") > 5000);
  assert.ok(await app.paintedPixels("#distributions-canvas") > 5000);

  // The replay file the page offers, replayed by the command line.
  const settings = await saveDownload("#download-settings", "settings.json");
  assert.equal(settings.suggested, "corvin4-eccentric-eccaudit-settings.json");
  const replay = JSON.parse(readFileSync(settings.file, "utf8"));
  assert.deepEqual(replay.injection.eccentricities, [0, 0.3]);
  assert.equal(replay.injection.trials_per_cell, 4);
  assert.equal(replay.seed, 5);
  assert.deepEqual(replay.injection.posterior, { priors: ["uniform"], n_walkers: 12, n_steps: 400, n_burn: 200, max_evaluations: 400000, trials_per_cell: 8 });
  assert.equal(replay.data.file_name, "corvin4-eccentric.tsv");
  assert.ok(existsSync(CLI), `${CLI} is missing: run cargo build --release first`);
  const out = path.join(TMP, "cli-out");
  const cliJson = execFileSync(CLI, [
    "audit", "demo-data/corvin4-eccentric.tsv", "--settings", settings.file, "--json", "--quiet", "--out", out,
  ], { cwd: ROOT, encoding: "utf8" });
  const native = JSON.parse(cliJson);
  const shown = JSON.parse(await page.textContent("#audit-report-json"));
  // Deep equality of the whole report: fit, every cell's numbers, the statement.
  assert.deepEqual(shown, native);
  assert.equal(paragraph, native.statement.paragraph);
  assert.equal(native.trials_done, done);
  assert.equal(native.trials_total, 8);

  // The downloads: the same report, and the trial file the command line wrote (byte for byte).
  const results = await saveDownload("#download-results", "results.json");
  assert.equal(results.suggested, "corvin4-eccentric-eccaudit-results.json");
  assert.deepEqual(JSON.parse(readFileSync(results.file, "utf8")), native);
  const trials = await saveDownload("#download-trials", "trials.csv");
  assert.equal(trials.suggested, "corvin4-eccentric-eccaudit-trials.csv");
  assert.equal(readFileSync(trials.file, "utf8"), readFileSync(path.join(out, "trials.csv"), "utf8"));

  await page.click("#copy-statement");
  await page.waitForFunction(() => document.getElementById("copy-status").textContent !== "");
  assert.match(await page.textContent("#copy-status"), /Copied|copy it by hand/);

  await page.locator("#audit-section").screenshot({ path: path.join(ARTIFACTS, "audit-injection-recovery.png") });
  await page.locator("#statement-section").screenshot({ path: path.join(ARTIFACTS, "audit-statement.png") });
  assert.deepEqual(app.consoleErrors, []);
});

test("Cancel stops the workers, keeps nothing of the cancelled run, and the page goes on working", async () => {
  const { page } = app;
  const before = await page.textContent("#statement-paragraph");
  const reportBefore = await page.textContent("#audit-report-json");
  await setGrid({ e: "0, 0.1, 0.2, 0.3, 0.4, 0.5", trials: 200, seed: 9 });
  await page.click("#audit-run");
  await page.waitForSelector("body[data-audit-state='running']");
  // Wait until the workers report trials.
  await page.waitForFunction(() => /^[1-9]\d* \/ 1200 trials/.test(document.getElementById("audit-progress-text").textContent),
    null, { timeout: 120_000 });
  assert.ok(page.workers().length >= 1, "workers are running");
  // The main thread stays responsive while the workers run: a 20 ms timer, watched for 1 s,
  // never fires more than 250 ms late (a trial in the main thread would block it for longer).
  const worstLateness = await page.evaluate(() => new Promise((resolve) => {
    let last = performance.now();
    let worst = 0;
    const timer = setInterval(() => {
      const now = performance.now();
      worst = Math.max(worst, now - last - 20);
      last = now;
    }, 20);
    setTimeout(() => { clearInterval(timer); resolve(worst); }, 1000);
  }));
  assert.ok(worstLateness < 250, `timer up to ${worstLateness.toFixed(0)} ms late`);
  assert.equal(await page.evaluate(() => document.body.dataset.auditState), "running");
  await page.screenshot({ path: path.join(ARTIFACTS, "audit-running.png") });
  await page.click("#audit-cancel");
  await page.waitForSelector("body[data-audit-state='cancelled']");
  const status = await page.textContent("#audit-status");
  assert.match(status, /^Cancelled \(by you\) after \d+ of 1200 trials; those trials were discarded and nothing changed/);
  assert.equal(await page.evaluate(() => document.body.dataset.auditWorkers), "0");
  // The terminated workers are gone and nothing moves afterwards.
  for (let i = 0; i < 200 && page.workers().length > 0; i++) await page.waitForTimeout(100);
  assert.equal(page.workers().length, 0, "no worker left");
  await page.waitForTimeout(1500);
  assert.equal(await page.textContent("#audit-status"), status);
  assert.equal(await page.isHidden("#audit-progress-box"), true);
  // The earlier complete result is still the one shown.
  assert.equal(await page.textContent("#statement-paragraph"), before);
  assert.equal(await page.textContent("#audit-report-json"), reportBefore);
  assert.equal(await page.isDisabled("#audit-cancel"), true);

  // Still working: a tiny run again finishes.
  await setGrid({ e: "0, 0.3", trials: 2, seed: 5 });
  await runToEnd();
  assert.match(await page.textContent("#audit-status"), /^Done: \d+ trials/);
  assert.deepEqual(app.consoleErrors, []);
});

// Two circular companions (9.7 d, 25 m/s; 61 d, 12 m/s), a trend of 0.05 m/s/d and two
// instruments with extra scatter, from a fixed-seed generator (fixed-random.mjs).
function twoCompanionTrendTable() {
  const uniform = uniforms(20261203);
  const gauss = gaussians(uniform);
  let text = "bjd,rv [m/s],err [m/s],instrument\n";
  for (let i = 0; i < 60; i++) {
    const t = 2460000 + 5 * i + 3.5 * uniform();
    const [name, offset, sigma] = i % 3 === 0 ? ["Wren", 35, 2.5] : ["Heron", -20, 1.5];
    const v = 25 * Math.cos((2 * Math.PI * (t - 2460002)) / 9.7) + 12 * Math.cos((2 * Math.PI * (t - 2460030)) / 61)
      + 0.05 * (t - 2460150) + offset + Math.hypot(sigma, 3) * gauss();
    text += `${t.toFixed(5)},${v.toFixed(3)},${sigma},${name}\n`;
  }
  return text;
}

// Since the posterior of companion 2 is really sampled and every trial's posterior runs until its
// convergence rule holds or its budget runs out, the default budget made this audit exceed the
// 300 s page timeout (session 4). The page's budget controls bound it: the posterior runs in 1 of
// the 3 simulations per e, each with at most 30,000 evaluations; both reach the replay file.
test("two companions + trend + fitted jitter: the page's audit of companion 2 is the command line's", {
  timeout: 300_000,
}, async () => {
  const { page } = app;
  const file = path.join(TMP, "two-companions-trend.csv");
  writeFileSync(file, twoCompanionTrendTable());
  const attempts = await page.evaluate(() => Number(document.body.dataset.loadAttempts ?? 0));
  await page.setInputFiles("#file-input", file);
  await page.waitForFunction((n) => Number(document.body.dataset.loadAttempts) > n, attempts);
  await page.selectOption("select[name=companions]", "2");
  await page.check("#fit-settings [name='trend']");
  await page.selectOption("#fit-settings [name='jitter']", "fit");
  await page.fill("#audit-settings [name='audit_companion']", "2");
  await setGrid({ e: "0, 0.3", trials: 3, seed: 4 });
  // 2 companions, 2 offsets, a trend and 2 jitters: 15 parameters, so at least 30 walkers.
  await page.fill("#audit-settings [name='posterior_walkers']", "32");
  await page.fill("#audit-settings [name='posterior_steps']", "100");
  await page.fill("#audit-settings [name='posterior_burn']", "50");
  // At most 400 circular simulations (default 10000), carried by the replay file.
  await page.fill("#audit-settings [name='max_circular']", "400");
  await page.fill("#audit-settings [name='posterior_trials']", "1");
  await page.fill("#audit-settings [name='posterior_max_evaluations']", "30000");
  await runToEnd();
  const settings = await saveDownload("#download-settings", "two-settings.json");
  const replay = JSON.parse(readFileSync(settings.file, "utf8"));
  assert.equal(replay.model.companions, 2);
  assert.equal(replay.model.trend, true);
  assert.equal(replay.model.jitter, "fit");
  assert.equal(replay.model.audit_companion, 2);
  assert.equal(replay.injection.max_circular_trials, 400);
  assert.equal(replay.injection.posterior.trials_per_cell, 1);
  assert.equal(replay.injection.posterior.max_evaluations, 30000);
  const out = path.join(TMP, "cli-two");
  const native = JSON.parse(execFileSync(CLI, [
    "audit", file, "--settings", settings.file, "--json", "--quiet", "--out", out,
  ], { cwd: ROOT, encoding: "utf8" }));
  const shown = JSON.parse(await page.textContent("#audit-report-json"));
  assert.deepEqual(shown, native);
  assert.equal(native.context.companion, 2);
  assert.equal(native.context.n_companions, 2);
  assert.equal(native.context.jitter_fitted, true);
  assert.equal(native.context.instruments.length, 2);
  assert.ok(native.context.trend !== null);
  const trials = await saveDownload("#download-trials", "two-trials.csv");
  assert.equal(readFileSync(trials.file, "utf8"), readFileSync(path.join(out, "trials.csv"), "utf8"));
  assert.deepEqual(app.consoleErrors, []);
});

test("after the first visit the page starts with no network (service worker)", async () => {
  const { page } = app;
  const cached = await page.evaluate(async () => {
    await navigator.serviceWorker.ready;
    const names = ["./", "./app.js", "./audit-view.js", "./audit-worker.js", "./pkg/eccaudit_web_bg.wasm"];
    return Promise.all(names.map(async (n) => [n, Boolean(await caches.match(n))]));
  });
  assert.deepEqual(cached.filter(([, ok]) => !ok), [], "every file of the page is cached");
  await page.context().setOffline(true);
  try {
    await page.reload();
    await page.waitForSelector("body[data-ready='true']", { timeout: 20_000 });
    assert.match(await page.textContent("[data-testid='summary-facts']"), /velka17-nearly-circular\.csv/);
  } finally {
    await page.context().setOffline(false);
  }
  assert.deepEqual(app.consoleErrors, []);
  assert.deepEqual(app.foreignRequests, []);
});
