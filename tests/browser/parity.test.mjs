// The wasm module and the native command line compute identical bits from identical inputs.
// Runs the built module under node (same V8 engine as Chromium) against target/release/eccaudit.
import { test } from "node:test";
import assert from "node:assert/strict";
import { execFileSync } from "node:child_process";
import { existsSync, readFileSync } from "node:fs";
import path from "node:path";
import { initSync, Dataset, KeplerBench } from "../../www/pkg/eccaudit_web.js";
import { ROOT, CLI } from "./harness.mjs";

initSync({ module: readFileSync(path.join(ROOT, "www", "pkg", "eccaudit_web_bg.wasm")) });

function cli(...args) {
  assert.ok(existsSync(CLI), `${CLI} is missing: run cargo build --release first`);
  return execFileSync(CLI, args, { cwd: ROOT, encoding: "utf8" });
}

test("Kepler solves: same checksum in wasm and native", () => {
  const n = 200_000;
  const seed = 20261202;
  const native = JSON.parse(cli("bench", "--json", "--n", String(n), "--repeats", "1", "--seed", String(seed)));
  const wasm = new KeplerBench(n, BigInt(seed)).solveAll();
  // Exact equality: libm and IEEE arithmetic give the same bits on both targets.
  assert.equal(wasm, native.kepler_checksum);
});

for (const file of ["velka17-nearly-circular.csv", "corvin4-eccentric.tsv"]) {
  test(`table summary of ${file}: same numbers in wasm and native`, () => {
    const rel = path.join("demo-data", file);
    const native = JSON.parse(cli("table", "--json", rel));
    const wasm = Dataset.parse(readFileSync(path.join(ROOT, rel), "utf8"), rel, "", "").summary();
    assert.deepEqual(wasm, native);
  });
}

// The least-squares fit: the wasm report equals `eccaudit fit --json` for the same file and
// settings, number for number (JSON on both sides: NaN and infinities become null).
const FIT_CASES = [
  { file: "corvin4-eccentric.tsv", settings: {}, args: [] },
  {
    file: "velka17-nearly-circular.csv",
    settings: { jitter: "fit", trend: true, minPeriod: 2, maxPeriod: 300, seed: 7 },
    args: ["--jitter", "fit", "--trend", "--min-period", "2", "--max-period", "300", "--seed", "7"],
  },
];
for (const { file, settings, args } of FIT_CASES) {
  test(`least-squares fit of ${file} ${JSON.stringify(settings)}: same report in wasm and native`, () => {
    const rel = path.join("demo-data", file);
    const native = JSON.parse(cli("fit", "--json", rel, ...args));
    const dataset = Dataset.parse(readFileSync(path.join(ROOT, rel), "utf8"), rel, "", "");
    const wasm = JSON.parse(JSON.stringify(dataset.fit(settings)));
    dataset.free();
    assert.deepEqual(wasm, native);
  });
}
