// The page in headless Chromium: demo table on open, summary, plot, bad tables, hostile names, no foreign requests.
import { test } from "node:test";
import assert from "node:assert/strict";
import { readFile } from "node:fs/promises";
import path from "node:path";
import { pageForThisFile, DEMO_DIR } from "./harness.mjs";

const app = pageForThisFile();

test("opens with the first demo table: summary text and a painted plot", async () => {
  const facts = await app.page.textContent("[data-testid='summary-facts']");
  assert.match(facts, /velka17-nearly-circular\.csv: 26 measurements from 2 instruments over 455\.4 days/);
  assert.match(facts, /time: BJD, stated in the header/);
  const table = await app.page.textContent("[data-testid='summary-table']");
  assert.match(table, /Osprey\s*18/);
  assert.match(table, /Larkspur\s*8/);
  // Not blank: thousands of non-white pixels, and the first instrument's colour
  // (#0072b2 of eccaudit-plot's palette) is there, i.e. its points were drawn.
  assert.ok(await app.paintedPixels("#velocity-canvas") > 5000);
  assert.ok(await app.pixelsOfColour("#velocity-canvas", [0x00, 0x72, 0xb2]) > 50);
  await app.screenshot("01-demo-loaded");
});

test("the second demo table converts km/s and reads an offset Julian date", async () => {
  await app.page.selectOption("#demo-select", "1");
  const facts = await app.page.textContent("[data-testid='summary-facts']");
  assert.match(facts, /corvin4-eccentric\.tsv: 36 measurements from 1 instrument over 867\.4 days/);
  assert.match(facts, /BJD - 2450000/);
  assert.match(facts, /velocities read in km\/s, shown in m\/s/);
  const table = await app.page.textContent("[data-testid='summary-table']");
  assert.match(table, /4\.1\d/, "median uncertainty ≈ 4.1 m/s after conversion from km/s");
});

test("a model curve can be drawn over the data and a bad one is refused", async () => {
  const { page } = app;
  await page.click("#model-form summary");
  const before = await app.paintedPixels("#velocity-canvas");
  await page.fill("input[name=period]", "112.6");
  await page.fill("input[name=semi_amplitude]", "47.3");
  await page.fill("input[name=ecc]", "0.47");
  await page.fill("input[name=omega_deg]", "214");
  await page.fill("input[name=t_peri]", "9903.4");
  await page.fill("input[name=gamma]", "8214");
  await page.click("#elements button[type=submit]");
  assert.equal(await page.isHidden("#model-error"), true);
  assert.notEqual(await app.paintedPixels("#velocity-canvas"), before, "the curve changed the plot");
  await app.screenshot("02-model-curve");
  await page.fill("input[name=ecc]", "1.2");
  await page.click("#elements button[type=submit]");
  assert.match(await page.textContent("#model-error"), /eccentricity must satisfy 0 <= e < 1, got 1\.2/);
  await page.click("#clear-model");
});

test("a malformed table shows file, line and column, and keeps the loaded data", async () => {
  const good = await readFile(path.join(DEMO_DIR, "velka17-nearly-circular.csv"), "utf8");
  await app.dropText(good, "velka17.csv");
  const lines = good.split("\n");
  const firstData = lines.findIndex((l) => /^\d/.test(l));
  lines[firstData + 2] = lines[firstData + 2].replace(/,([-\d.]+),/, ",12.x,");
  await app.dropText(lines.join("\n"), "broken.csv");
  const message = await app.page.textContent("#load-error");
  assert.match(message, new RegExp(`broken\\.csv:${firstData + 3}:2: `));
  assert.match(message, /12\.x/);
  // The previous table is still the one shown.
  assert.match(await app.page.textContent("[data-testid='summary-facts']"), /^velka17\.csv: 26 measurements/);
  await app.screenshot("03-malformed-table");
});

test("an instrument name with markup is shown as text and runs nothing", async () => {
  const hostile = "<img src=x onerror=alert(1)>";
  const text = `bjd,rv [m/s],err [m/s],instrument\n2459000.1,1.0,1.0,"${hostile}"\n` +
    `2459001.2,3.0,1.0,"${hostile}"\n2459002.3,-2.0,1.0,"${hostile}"\n`;
  await app.dropText(text, "hostile.csv");
  const table = await app.page.textContent("[data-testid='summary-table']");
  assert.ok(table.includes(hostile), "the name appears literally");
  assert.equal(await app.page.$$eval("#summary img", (imgs) => imgs.length), 0, "no element was created");
  assert.deepEqual(app.consoleErrors, []);
});

test("the page made no request outside its own origin", () => {
  assert.deepEqual(app.foreignRequests, []);
});
