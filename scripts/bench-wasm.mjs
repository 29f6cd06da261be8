// The same benchmark loops as `eccaudit bench`, run as WebAssembly under node,
// timed from JavaScript (the core reads no clock).
//
//   node scripts/bench-wasm.mjs [--json]
//
// Needs www/pkg (scripts/build-wasm.sh). Prints ns per call, median of repeats.
import { readFile } from "node:fs/promises";
import { performance } from "node:perf_hooks";
import { initSync, KeplerBench } from "../www/pkg/eccaudit_web.js";

const wasm = await readFile(new URL("../www/pkg/eccaudit_web_bg.wasm", import.meta.url));
initSync({ module: wasm });

const N_SOLVES = 1_000_000;
const REPEATS = 7;
const SEED = 20261202n;

function median(values) {
  const sorted = [...values].sort((a, b) => a - b);
  return sorted[Math.floor(sorted.length / 2)];
}

const bench = new KeplerBench(N_SOLVES, SEED);
bench.solveAll(); // warm-up (tier-up of the wasm code)
const perSolve = [];
for (let i = 0; i < REPEATS; i++) {
  const t0 = performance.now();
  const checksum = bench.solveAll();
  const t1 = performance.now();
  if (!Number.isFinite(checksum)) throw new Error("non-finite checksum");
  perSolve.push(((t1 - t0) * 1e6) / N_SOLVES);
}
const result = {
  runtime: `node ${process.version} (V8 ${process.versions.v8})`,
  kepler_ns_per_solve: median(perSolve),
  n_solves: N_SOLVES,
  repeats: REPEATS,
  seed: Number(SEED),
};
if (process.argv.includes("--json")) {
  console.log(JSON.stringify(result));
} else {
  console.log(`wasm (${result.runtime}): Kepler solve ${result.kepler_ns_per_solve.toFixed(2)} ns ` +
    `(median of ${REPEATS} x ${N_SOLVES} solves, seed ${SEED})`);
}
