// Memory stays bounded: the module's linear memory (which can only grow) reaches a plateau
// while 1000 tiles are made one call at a time, and building and freeing generators over and
// over does not pile up either.

import { test } from "node:test";
import assert from "node:assert/strict";
import { wasm, modelBytes } from "./helpers.mjs";

const MiB = 1048576;

test("1000 tiles in a loop: wasm memory plateaus, process memory stays bounded", (t) => {
  const g = new wasm.Generator(modelBytes("tiles"));
  const mem = [];
  const rss0 = process.memoryUsage().rss;
  let checksum = 0;
  for (let i = 0; i < 1000; i++) {
    const z = g.sampleLatents(BigInt(i), 1);
    const rgba = g.generateRgba(z);
    checksum = (checksum + rgba[i % rgba.length]) % 65536;
    if (i % 100 === 99) mem.push(wasm.memoryBytes());
  }
  // And in batches of 8, which use the other fixed-batch plan.
  for (let i = 0; i < 125; i++) g.generateRgba(g.sampleLatents(BigInt(i), 8));
  mem.push(wasm.memoryBytes());
  const rss1 = process.memoryUsage().rss;
  g.free();
  t.diagnostic(`wasm memory every 100 tiles (MiB): ${mem.map((m) => (m / MiB).toFixed(1)).join(" ")}`);
  t.diagnostic(`process rss grew ${((rss1 - rss0) / MiB).toFixed(1)} MiB; checksum ${checksum}`);
  const settled = mem[1];
  const growth = mem.at(-1) - settled;
  assert.ok(growth <= 2 * MiB, `wasm memory grew ${(growth / MiB).toFixed(1)} MiB after the first 200 tiles`);
  assert.ok(rss1 - rss0 < 256 * MiB, `process memory grew ${((rss1 - rss0) / MiB).toFixed(0)} MiB`);
});

test("building and freeing 20 generators does not pile up memory", (t) => {
  const bytes = modelBytes("tiles-kind");
  const mem = [];
  for (let i = 0; i < 20; i++) {
    const g = new wasm.Generator(bytes);
    g.generateRgba(g.sampleLatents(BigInt(i), 4), [0, 1, 2, 3]);
    g.free();
    mem.push(wasm.memoryBytes());
  }
  t.diagnostic(`wasm memory after each (MiB): ${mem.map((m) => (m / MiB).toFixed(0)).join(" ")}`);
  const growth = mem.at(-1) - mem[4];
  assert.ok(growth <= 8 * MiB, `wasm memory grew ${(growth / MiB).toFixed(1)} MiB from generator 5 to 20`);
});
