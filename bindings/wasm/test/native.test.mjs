// The package against native genloom: latents and paths bit for bit, pictures within one level.

import { test } from "node:test";
import assert from "node:assert/strict";
import {
  wasm, golden, generator, fromBits, fromBase64, floatsFromBase64, caseOptions, caseLabels, compare, pngSize, modelBytes,
} from "./helpers.mjs";

for (const [name, model] of Object.entries(golden.models)) {
  test(`${name}: the signature is the native one`, () => {
    const g = generator(name);
    assert.equal(g.latentDim, model.latentDim);
    assert.equal(g.labelClasses, model.labelClasses ?? undefined);
    assert.equal(g.width, model.width);
    assert.equal(g.height, model.height);
    assert.equal(g.channels, model.channels);
    assert.deepEqual(Array.from(g.range), model.range);
    const sig = g.signature();
    assert.equal(sig.latent.dim, model.latentDim);
    assert.equal(typeof g.info().sha256, "string");
  });

  test(`${name}: latents are bit-identical to native for every seed and option`, (t) => {
    const g = generator(name);
    for (const c of model.cases) {
      const z = g.sampleLatents(BigInt(c.seed), c.count, caseOptions(c));
      assert.ok(z instanceof Float32Array);
      const got = new Uint32Array(z.buffer, z.byteOffset, z.length);
      assert.deepEqual(Array.from(got), c.latentBits, `case ${c.name} (seed ${c.seed})`);
    }
    t.diagnostic(`${model.cases.length} cases, ${model.cases.reduce((n, c) => n + c.latentBits.length, 0)} values`);
  });

  test(`${name}: paths are bit-identical to native (slerp looped, lerp open)`, () => {
    const g = generator(name);
    for (const p of model.paths) {
      const keys = fromBits(p.keyframeBits);
      const opts = { steps: p.steps, interpolation: p.interpolation, looped: p.looped };
      for (const frames of [wasm.latentPath(keys, model.latentDim, opts), g.latentPath(keys, opts)]) {
        const bits = new Uint32Array(frames.buffer, frames.byteOffset, frames.length);
        assert.deepEqual(Array.from(bits), p.frameBits, `${p.interpolation} path`);
      }
    }
  });

  test(`${name}: RGBA pixels are within 1 level of native on every pixel`, (t) => {
    const g = generator(name);
    let worst = 0;
    let differ = 0;
    let total = 0;
    for (const c of model.cases) {
      const rgba = g.generateRgba(fromBits(c.latentBits), caseLabels(c));
      assert.ok(rgba instanceof Uint8ClampedArray);
      const want = fromBase64(c.rgba);
      assert.equal(rgba.length, c.count * model.width * model.height * 4);
      const r = compare(rgba, want);
      assert.ok(r.max <= 1, `case ${c.name}: a pixel is ${r.max} levels off`);
      worst = Math.max(worst, r.max);
      differ += r.differ;
      total += rgba.length;
    }
    t.diagnostic(`max difference ${worst} level(s); ${differ} of ${total} bytes differ`);
  });

  test(`${name}: float output is within 1/255 of the range of native`, (t) => {
    const g = generator(name);
    const [lo, hi] = model.range;
    let worst = 0;
    for (const c of model.cases) {
      const out = g.generateFloat(fromBits(c.latentBits), caseLabels(c));
      assert.ok(out instanceof Float32Array);
      const r = compare(out, floatsFromBase64(c.floats));
      assert.ok(r.max <= (hi - lo) / 255, `case ${c.name}: off by ${r.max}`);
      worst = Math.max(worst, r.max);
    }
    t.diagnostic(`max abs difference ${worst.toExponential(3)}`);
  });

  test(`${name}: a PNG of one tile and of a sheet`, () => {
    const g = generator(name);
    const c = model.cases[0];
    const z = fromBits(c.latentBits);
    const labels = caseLabels(c);
    const dim = model.latentDim;
    const one = g.generatePng(z.subarray(0, dim), labels?.subarray(0, 1), { scale: 4 });
    assert.ok(one instanceof Uint8Array);
    assert.deepEqual(pngSize(one), { width: model.width * 4, height: model.height * 4 });
    const sheet = g.generatePng(z.subarray(0, 4 * dim), labels?.subarray(0, 4), { columns: 2, margin: 1 });
    assert.deepEqual(pngSize(sheet), { width: 2 * model.width + 3, height: 2 * model.height + 3 });
    // Provenance (PNG specification 11.3.4.5, iTXt): the picture says it is synthetic and names
    // the model's SHA-256, unless turned off.
    const text = new TextDecoder("latin1").decode(one);
    assert.ok(text.includes("iTXt") && text.includes("genloom:synthetic"), "no provenance chunk");
    assert.ok(text.includes(g.info().sha256), "the provenance does not name the model's SHA-256");
    const plain = new TextDecoder("latin1").decode(g.generatePng(z.subarray(0, dim), labels?.subarray(0, 1), { provenance: false }));
    assert.ok(!plain.includes("iTXt"), "provenance: false still wrote a text chunk");
    const rgba = g.generateRgba(z.subarray(0, dim), labels?.subarray(0, 1));
    assert.deepEqual(pngSize(wasm.encodePng(rgba, model.width, model.height)), {
      width: model.width,
      height: model.height,
    });
  });
}

test("tiles-kind: labels as BigInt64Array, Int32Array and arrays give the same tiles", () => {
  const g = generator("tiles-kind");
  const z = g.sampleLatents(3n, 4);
  const want = g.generateRgba(z, BigInt64Array.of(0n, 1n, 2n, 3n));
  assert.deepEqual(g.generateRgba(z, Int32Array.of(0, 1, 2, 3)), want);
  assert.deepEqual(g.generateRgba(z, [0, 1, 2, 3]), want);
  assert.deepEqual(g.generateRgba(z, [0n, 1n, 2n, 3n]), want);
  assert.notDeepEqual(g.generateRgba(z, [3, 2, 1, 0]), want);
});

test("a Number seed means the same as the BigInt seed; latents also take plain arrays", () => {
  const g = generator("tiles");
  assert.deepEqual(g.sampleLatents(7, 2), g.sampleLatents(7n, 2));
  const z = g.sampleLatents(7n, 1);
  assert.deepEqual(g.generateRgba(Array.from(z)), g.generateRgba(z));
  assert.deepEqual(wasm.lerp(z, z, 0.5), z);
  assert.equal(wasm.slerp(z, g.sampleLatents(8n, 1), 0.25).length, z.length);
  assert.match(wasm.version(), /^\d+\.\d+\.\d+/);
});

test("f16Compute: the same tiles within one level, computed another way", (t) => {
  // IEEE 754 binary16 keeps 11 significant bits; the native runtime's own test bounds f16
  // compute at 4e-3 of the range width (about one 8-bit level) against the ONNX reference.
  const model = golden.models.tiles;
  const g32 = new wasm.Generator(modelBytes("tiles"), {});
  const g16 = new wasm.Generator(modelBytes("tiles"), { f16Compute: true });
  const [lo, hi] = model.range;
  let worst = 0;
  let identical = true;
  for (const c of model.cases) {
    const z = fromBits(c.latentBits);
    const a = g32.generateFloat(z, caseLabels(c));
    const b = g16.generateFloat(z, caseLabels(c));
    const r = compare(a, b);
    worst = Math.max(worst, r.max);
    identical &&= r.differ === 0;
  }
  assert.ok(worst <= 4e-3 * (hi - lo), `f16 compute is ${worst} off f32 compute`);
  assert.ok(!identical, "f16 compute gave the f32 floats bit for bit");
  assert.throws(() => new wasm.Generator(modelBytes("tiles"), { f16Compute: "yes" }), /f16Compute/);
  g32.free();
  g16.free();
  t.diagnostic(`max abs difference to f32 compute ${worst.toExponential(3)}`);
});
