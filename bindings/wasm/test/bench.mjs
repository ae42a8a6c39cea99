// Measures (does not assert) the budgets of bindings/wasm/README.md: the .wasm size, raw and
// gzipped, and the time per tile in Node next to native genloom's (from the golden file, when
// it was written with --bench by a release build). Both sides take the best of 5 rounds.
//
//   node bindings/wasm/test/bench.mjs [--budget-ms 1500]

import { readFileSync } from "node:fs";
import { gzipSync } from "node:zlib";
import path from "node:path";
import { wasm, golden, wasmFile, modelBytes } from "./helpers.mjs";

const i = process.argv.indexOf("--budget-ms");
const budget = i > 0 ? Number(process.argv[i + 1]) : 1500;

/** Milliseconds per tile at `batch`: the best of 5 rounds (other work on the machine only
 * ever adds time), each round the mean over about budget / 5 ms. */
function perTileMs(g, batch, labels) {
  const z = g.sampleLatents(3n, batch);
  const l = labels?.slice(0, batch);
  for (let k = 0; k < 3; k++) g.generateFloat(z, l);
  let best = Infinity;
  for (let round = 0; round < 5; round++) {
    const t0 = performance.now();
    let runs = 0;
    while (performance.now() - t0 < budget / 5 || runs < 3) {
      g.generateFloat(z, l);
      runs += 1;
    }
    best = Math.min(best, (performance.now() - t0) / (runs * batch));
  }
  return best;
}

{
  const bytes = readFileSync(wasmFile);
  const gz = gzipSync(bytes, { level: 9 }).length;
  const mib = (n) => (n / 1048576).toFixed(2);
  console.log(`${path.basename(path.dirname(wasmFile))}/${path.basename(wasmFile)}: ${bytes.length} bytes (${mib(bytes.length)} MiB), gzip -9 ${gz} bytes (${mib(gz)} MiB)`);
}
console.log(`golden written by a ${golden.profile} build`);
{
  // V8 first runs a large module in its baseline tier and optimises hot functions later: run
  // for a while before measuring anything.
  const g = new wasm.Generator(modelBytes("tiles"));
  const t0 = performance.now();
  while (performance.now() - t0 < 2 * budget) {
    g.generateFloat(g.sampleLatents(1n, 1));
    g.generateFloat(g.sampleLatents(1n, 8));
  }
  g.free();
}
console.log("model       batch  node ms/tile  native ms/tile  ratio");
for (const [name, model] of Object.entries(golden.models)) {
  const t0 = performance.now();
  const g = new wasm.Generator(modelBytes(name));
  const loadMs = performance.now() - t0;
  const labels = model.labelClasses ? BigInt64Array.from({ length: 8 }, (_, k) => BigInt(k % model.labelClasses)) : undefined;
  for (const batch of [1, 8]) {
    const ms = perTileMs(g, batch, labels);
    const native = model.nativeMsPerTile?.[`batch${batch}`];
    const ratio = native ? `${(ms / native).toFixed(2)}x` : "-";
    console.log(
      `${name.padEnd(11)} ${String(batch).padStart(5)}  ${ms.toFixed(3).padStart(12)}  ${native ? native.toFixed(3).padStart(14) : "             -"}  ${ratio}`,
    );
  }
  console.log(`${name.padEnd(11)} load + plans in Node: ${loadMs.toFixed(0)} ms`);
  g.free();
}
