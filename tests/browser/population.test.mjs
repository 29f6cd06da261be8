// The population view: saved posterior draws (written by `eccaudit priors --save-samples` for the
// two demo tables) chosen in the page are inferred in a worker; the summary, both figures and
// the CSV/JSON downloads appear, and the downloads are byte for byte what `eccaudit population
// --out` writes for the same files in the same order and seed (same bits natively and in wasm).
// And the survey view feeds it: a page survey with "Save posterior draws" gives the population
// `eccaudit survey --save-samples` + `eccaudit population` give.
import { test } from "node:test";
import assert from "node:assert/strict";
import { execFileSync } from "node:child_process";
import { readFileSync, readdirSync, writeFileSync } from "node:fs";
import path from "node:path";
import { pageForThisFile, tempDirForThisFile, CLI, MAKE_TABLES, DEMO_DIR } from "./harness.mjs";

const TMP = tempDirForThisFile("population-test");

const app = pageForThisFile();

test("saved draws give the command line's population in the page", async () => {
  const { page } = app;
  const draws = path.join(TMP, "draws");
  // Two tables × two priors: four files with distinct names.
  for (const [table, tag] of [["velka17-nearly-circular.csv", "a"], ["corvin4-eccentric.tsv", "b"]]) {
    const dir = path.join(TMP, tag);
    execFileSync(CLI, ["priors", path.join(DEMO_DIR, table), "--quiet", "--priors", "uniform:0..0.99", "kipping2013",
      "--save-samples", dir]);
    for (const f of readdirSync(dir)) execFileSync("cp", [path.join(dir, f), path.join(TMP, `${tag}-${f}`)]);
  }
  const files = readdirSync(TMP).filter((f) => f.endsWith(".ecsv")).sort();
  assert.equal(files.length, 4);

  await page.fill("#population-seed", "3");
  await page.setInputFiles("#population-files", files.map((f) => path.join(TMP, f)));
  await page.waitForFunction(() => document.getElementById("population-chosen").textContent.startsWith("4 files"));
  await page.click("#population-run");
  await page.waitForSelector("body[data-population-state='done']", { timeout: 300_000 });
  const summary = await page.textContent("#population-summary");
  // Runs that missed their convergence rule are excluded (the files say which).
  const converged = files.filter((f) => readFileSync(path.join(TMP, f), "utf8").includes("{converged: 'true'}")).length;
  assert.ok(converged >= 2, `only ${converged} of 4 runs converged`);
  assert.match(summary, new RegExp(`Population of e from ${converged} companions \\(4 read\\)`));
  assert.match(summary, /population mean e = /);
  assert.ok(await app.paintedPixels("#population-density") > 1000);
  assert.ok(await app.paintedPixels("#population-beta") > 1000);

  const save = async (button, name) => readFileSync((await app.saveDownload(button, path.join(TMP, name))).file, "utf8");
  const csv = await save("#population-download-csv", "page-population.csv");
  const json = await save("#population-download-json", "page-population.json");
  const svg = await save("[data-testid='export-svg-population-beta']", "page-beta.svg");
  assert.match(svg, /Kipping 2013, all/);

  execFileSync(CLI, ["population", ...files.map((f) => path.join(TMP, f)), "--seed", "3", "--out", draws]);
  assert.equal(csv, readFileSync(path.join(draws, "population.csv"), "utf8"));
  assert.equal(json, readFileSync(path.join(draws, "population.json"), "utf8"));
  await app.screenshot("population");
  assert.deepEqual(app.consoleErrors, []);
});

test("the survey view feeds the population view with the command line's draws", async () => {
  const { page } = app;
  const root = path.join(TMP, "survey");
  execFileSync(MAKE_TABLES, [root, "3", "30", "11"]);
  const dir = path.join(root, "tables");
  const names = ["star-001.csv", "star-002.csv", "star-003.csv"];
  await page.fill("#audit-settings [name='eccentricities']", "0, 0.3");
  await page.fill("#audit-settings [name='trials']", "2");
  await page.fill("#audit-settings [name='seed']", "5");
  await page.fill("#audit-settings [name='posterior_walkers']", "16");
  await page.fill("#audit-settings [name='posterior_steps']", "40");
  await page.fill("#audit-settings [name='posterior_burn']", "20");
  await page.check("#survey-save-draws");
  await page.setInputFiles("#survey-files", names.map((n) => path.join(dir, n)));
  await page.waitForFunction(() => document.getElementById("survey-chosen").textContent.startsWith("3 tables"));
  await page.click("#survey-run");
  await page.waitForSelector("body[data-survey-state='done']", { timeout: 300_000 });
  const chosen = await page.textContent("#population-chosen");
  assert.match(chosen, /^3 files \(from the survey\)/);
  await page.fill("#population-seed", "2");
  await page.click("#population-run");
  await page.waitForSelector("body[data-population-state='done']", { timeout: 300_000 });
  const [download] = await Promise.all([page.waitForEvent("download"), page.click("#population-download-csv")]);
  const file = path.join(TMP, "page-survey-population.csv");
  await download.saveAs(file);

  writeFileSync(path.join(dir, "page-manifest.csv"), `table\n${names.join("\n")}\n`);
  const out = path.join(TMP, "cli-survey");
  execFileSync(CLI, ["survey", path.join(dir, "page-manifest.csv"), "--out", out,
    "--e", "0,0.3", "--trials", "2", "--seed", "5",
    "--posterior-walkers", "16", "--posterior-steps", "40", "--posterior-burn", "20", "--quiet", "--save-samples"],
  { env: { ...process.env, SLURM_ARRAY_TASK_ID: "" } });
  execFileSync(CLI, ["population", out, "--seed", "2", "--out", path.join(TMP, "cli-survey-population")]);
  assert.equal(readFileSync(file, "utf8"), readFileSync(path.join(TMP, "cli-survey-population", "population.csv"), "utf8"));
  assert.deepEqual(app.consoleErrors, []);
});
