// Surveys in the page: several simulated tables and one malformed table chosen at once, audited
// in the workers; the catalogue lists every table (the bad one with file, line and column), and
// its CSV and JSON downloads are byte for byte the catalogue `eccaudit survey` writes for a
// manifest listing the same files in the same order with the same settings.
import { test } from "node:test";
import assert from "node:assert/strict";
import { execFileSync } from "node:child_process";
import { readFileSync, writeFileSync } from "node:fs";
import path from "node:path";
import { pageForThisFile, tempDirForThisFile, CLI, MAKE_TABLES } from "./harness.mjs";

const TMP = tempDirForThisFile("survey-test");

const app = pageForThisFile();

test("a survey of four tables in the page gives the command line's catalogue", async () => {
  const { page } = app;
  // Three simulated tables (fixed seed) and one with a word where a velocity should be.
  execFileSync(MAKE_TABLES, [TMP, "3", "30", "9"]);
  const dir = path.join(TMP, "tables");
  writeFileSync(path.join(dir, "bad.csv"),
    "bjd,rv [m/s],sigma [m/s]\n2460001.5,3.2,2.0\n2460002.5,4.1,2.0\n2460003.5,fast,2.0\n");
  const names = ["bad.csv", "star-001.csv", "star-002.csv", "star-003.csv"];

  await page.fill("#audit-settings [name='eccentricities']", "0, 0.3");
  await page.fill("#audit-settings [name='trials']", "2");
  await page.fill("#audit-settings [name='seed']", "5");
  await page.fill("#audit-settings [name='posterior_walkers']", "16");
  await page.fill("#audit-settings [name='posterior_steps']", "40");
  await page.fill("#audit-settings [name='posterior_burn']", "20");
  // At most 200 circular simulations per decision (default 10000): plumbing, not precision.
  await page.fill("#audit-settings [name='max_circular']", "200");
  // Least squares quoted: its extra simulations are cheap (a quoted posterior output adds runs).
  await page.fill("#audit-settings [name='estimator']", "lsq");
  await page.setInputFiles("#survey-files", names.map((n) => path.join(dir, n)));
  await page.waitForFunction(() => document.getElementById("survey-chosen").textContent.startsWith("4 tables"));
  await page.click("#survey-run");
  // Each table runs its base trials and then the adaptive ones its statement needs (several
  // hundred least-squares trials): minutes in wasm on a loaded machine.
  await page.waitForSelector("body[data-survey-state='done']", { timeout: 900_000 }).catch(async (err) => {
    throw new Error(`${err.message}; survey status: ${await page.textContent("#survey-status")}; progress: ${await page.textContent("#survey-progress-text").catch(() => "?")}`);
  });

  const status = await page.textContent("#survey-status");
  assert.match(status, /^Done: 3 of 4 tables audited/);
  const rows = await page.$$eval("#survey-catalogue tbody tr", (trs) => trs.map((tr) => [tr.dataset.status, tr.cells[0].textContent, tr.cells[10].textContent]));
  assert.deepEqual(rows.map((r) => r[0]), ["error", "ok", "ok", "ok"]);
  assert.equal(rows[0][1], "bad.csv");
  assert.match(rows[0][2], /bad\.csv:4:2:/);

  const save = async (button, name) => readFileSync((await app.saveDownload(button, path.join(TMP, name))).file, "utf8");
  const csv = await save("#survey-download-csv", "page-catalogue.csv");
  const json = await save("#survey-download-json", "page-catalogue.json");

  writeFileSync(path.join(dir, "page-manifest.csv"), `table\n${names.join("\n")}\n`);
  execFileSync(CLI, ["survey", path.join(dir, "page-manifest.csv"), "--out", path.join(TMP, "cli"),
    "--e", "0,0.3", "--trials", "2", "--seed", "5",
    "--posterior-walkers", "16", "--posterior-steps", "40", "--posterior-burn", "20",
    "--max-circular", "200", "--estimator", "lsq", "--quiet"],
  { env: { ...process.env, SLURM_ARRAY_TASK_ID: "" } });
  assert.equal(csv, readFileSync(path.join(TMP, "cli", "catalogue.csv"), "utf8"));
  assert.equal(json, readFileSync(path.join(TMP, "cli", "catalogue.json"), "utf8"));
  await app.screenshot("survey");
  assert.deepEqual(app.consoleErrors, []);
});
