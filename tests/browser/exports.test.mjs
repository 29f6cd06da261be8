// Exports: every figure as PNG and SVG, every table as CSV and JSON (www/exports.js), and a
// 100,000-row table loaded through the file input without freezing the page.
import { test } from "node:test";
import assert from "node:assert/strict";
import { readFileSync } from "node:fs";
import path from "node:path";
import { pageForThisFile, DEMO_DIR } from "./harness.mjs";

const app = pageForThisFile();

/** Click `selector` and return the downloaded file's suggested name and bytes. */
async function download(selector) {
  const { page } = app;
  const [event] = await Promise.all([page.waitForEvent("download", { timeout: 30_000 }), page.click(selector)]);
  const stream = await event.createReadStream();
  const chunks = [];
  for await (const chunk of stream) chunks.push(chunk);
  return { name: event.suggestedFilename(), bytes: Buffer.concat(chunks) };
}

/** Data rows of a demo file: lines that are neither comments, blank, nor the header. */
function demoRows(fileName) {
  const lines = readFileSync(path.join(DEMO_DIR, fileName), "utf8").split(/\r?\n/)
    .filter((line) => line.trim() !== "" && !line.startsWith("#"));
  return lines.slice(1).map((line) => line.split(/[,\t]/));
}

/** The fields of one CSV line (RFC 4180 quoting). */
function csvFields(line) {
  const fields = [];
  let field = "";
  let quoted = false;
  for (let i = 0; i < line.length; i++) {
    const c = line[i];
    if (quoted) {
      if (c === '"' && line[i + 1] === '"') { field += '"'; i++; } else if (c === '"') quoted = false; else field += c;
    } else if (c === '"') quoted = true;
    else if (c === ",") { fields.push(field); field = ""; } else field += c;
  }
  fields.push(field);
  return fields;
}

// The PNG file signature (ISO/IEC 15948:2004, PNG specification, section 5.2).
const PNG_SIGNATURE = Buffer.from([0x89, 0x50, 0x4e, 0x47, 0x0d, 0x0a, 0x1a, 0x0a]);

test("the velocity figure of the first demo downloads as PNG and as SVG", async () => {
  const rows = demoRows("velka17-nearly-circular.csv");
  const instruments = [...new Set(rows.map((r) => r[3].trim()))];
  assert.deepEqual(instruments.sort(), ["Larkspur", "Osprey"]);

  const png = await download("[data-testid='export-png-velocity-canvas']");
  assert.equal(png.name, "velka17-nearly-circular-velocities.png");
  assert.ok(png.bytes.subarray(0, 8).equals(PNG_SIGNATURE), "PNG signature");
  // The PNG is the canvas: its IHDR (bytes 16–23) holds the canvas's width and height.
  const size = await app.page.$eval("#velocity-canvas", (c) => [c.width, c.height]);
  assert.deepEqual([png.bytes.readUInt32BE(16), png.bytes.readUInt32BE(20)], size);

  const svg = await download("[data-testid='export-svg-velocity-canvas']");
  assert.equal(svg.name, "velka17-nearly-circular-velocities.svg");
  const text = svg.bytes.toString("utf8");
  assert.ok(text.startsWith("<svg"), text.slice(0, 80));
  assert.match(text, new RegExp(`width="${size[0]}" height="${size[1]}"`));
  // It parses as XML in the browser's own parser.
  const parsed = await app.page.evaluate((source) => {
    const doc = new DOMParser().parseFromString(source, "image/svg+xml");
    return {
      error: doc.querySelector("parsererror")?.textContent ?? null,
      root: doc.documentElement.localName,
      texts: [...doc.querySelectorAll("text")].map((t) => t.textContent.trim()),
      circles: doc.querySelectorAll("circle").length,
    };
  }, text);
  assert.equal(parsed.error, null);
  assert.equal(parsed.root, "svg");
  for (const name of instruments) assert.ok(parsed.texts.includes(name), `${name} in ${parsed.texts}`);
  assert.ok(parsed.circles >= rows.length, `${parsed.circles} circles for ${rows.length} points`);
});

test("the summary table downloads as CSV (cells as shown) and JSON (the summary)", async () => {
  const csv = (await download("[data-testid='export-csv-summary-table']")).bytes.toString("utf8");
  const lines = csv.trim().split("\r\n");
  assert.equal(lines[0], "instrument,N,first,last,median σ [m/s],rms [m/s],weighted rms [m/s]");
  const shown = await app.page.$$eval("[data-testid='summary-table'] tbody tr",
    (trs) => trs.map((tr) => [...tr.cells].map((td) => td.textContent.trim()).join(",")));
  assert.deepEqual(lines.slice(1), shown);
  const json = JSON.parse((await download("[data-testid='export-json-summary-table']")).bytes.toString("utf8"));
  assert.equal(json.n_rows, demoRows("velka17-nearly-circular.csv").length);
  assert.equal(json.source_name, "velka17-nearly-circular.csv");
});

test("after fitting Corvin 4 the periodogram exports as SVG and the elements as CSV", async () => {
  const { page } = app;
  await page.selectOption("#demo-select", "1");
  const attempts = await page.evaluate(() => Number(document.body.dataset.fitAttempts ?? 0));
  await page.click("#fit-button");
  await page.waitForFunction((n) => Number(document.body.dataset.fitAttempts) > n, attempts, { timeout: 60_000 });
  assert.equal(await page.isHidden("#fit-error"), true, await page.textContent("#fit-error"));

  const svg = await download("[data-testid='export-svg-periodogram-canvas']");
  assert.equal(svg.name, "corvin4-eccentric-periodogram.svg");
  const text = svg.bytes.toString("utf8");
  assert.ok(text.startsWith("<svg"));
  const parsed = await page.evaluate((source) => {
    const doc = new DOMParser().parseFromString(source, "image/svg+xml");
    return {
      error: doc.querySelector("parsererror")?.textContent ?? null,
      texts: [...doc.querySelectorAll("text")].map((t) => t.textContent.trim()),
      lines: doc.querySelectorAll("polyline, path, line").length,
    };
  }, text);
  assert.equal(parsed.error, null);
  // The best peak is labelled as on the canvas ("P = 112.xx d": the fit test's P ≈ 112.3 d).
  assert.ok(parsed.texts.some((t) => /^P = 11\d\.\d\d d$/.test(t)), `${parsed.texts}`);
  assert.ok(parsed.lines > 0, "the power curve is drawn");

  const csv = await download("[data-testid='export-csv-fit-elements']");
  assert.equal(csv.name, "corvin4-eccentric-elements.csv");
  const rows = csv.bytes.toString("utf8").trim().split("\r\n").map(csvFields);
  const pRow = rows.find((r) => r[0] === "P [d]");
  assert.ok(pRow, `P row in ${rows.map((r) => r[0])}`);
  const shownP = await page.$eval("#fit-elements tbody tr td:nth-child(2)", (td) => td.textContent);
  assert.equal(pRow[1], shownP, "the CSV holds the number as shown");
  assert.ok(Math.abs(Number(pRow[1].split("±")[0]) - 112.3) < 1, pRow[1]);

  const json = JSON.parse((await download("[data-testid='export-json-fit-elements']")).bytes.toString("utf8"));
  assert.ok(json.eccentric.companions[0].period.value > 100, "the JSON is the fit report");

  const phase = await download("[data-testid='export-png-phase-canvas']");
  assert.ok(phase.bytes.subarray(0, 8).equals(PNG_SIGNATURE));
  assert.equal(app.consoleErrors.length, 0, app.consoleErrors.join("\n"));
});

test("a short prior set of Corvin 4 exports its figures as SVG and its table as CSV and JSON", async () => {
  const { page } = app;
  // As priors.test.mjs: two priors, 16 walkers × (100 burn-in + 300 steps), seed 3.
  await page.fill("#priors-specs", "uniform:0..0.8\nrayleigh(0.3)");
  for (const [name, value] of Object.entries({ walkers: "16", steps: "300", burn: "100", seed: "3" })) {
    await page.fill(`#priors-settings input[name='${name}']`, value);
  }
  const before = await page.evaluate(() => Number(document.body.dataset.priorsAttempts ?? 0));
  await page.click("#priors-run");
  await page.waitForFunction((n) => Number(document.body.dataset.priorsAttempts ?? 0) > n, before, { timeout: 120_000 });
  assert.equal(await page.evaluate(() => document.body.dataset.priorsOutcome), "done");

  const posteriors = await download("[data-testid='export-svg-priors-canvas']");
  assert.equal(posteriors.name, "corvin4-eccentric-posteriors.svg");
  const size = await page.$eval("#priors-canvas", (c) => [c.width, c.height]);
  const text = posteriors.bytes.toString("utf8");
  assert.ok(text.startsWith("<svg"));
  assert.match(text, new RegExp(`width="${size[0]}" height="${size[1]}"`));
  const corner = await download("[data-testid='export-svg-priors-corner']");
  assert.equal(corner.name, "corvin4-eccentric-corner-prior-1.svg");
  assert.ok(corner.bytes.toString("utf8").startsWith("<svg"));
  const traces = await download("[data-testid='export-png-priors-traces']");
  assert.ok(traces.bytes.subarray(0, 8).equals(PNG_SIGNATURE));

  const csv = (await download("[data-testid='export-csv-priors-table']")).bytes.toString("utf8");
  const rows = csv.trim().split("\r\n");
  assert.equal(rows.length, 3, csv);
  assert.match(rows[0], /^#,prior on e,median,/);
  const json = JSON.parse((await download("[data-testid='export-json-priors-table']")).bytes.toString("utf8"));
  assert.equal(json.runs.length, 2);
  // The CSV's median cell is the report's median as the table shows it (3 decimals).
  const first = csvFields(rows[1]);
  assert.equal(first[1], json.runs[0].summary.prior_label);
  assert.equal(first[2].split(" ± ")[0], json.runs[0].summary.median.toFixed(3));
  assert.equal(app.consoleErrors.length, 0, app.consoleErrors.join("\n"));
});

// Worst lateness of a 20 ms main-thread timer while a 100,000-row table loads. Measured on the
// shared 2-core test machine (headless Chromium): 294–687 ms in eight runs at load average
// 1–3, but 1083 and 1170 ms (for loads of 1.7 and 2.4 s) in two runs on a busier machine; the
// longest task is parsing (≈ 0.2 s) or drawing (≈ 0.3 s, one canvas path per colour, see
// crates/eccaudit-web/src/canvas.rs), plus time given to other processes, so the worst lateness
// grows with the machine's load just as the whole load does. A load that blocked the main thread
// would show a lateness of about its whole duration. Bound: 1000 ms, or 80 % of the load's
// duration when the machine is slow enough to stretch it past 1.25 s.
const MAX_LATENESS_MS = 1000;
const MAX_LATENESS_SHARE = 0.8;

test("a 100,000-row table loads through the file input while the page stays responsive", async () => {
  const { page } = app;
  const N = 100_000;
  // A deterministic sine plus ripple; the exact values do not matter, only the size.
  const lines = ["bjd,rv [m/s],sigma [m/s]"];
  for (let i = 0; i < N; i++) {
    const t = 2459000 + i * 0.01;
    lines.push(`${t.toFixed(5)},${(30 * Math.sin(i / 97) + 3 * Math.sin(i / 7)).toFixed(3)},${(2 + (i % 5) / 2).toFixed(2)}`);
  }
  const text = `${lines.join("\n")}\n`;
  // A 20 ms timer on the main thread records how late each tick fires while the table loads.
  await page.evaluate(() => {
    window.lateness = [];
    let expected = performance.now() + 20;
    window.ticker = setInterval(() => {
      const now = performance.now();
      window.lateness.push(now - expected);
      expected = now + 20;
    }, 20);
  });
  const attempts = await page.evaluate(() => Number(document.body.dataset.loadAttempts ?? 0));
  const started = Date.now();
  await page.setInputFiles("#file-input", { name: "big.csv", mimeType: "text/csv", buffer: Buffer.from(text) });
  await page.waitForFunction((n) => Number(document.body.dataset.loadAttempts) > n, attempts, { timeout: 60_000 });
  const loadMs = Date.now() - started;
  await page.waitForTimeout(200);
  const elapsed = Date.now() - started;
  const lateness = await page.evaluate(() => { clearInterval(window.ticker); return window.lateness; });
  const worst = Math.max(...lateness);
  console.log(`100,000 rows: loaded in ${elapsed} ms; worst timer lateness ${worst.toFixed(0)} ms over ${lateness.length} ticks`);
  assert.equal(await page.isHidden("#load-error"), true, await page.textContent("#load-error"));
  assert.match(await page.textContent("[data-testid='summary-facts']"), /^big\.csv: 100000 measurements from 1 instrument/);
  const bound = Math.max(MAX_LATENESS_MS, MAX_LATENESS_SHARE * loadMs);
  assert.ok(worst < bound, `worst lateness ${worst} ms (bound ${bound.toFixed(0)} ms for a ${loadMs} ms load)`);
  assert.equal(app.consoleErrors.length, 0, app.consoleErrors.join("\n"));
});
