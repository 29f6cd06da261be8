// The least-squares fit runs in a Web Worker (www/fit-worker.js): during a long fit (three
// companions, a trend, fitted jitters, a wide period grid, 1500 epochs) the page keeps running its
// timers and answering; the result the page shows and exports equals `eccaudit fit --json`;
// Cancel, a new request and a new table stop a running fit and keep (or clear) what they should;
// a bad setting is one line and keeps the previous fit; the worker is cached for offline use.
import { test } from "node:test";
import assert from "node:assert/strict";
import { execFileSync } from "node:child_process";
import { readFileSync, writeFileSync } from "node:fs";
import path from "node:path";
import { pageForThisFile, tempDirForThisFile, CLI, ROOT } from "./harness.mjs";
import { uniforms, gaussians } from "./fixed-random.mjs";

const app = pageForThisFile();
const TMP = tempDirForThisFile("fit-worker");

/** Radial velocity of one Keplerian companion at time t (textbook Newton iteration of Kepler's
 *  equation; test data only — the page's numbers all come from the wasm core). */
function keplerian(t, { period, k, e, omega, tp }) {
  const twoPi = 2 * Math.PI;
  const mean = ((((twoPi * (t - tp)) / period) % twoPi) + twoPi) % twoPi;
  let ecc = e < 0.8 ? mean : Math.PI;
  for (let i = 0; i < 50; i++) {
    const step = (ecc - e * Math.sin(ecc) - mean) / (1 - e * Math.cos(ecc));
    ecc -= step;
    if (Math.abs(step) < 1e-14) break;
  }
  const nu = 2 * Math.atan2(Math.sqrt(1 + e) * Math.sin(ecc / 2), Math.sqrt(1 - e) * Math.cos(ecc / 2));
  return k * (Math.cos(nu + omega) + e * Math.cos(omega));
}

/** A realistic heavy table: three eccentric companions (P = 4.73, 38.6 and 412 d), a trend of
 *  0.012 m/s/d, two instruments with their own offsets, error bars of 2–4 m/s and 2.5 m/s of
 *  excess scatter (jitter), `n` random nights over 1600 d; fixed seed, same text every run. */
function threeCompanionTable(n, seed) {
  const rand = uniforms(seed);
  const normal = gaussians(rand);
  const t0 = 2459000;
  const companions = [
    { period: 4.73, k: 32, e: 0.12, omega: 1.1, tp: t0 + 1.3 },
    { period: 38.6, k: 21, e: 0.35, omega: 4.0, tp: t0 + 11 },
    { period: 412, k: 16, e: 0.2, omega: 2.5, tp: t0 + 150 },
  ];
  const times = Array.from({ length: n }, () => t0 + Math.floor(rand() * 1600) + 0.55 + 0.3 * rand());
  times.sort((a, b) => a - b);
  let text = "bjd,rv [m/s],err [m/s],instrument\n";
  for (const t of times) {
    const instrument = t < t0 + 700 ? "A" : "B";
    const sigma = 2 + 2 * rand();
    let v = (instrument === "A" ? -8 : 5) + 0.012 * (t - t0);
    for (const c of companions) v += keplerian(t, c);
    v += Math.sqrt(sigma * sigma + 2.5 * 2.5) * normal();
    text += `${t.toFixed(5)},${v.toFixed(3)},${sigma.toFixed(2)},${instrument}\n`;
  }
  return text;
}

const HEAVY_NAME = "three-companions.csv";
const HEAVY_TEXT = threeCompanionTable(1500, 20261203);
// The heavy model and its command-line twin.
const HEAVY_FORM = { companions: "3", trend: true, jitter: "fit", minPeriod: "0.5" };
const HEAVY_ARGS = ["--companions", "3", "--trend", "--jitter", "fit", "--min-period", "0.5"];

async function setForm({ companions = "1", trend = false, jitter = "auto", minPeriod = "", maxPeriod = "" }) {
  const { page } = app;
  await page.selectOption("select[name=companions]", companions);
  await page.setChecked("input[name=trend]", trend);
  await page.selectOption("select[name=jitter]", jitter);
  await page.fill("input[name=minPeriod]", minPeriod);
  await page.fill("input[name=maxPeriod]", maxPeriod);
}

const attemptsNow = () => app.page.evaluate(() => Number(document.body.dataset.fitAttempts ?? 0));

/** Press Fit and wait until `count` more fit attempts have ended; returns the last outcome. */
async function pressFitAndWait(count = 1) {
  const { page } = app;
  const before = await attemptsNow();
  await page.click("#fit-button");
  await page.waitForFunction((n) => Number(document.body.dataset.fitAttempts) >= n, before + count, { timeout: 240_000 });
  return page.evaluate(() => document.body.dataset.fitOutcome);
}

/** Press Fit and return once the worker says it is fitting (the fit is then in progress). */
async function startFit() {
  const { page } = app;
  await page.click("#fit-button");
  await page.waitForFunction(() => /^Fitting in the background/.test(document.getElementById("fit-progress").textContent),
    null, { timeout: 60_000 });
  assert.equal(await page.getAttribute("#fit-button", "aria-busy"), "true");
  assert.equal(await page.isEnabled("#fit-cancel"), true, "Cancel is offered while a fit runs");
}

/** Click `selector` in the same task as a check that a fit is still running (so a fit that
 *  ends meanwhile cannot make the click mean something else); true when it was running. */
function clickWhileFitting(selector) {
  return app.page.evaluate((sel) => {
    const running = document.getElementById("fit-button").getAttribute("aria-busy") === "true";
    document.querySelector(sel).click();
    return running;
  }, selector);
}

/** What the page shows of its fit: elements, status, both figures' pixels, the JSON it exports. */
function shownFit() {
  return app.page.evaluate(() => ({
    elements: document.getElementById("fit-elements").textContent,
    status: document.getElementById("fit-status").textContent,
    periodogram: document.getElementById("periodogram-canvas").toDataURL(),
    phase: document.getElementById("phase-canvas").toDataURL(),
    resultsShown: !document.getElementById("fit-results").hidden,
  }));
}

async function exportedFitJson(name) {
  const { file } = await app.saveDownload("[data-testid='export-json-fit-elements']", path.join(TMP, name));
  return JSON.parse(readFileSync(file, "utf8"));
}

let heavyFitMs = 0;

test("a heavy fit runs in the worker: timers keep ticking, the page answers, the result equals the CLI's", async (t) => {
  const { page } = app;
  await app.dropText(HEAVY_TEXT, HEAVY_NAME);
  assert.match(await page.textContent("[data-testid='summary-facts']"), /1500 measurements from 2 instruments/);
  await setForm(HEAVY_FORM);
  // A main-thread timer every 20 ms and animation frames, recorded until the fit attempt ends.
  await page.evaluate(() => {
    const attempts = document.body.dataset.fitAttempts;
    const probe = { start: performance.now(), last: performance.now(), maxGap: 0, ticks: 0, frames: 0, end: null };
    window.fitProbe = probe;
    const timer = setInterval(() => {
      const now = performance.now();
      probe.maxGap = Math.max(probe.maxGap, now - probe.last);
      probe.last = now;
      probe.ticks++;
      if (document.body.dataset.fitAttempts !== attempts) {
        probe.end = now;
        clearInterval(timer);
      }
    }, 20);
    const frame = () => {
      probe.frames++;
      if (probe.end === null) requestAnimationFrame(frame);
    };
    requestAnimationFrame(frame);
  });
  const before = await attemptsNow();
  await startFit();
  // While the worker fits, the page answers a round trip promptly (a fit on the main thread
  // would hold this evaluation until it ended) and its own controls respond.
  const sent = Date.now();
  const busy = await page.evaluate(() => document.getElementById("fit-button").getAttribute("aria-busy"));
  const roundTrip = Date.now() - sent;
  assert.equal(busy, "true", "the fit was still running during the round trip");
  await page.fill("input[name=maxPeriod]", "2000");
  assert.equal(await page.inputValue("input[name=maxPeriod]"), "2000", "the form takes input during the fit");
  await page.fill("input[name=maxPeriod]", "");
  await page.waitForFunction((n) => Number(document.body.dataset.fitAttempts) > n, before, { timeout: 240_000 });
  assert.equal(await page.evaluate(() => document.body.dataset.fitOutcome), "done",
    await page.textContent("#fit-error"));
  const probe = await page.evaluate(() => window.fitProbe);
  heavyFitMs = probe.end - probe.start;
  t.diagnostic(`fit ${Math.round(heavyFitMs)} ms; longest timer gap ${Math.round(probe.maxGap)} ms; ` +
    `${probe.ticks} ticks, ${probe.frames} frames; round trip ${roundTrip} ms`);
  // The fit took long enough for a frozen page to show (1.5–3 s in Chromium on an idle core):
  // on the main thread the timer's longest gap would be about the whole fit; here it stays
  // below a third of it (it includes adopting and drawing the result, ~0.1–0.3 s, and the
  // scheduling delays of a loaded machine).
  assert.ok(heavyFitMs > 1000, `the fit took ${heavyFitMs} ms: too short to test responsiveness`);
  assert.ok(probe.maxGap < heavyFitMs / 3, `longest timer gap ${probe.maxGap} ms during a ${heavyFitMs} ms fit`);
  assert.ok(probe.ticks > heavyFitMs / 20 / 10, `${probe.ticks} timer ticks in ${heavyFitMs} ms`);
  assert.ok(probe.frames > 1, `${probe.frames} animation frames during the fit`);
  assert.ok(roundTrip < Math.max(1000, heavyFitMs / 3), `a round trip took ${roundTrip} ms during the fit`);

  // The shown result: three companions near the simulated periods, both figures drawn.
  const periods = await page.$$eval("#fit-elements tbody tr", (rows) => {
    const row = rows.find((r) => r.querySelector("td")?.textContent === "P [d]");
    return [...row.querySelectorAll("td")].slice(1).map((td) => Number(td.textContent.split("±")[0]));
  });
  assert.equal(periods.length, 3);
  // Simulated at 4.73, 38.6 and 412 d; the fit of these 1500 epochs lands within these bounds
  // (about ten formal errors, from `eccaudit fit` on the same file).
  for (const [found, truth, tol] of [[periods[0], 4.73, 0.01], [periods[1], 38.6, 0.1], [periods[2], 412, 5]]) {
    assert.ok(Math.abs(found - truth) < tol, `P = ${found}, simulated ${truth}`);
  }
  assert.ok(await app.paintedPixels("#periodogram-canvas") > 5000);
  assert.ok(await app.paintedPixels("#phase-canvas") > 5000);
  assert.equal(await page.textContent("#fit-progress"), "", "no progress line after the fit");
  assert.equal(await page.textContent("#fit-button"), "Fit");
  assert.equal(await page.isDisabled("#fit-cancel"), true);

  // The page's fit (the JSON export) equals the command line's for the same table and model,
  // number for number (JSON on both sides).
  const table = path.join(TMP, HEAVY_NAME);
  writeFileSync(table, HEAVY_TEXT);
  const native = JSON.parse(execFileSync(CLI, ["fit", "--json", table, ...HEAVY_ARGS], { cwd: ROOT, encoding: "utf8" }));
  assert.deepEqual(await exportedFitJson("three-fit.json"), native);
  await app.screenshot("fit-worker-01-three-companions");
  assert.deepEqual(app.consoleErrors, []);
});

test("Cancel stops a running fit; the previous fit and its figures stay, and the next fit works", async () => {
  const { page } = app;
  const before = await shownFit();
  assert.ok(before.resultsShown, "the previous test left a fit on the page");
  const exportedBefore = await exportedFitJson("before-cancel.json");
  const attempts = await attemptsNow();
  await startFit();
  assert.equal(await clickWhileFitting("#fit-cancel"), true, "the fit was running when Cancel was pressed");
  await page.waitForFunction((n) => Number(document.body.dataset.fitAttempts) > n, attempts);
  assert.equal(await page.evaluate(() => document.body.dataset.fitOutcome), "cancelled");
  const line = await page.textContent("#fit-progress");
  assert.equal(line, "Fit cancelled. The previous fit is still shown.");
  assert.equal(await page.isHidden("#fit-error"), true, "a cancel is not an error");
  assert.equal(await page.textContent("#fit-button"), "Fit");
  assert.equal(await page.getAttribute("#fit-button", "aria-busy"), "false");
  assert.equal(await page.isDisabled("#fit-cancel"), true);
  assert.deepEqual(await shownFit(), before, "elements, status and both figures unchanged");
  assert.deepEqual(await exportedFitJson("after-cancel.json"), exportedBefore);
  // The cancelled fit's worker is gone: nothing arrives later (waited about as long as the fit
  // would have taken).
  await page.waitForTimeout(Math.min(8000, Math.max(1000, 1.5 * heavyFitMs)));
  assert.equal(await attemptsNow(), attempts + 1);
  assert.deepEqual(await shownFit(), before);

  // The next fit starts a fresh worker and is shown.
  await setForm({ companions: "1" });
  assert.equal(await pressFitAndWait(), "done", await page.textContent("#fit-error"));
  const after = await shownFit();
  assert.notEqual(after.elements, before.elements);
  assert.equal((await exportedFitJson("one.json")).eccentric.companions.length, 1);
  await app.screenshot("fit-worker-02-after-cancel");
  assert.deepEqual(app.consoleErrors, []);
});

test("a new fit request while one runs replaces it: only the new one is shown", async () => {
  const { page } = app;
  await setForm(HEAVY_FORM);
  const attempts = await attemptsNow();
  await startFit();
  // Ask for a lighter model while the heavy fit runs (the form is read when Fit is pressed):
  // the heavy one ends (cancelled), the light one runs and is shown.
  const running = await page.evaluate(() => {
    const running = document.getElementById("fit-button").getAttribute("aria-busy") === "true";
    const form = document.getElementById("fit-settings");
    form.elements.companions.value = "2";
    form.elements.minPeriod.value = "";
    document.getElementById("fit-button").click();
    return running;
  });
  assert.equal(running, true, "the heavy fit was running when Fit was pressed again");
  await page.waitForFunction((n) => Number(document.body.dataset.fitAttempts) >= n, attempts + 2, { timeout: 240_000 });
  assert.equal(await page.evaluate(() => document.body.dataset.fitOutcome), "done", await page.textContent("#fit-error"));
  // Waited about as long as the heavy fit takes: its result never arrives.
  await page.waitForTimeout(Math.min(8000, Math.max(1000, 1.5 * heavyFitMs)));
  assert.equal(await attemptsNow(), attempts + 2, "two attempts ended: the replaced one and the new one");
  const json = await exportedFitJson("replaced.json");
  assert.equal(json.eccentric.companions.length, 2, "the shown fit is the second request's");
  assert.ok(json.eccentric.trend !== null, "with its trend");
  // The form's other settings stayed the heavy fit's (fitted jitters), as the CLI is told.
  const native = JSON.parse(execFileSync(CLI, ["fit", "--json", path.join(TMP, HEAVY_NAME), "--companions", "2", "--trend", "--jitter", "fit"],
    { cwd: ROOT, encoding: "utf8" }));
  assert.deepEqual(json, native);
  assert.deepEqual(app.consoleErrors, []);
});

test("a bad setting is one line and keeps the previous fit and its figures", async () => {
  const { page } = app;
  const before = await shownFit();
  assert.ok(before.resultsShown);
  // Checked by the core in the worker.
  await setForm({ companions: "2", trend: true, minPeriod: "50", maxPeriod: "10" });
  assert.equal(await pressFitAndWait(), "error");
  const message = await page.textContent("#fit-error");
  assert.equal(message, "max_period = 10: must be above min_period = 50. The previous fit is still shown.");
  assert.ok(!message.includes("\n"), "one line");
  assert.deepEqual(await shownFit(), before, "elements, status and both figures unchanged");
  assert.equal(await page.textContent("#fit-button"), "Fit");
  assert.equal(await page.textContent("#fit-progress"), "");
  // Checked by the page before the worker is asked.
  await setForm({ companions: "2", trend: true });
  await page.fill("input[name=periods]", "12, x");
  assert.equal(await pressFitAndWait(), "error");
  assert.equal(await page.textContent("#fit-error"), "periods: 'x' is not a number. The previous fit is still shown.");
  await page.fill("input[name=periods]", "");
  assert.deepEqual(await shownFit(), before);
  assert.deepEqual(app.consoleErrors, []);
});

test("loading another table stops a running fit and says so", async () => {
  const { page } = app;
  await setForm(HEAVY_FORM);
  const attempts = await attemptsNow();
  await startFit();
  const loads = await page.evaluate(() => Number(document.body.dataset.loadAttempts));
  const running = await page.evaluate(() => {
    const running = document.getElementById("fit-button").getAttribute("aria-busy") === "true";
    const select = document.getElementById("demo-select");
    select.value = "1";
    select.dispatchEvent(new Event("change"));
    return running;
  });
  assert.equal(running, true, "the fit was running when the table was chosen");
  await page.waitForFunction((n) => Number(document.body.dataset.loadAttempts) > n, loads);
  assert.match(await page.textContent("[data-testid='summary-facts']"), /corvin4-eccentric\.tsv/);
  assert.equal(await attemptsNow(), attempts + 1);
  assert.equal(await page.evaluate(() => document.body.dataset.fitOutcome), "cancelled");
  assert.equal(await page.textContent("#fit-progress"), "Fit cancelled: a new table was loaded.");
  assert.equal(await page.isHidden("#fit-results"), true, "the new table has no fit yet");
  // The new table fits (Corvin 4, one companion: P ≈ 112.3 d as in fit.test.mjs).
  await setForm({ companions: "1" });
  assert.equal(await pressFitAndWait(), "done", await page.textContent("#fit-error"));
  assert.match(await page.textContent("#fit-status"), /^Converged\./);
  assert.deepEqual(app.consoleErrors, []);
});

test("the fit worker is cached: offline, the page still fits", async () => {
  const { page } = app;
  const cached = await page.evaluate(async () => {
    await navigator.serviceWorker.ready;
    return Boolean(await caches.match("./fit-worker.js"));
  });
  assert.equal(cached, true, "fit-worker.js is in the service worker's cache");
  await page.context().setOffline(true);
  try {
    await page.reload();
    await page.waitForSelector("body[data-ready='true']", { timeout: 20_000 });
    await app.selectDemo(1);
    assert.equal(await pressFitAndWait(), "done", await page.textContent("#fit-error"));
    assert.ok(await app.paintedPixels("#periodogram-canvas") > 5000);
  } finally {
    await page.context().setOffline(false);
  }
  assert.deepEqual(app.consoleErrors, []);
  assert.deepEqual(app.foreignRequests, []);
});
