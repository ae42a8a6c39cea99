// Bad models and bad arguments become JS Errors with the runtime's message, and the module
// keeps working after each one (a trap would poison every later call).

import { test } from "node:test";
import assert from "node:assert/strict";
import { wasm, golden, generator, modelBytes, fromBits, fromBase64, compare } from "./helpers.mjs";

const tiles = golden.models.tiles;

/** The module still loads nothing wrong: tile 0 of the first case matches native. */
function stillWorks() {
  const g = generator("tiles");
  const c = tiles.cases[0];
  const z = fromBits(c.latentBits).subarray(0, tiles.latentDim);
  const rgba = g.generateRgba(z);
  const want = fromBase64(c.rgba).subarray(0, rgba.length);
  assert.ok(compare(rgba, want).max <= 1, "the module gives other pixels after an error");
}

/**
 * `fn` throws a JS Error named GenloomError whose message matches `pattern` and whose `kind` is
 * the runtime's error kind (`kind`, when given); then the module still works.
 */
function refuses(fn, pattern, kind, fromRuntime = true) {
  let caught;
  try {
    fn();
  } catch (e) {
    caught = e;
  }
  assert.ok(caught, `no error thrown (expected ${pattern})`);
  assert.ok(caught instanceof Error, `thrown value is not an Error: ${caught}`);
  assert.ok(!(caught instanceof WebAssembly.RuntimeError), `the module trapped: ${caught.message}`);
  assert.match(caught.message, pattern);
  if (fromRuntime) {
    assert.equal(caught.name, "GenloomError", caught.message);
    assert.ok(
      ["load", "signature", "argument", "npy", "inference", "cancelled", "limits", "io"].includes(caught.kind),
      `kind is ${caught.kind}`,
    );
  }
  if (kind !== undefined) assert.equal(caught.kind, kind, caught.message);
  stillWorks();
  return caught.message;
}

test("model bytes that are not a generator are refused with the runtime's message", (t) => {
  const messages = [
    refuses(() => new wasm.Generator(new Uint8Array([1, 2, 3, 250, 251, 252, 7, 9, 9, 9])), /not an ONNX model/, "load"),
    refuses(() => new wasm.Generator(new Uint8Array(0)), /empty \(0 bytes\)/, "load"),
    refuses(
      () => new wasm.Generator(new TextEncoder().encode("<!DOCTYPE html><html><body>404</body></html>")),
      /HTML page/,
    ),
    refuses(
      () => new wasm.Generator(new TextEncoder().encode("version https://git-lfs.github.com/spec/v1\noid sha256:00\nsize 9\n")),
      /LFS pointer/,
    ),
    refuses(() => wasm.Generator.fromBytes("tiles.onnx"), /model bytes is a string, expected a Uint8Array/),
    refuses(() => new wasm.Generator(), /model bytes is undefined/),
    refuses(() => new wasm.Generator(new Uint8Array(4096).fill(0x0a)), /not an ONNX model/),
  ];
  // A truncated real model, and bad options with a good one.
  const bytes = modelBytes("tiles");
  messages.push(refuses(() => new wasm.Generator(bytes.subarray(0, bytes.length >> 1)), /.+/));
  messages.push(refuses(() => new wasm.Generator(bytes, { microBatch: 0 }), /microBatch is 0/, "argument"));
  messages.push(refuses(() => new wasm.Generator(bytes, { threads: 4 }), /field `threads`.*unknown/));
  for (const m of messages) t.diagnostic(m);
});

test("an operator outside the web build's set is refused by name; native runs it", (t) => {
  const o = golden.outsideWebSet;
  // native genloom (tests/examples/wasm_golden.rs) loaded this very model
  assert.equal(o.nativeLoads, true);
  const m = refuses(() => new wasm.Generator(fromBase64(o.bytes)), new RegExp(`\`${o.opType}\`.*web build`));
  assert.ok(m.includes(`node \`${o.node}\``), m);
  t.diagnostic(m);
});

test("latents of the wrong size, NaN or the wrong type are refused", (t) => {
  const g = generator("tiles");
  const dim = g.latentDim;
  const messages = [
    refuses(() => g.generateRgba(new Float32Array(dim - 1)), new RegExp(`has ${dim - 1} values per sample, the model expects ${dim}`)),
    refuses(() => g.generateRgba(new Float32Array(2 * dim + 3)), new RegExp(`${2 * dim + 3} values, expected a whole number of latents`)),
    refuses(() => g.generateRgba(new Float32Array(0)), /has 0 values per sample/),
    refuses(() => g.generateRgba(new Float32Array(dim).fill(NaN)), /NaN|not finite|non-finite/i),
    refuses(() => g.generateRgba(new Float64Array(dim)), /latents is a Float64Array, expected a Float32Array/),
    refuses(() => g.generateFloat("z"), /latents is a string/),
    refuses(() => g.generateRgba([1, "x"]), /latents\[1\] is a string, expected a number/),
  ];
  for (const m of messages) t.diagnostic(m);
});

test("labels out of range, missing or extra are refused", (t) => {
  const k = generator("tiles-kind");
  const z = k.sampleLatents(1n, 2);
  const messages = [
    refuses(() => k.generateRgba(z, BigInt64Array.of(0n, 4n)), /label 1 is 4, the model has classes 0\.\.4/, "argument"),
    refuses(() => k.generateRgba(z, [0, -1]), /label 1 is -1/),
    refuses(() => k.generateRgba(z), /labels?/i),
    refuses(() => k.generateRgba(z, [0]), /labels?/i),
    refuses(() => k.generateRgba(z, [0, 1.5]), /labels\[1\] is the number 1\.5, expected a whole number/),
    refuses(() => k.generateRgba(z, new Float32Array(2)), /labels is a Float32Array/),
    refuses(() => generator("tiles").generateRgba(z, [0, 1]), /labels?/i),
  ];
  for (const m of messages) t.diagnostic(m);
});

test("bad seeds, counts and options are refused", (t) => {
  const g = generator("tiles");
  const messages = [
    refuses(() => g.sampleLatents(-1n, 1), /seed is the BigInt -1n, expected a BigInt from 0n/),
    refuses(() => g.sampleLatents(1n << 64n, 1), /seed is the BigInt 18446744073709551616n/),
    refuses(() => g.sampleLatents(1.5, 1), /seed is the number 1\.5/),
    refuses(() => g.sampleLatents("7", 1), /seed is a string/),
    refuses(() => g.sampleLatents(7n, 0), /count is 0, expected a whole number from 1/),
    refuses(() => g.sampleLatents(7n, 2.5), /count is 2\.5/),
    refuses(() => g.sampleLatents(7n, 1e9), /count is 1000000000, expected a whole number from 1 to 65536/, "argument"),
    refuses(() => g.sampleLatents(7n, 1, { truncation: 0 }), /truncation is 0/),
    refuses(() => g.sampleLatents(7n, 1, { truncation: "0.7" }), /truncation is a string, expected a number/),
    refuses(() => g.sampleLatents(7n, 1, { psi: 2 }), /psi is 2/),
    refuses(() => g.sampleLatents(7n, 1, { trunc: 0.7 }), /sample options field `trunc` is unknown, expected one of truncation/),
    refuses(() => g.sampleLatents(7n, 1, { mode: "mt" }), /mode is `mt`, expected `portable` or `numpy`/),
    refuses(() => g.sampleLatents(1n << 40n, 1, { mode: "numpy" }), /NumPy/),
    refuses(() => g.sampleLatents(7n, 1, { prior: "cauchy" }), /prior is `cauchy`/),
    refuses(() => g.sampleLatents(7n, 1, 5), /sample options is the number 5, expected an object/),
    refuses(() => wasm.latentPath(g.sampleLatents(1n, 1), 64, {}), /at least 2 latents/),
    refuses(() => wasm.latentPath(g.sampleLatents(1n, 2), 64, { steps: 0 }), /steps is 0/),
    refuses(() => wasm.latentPath(g.sampleLatents(1n, 2), 64, { interpolation: "cubic" }), /interpolation is `cubic`/),
    refuses(() => wasm.lerp(new Float32Array(3), new Float32Array(4), 0.5), /second latent/),
    refuses(() => wasm.slerp(new Float32Array(3), new Float32Array(3), NaN), /t is NaN/),
    refuses(() => g.generatePng(g.sampleLatents(1n, 1), undefined, { scale: 0 }), /scale is 0/),
    refuses(() => g.generatePng(g.sampleLatents(1n, 1), undefined, { scale: 65 }), /scale is 65/),
    refuses(() => g.generatePng(g.sampleLatents(1n, 1), undefined, { scale: NaN }), /scale is NaN/),
    // 600 tiles of 32 pixels in one row at scale 2: wider than the 16384 pixels a PNG sheet may be.
    refuses(() => g.generatePng(g.sampleLatents(1n, 600), undefined, { columns: 600, scale: 2 }), /at most 16384/),
    refuses(() => wasm.encodePng(new Uint8Array(10), 2, 2), /RGBA data is 10 bytes, expected 16 bytes/),
    refuses(() => wasm.encodePng(new Uint8Array(16), 0, 2), /width is 0/),
  ];
  for (const m of messages) t.diagnostic(m);
});

test("a freed generator throws a JS Error instead of trapping", () => {
  const g = new wasm.Generator(modelBytes("tiles"));
  g.free();
  // wasm-bindgen's own guard throws here (a null object), before genloom is reached.
  refuses(() => g.sampleLatents(1n, 1), /.+/, undefined, false);
});
