// The least-squares fit on the page: demo table → Fit → status, elements, periodogram and phase
// fold; a table too short to fit gives a clear error and leaves the page usable.
import { test } from "node:test";
import assert from "node:assert/strict";
import { pageForThisFile } from "./harness.mjs";

const app = pageForThisFile();

async function pressFit() {
  const { page } = app;
  const attempts = await page.evaluate(() => Number(document.body.dataset.fitAttempts ?? 0));
  await page.click("#fit-button");
  await page.waitForFunction((n) => Number(document.body.dataset.fitAttempts) > n, attempts, { timeout: 60_000 });
}

/** The elements table as { label: [cells] }. */
async function elementsTable() {
  return app.page.$$eval("#fit-elements tbody tr", (rows) => Object.fromEntries(
    rows.map((r) => [...r.querySelectorAll("td")].map((td) => td.textContent))
      .filter((cells) => cells.length > 1)
      .map((cells) => [cells[0], cells.slice(1)])));
}

test("fitting the eccentric demo shows elements, status, Lucy–Sweeney and both figures", async () => {
  const { page } = app;
  await page.selectOption("#demo-select", "1");
  assert.equal(await page.isHidden("#fit-results"), true, "no fit before pressing Fit");
  await pressFit();
  assert.equal(await page.isHidden("#fit-error"), true, await page.textContent("#fit-error"));
  const table = await elementsTable();
  // Corvin 4 (invented; its header states P = 112.6 d, e = 0.47): the least-squares fit of
  // these 36 epochs gives P ≈ 112.3 d and e ≈ 0.44 (eccaudit fit on the same file).
  const [pText] = table["P [d]"];
  const period = Number(pText.split("±")[0]);
  assert.ok(Math.abs(period - 112.3) < 1, `P = ${pText}`);
  assert.match(pText, /±/, "a formal error is shown");
  const [eText] = table["e"];
  const ecc = Number(eText.split("±")[0]);
  assert.ok(Math.abs(ecc - 0.44) < 0.05, `e = ${eText}`);
  for (const label of ["K [m/s]", "ω [°]", "Tp [d]", "χ²", "reduced χ²", "rms [m/s]"]) {
    assert.ok(label in table, `${label} row in ${Object.keys(table)}`);
  }
  assert.ok(Object.keys(table).some((k) => k.startsWith("γ ")), "an offset row per instrument");
  assert.match(await page.textContent("#fit-status"), /^Converged\. \d+ of \d+ starts reached the best χ²/);
  const ls = await page.textContent("#lucy-sweeney");
  assert.match(ls, /ê = 0\.4\d\d, σe = 0\.\d+, p = [\d.]+e-\d+/);
  assert.match(ls, /eccentricity significant/);
  assert.match(ls, /Adopted: eccentric solution/);
  assert.equal(await page.isHidden("#companion-choice"), true, "one companion: no selector");
  assert.ok(await app.paintedPixels("#periodogram-canvas") > 5000);
  assert.ok(await app.paintedPixels("#phase-canvas") > 5000);
  // The instrument's colour (#0072b2, eccaudit-plot's first) marks the folded points.
  assert.ok(await app.pixelsOfColour("#phase-canvas", [0x00, 0x72, 0xb2]) > 50);
  await app.screenshot("fit-01-corvin4");
  assert.deepEqual(app.consoleErrors, []);
});

test("a three-row table gives a clear error, keeps the previous fit, and the page still works", async () => {
  const { page } = app;
  const pBefore = (await elementsTable())["P [d]"][0];
  // Loading a new table clears the fit from the page.
  await app.dropText("bjd,rv [m/s],err [m/s]\n2459000.1,1.0,1.0\n2459001.2,3.0,1.0\n2459003.3,-2.0,1.0\n", "three.csv");
  assert.equal(await page.isHidden("#fit-results"), true, "a new table clears the fit");
  await pressFit();
  const message = await page.textContent("#fit-error");
  assert.match(message, /too few points: 3 epochs for 6 parameters/);
  assert.equal(await page.isVisible("#fit-error"), true);

  // A fit that fails after a good one keeps the good one on screen.
  await page.selectOption("#demo-select", "0");
  await page.selectOption("#demo-select", "1");
  await pressFit();
  assert.equal(await page.isHidden("#fit-error"), true);
  await page.fill("input[name=minPeriod]", "50");
  await page.fill("input[name=maxPeriod]", "10");
  await pressFit();
  assert.match(await page.textContent("#fit-error"), /max_period = 10: must be above min_period = 50.*The previous fit is still shown\./s);
  assert.equal(await page.isVisible("#fit-results"), true);
  assert.equal((await elementsTable())["P [d]"][0], pBefore);
  await app.screenshot("fit-02-error-keeps-fit");

  // Still usable: a sensible range fits again.
  await page.fill("input[name=minPeriod]", "");
  await page.fill("input[name=maxPeriod]", "");
  await pressFit();
  assert.equal(await page.isHidden("#fit-error"), true);
  assert.deepEqual(app.consoleErrors, []);
});

/** Two circular orbits (P = 12.3 d, K = 40 m/s; P = 71 d, K = 25 m/s) at 60 irregular epochs,
 *  σ = 2 m/s, with a deterministic ±1 m/s pattern standing in for noise. */
function twoCompanionTable() {
  let text = "bjd,rv [m/s],err [m/s]\n";
  for (let i = 0; i < 60; i++) {
    const t = 2459000 + 5.3 * i + 2.1 * Math.sin(1.7 * i * i);
    const v = 40 * Math.cos(2 * Math.PI * (t - 2459003) / 12.3) +
      25 * Math.cos(2 * Math.PI * (t - 2459020) / 71) + ((i * 37) % 7 - 3) / 3;
    text += `${t.toFixed(5)},${v.toFixed(3)},2.0\n`;
  }
  return text;
}

test("two companions: both periods found, circular adopted, a selector redraws the fold", async () => {
  const { page } = app;
  await app.dropText(twoCompanionTable(), "two-companions.csv");
  await page.selectOption("select[name=companions]", "2");
  await pressFit();
  assert.equal(await page.isHidden("#fit-error"), true, await page.textContent("#fit-error"));
  const periods = (await elementsTable())["P [d]"].map((p) => Number(p.split("±")[0]));
  // Within a few tenths of a day of the periods the table was made with (formal errors
  // ≈ 0.003 d and 0.14 d; the ±1 m/s pattern is not Gaussian noise, so a loose bound).
  assert.ok(Math.abs(periods[0] - 12.3) < 0.05, `P1 = ${periods[0]}`);
  assert.ok(Math.abs(periods[1] - 71) < 0.7, `P2 = ${periods[1]}`);
  assert.match(await page.textContent("#lucy-sweeney"), /Adopted: circular solution/);
  assert.equal(await page.isVisible("#companion-choice"), true);
  const phaseLabel = await page.evaluate(() => document.getElementById("fold-companion").options.length);
  assert.equal(phaseLabel, 2);
  const first = await page.$eval("#phase-canvas", (c) => c.toDataURL());
  await page.selectOption("#fold-companion", "1");
  assert.notEqual(await page.$eval("#phase-canvas", (c) => c.toDataURL()), first, "the fold was redrawn");
  await app.screenshot("fit-03-two-companions");
  assert.deepEqual(app.consoleErrors, []);
});

test("the fit made no request outside the page's origin", () => {
  assert.deepEqual(app.foreignRequests, []);
});
