// Shared by the Node tests: the nodejs build of the package, the demo models, and the native
// expectations written by `cargo run -p genloom-tests --example wasm-golden` (see
// scripts/test-wasm.sh), which this file never computes itself.

import { createRequire } from "node:module";
import { readFileSync, existsSync } from "node:fs";
import { fileURLToPath } from "node:url";
import path from "node:path";

const here = path.dirname(fileURLToPath(import.meta.url));
export const wasmDir = path.resolve(here, "..");
export const rootDir = path.resolve(wasmDir, "../..");

// GENLOOM_WASM_PKG: another nodejs build to test or measure (a folder like pkg-node/).
const pkgPath = path.join(process.env.GENLOOM_WASM_PKG ?? path.join(wasmDir, "pkg-node"), "genloom_wasm.js");
if (!existsSync(pkgPath)) {
  throw new Error(`${pkgPath} is missing: run bash bindings/wasm/build.sh first`);
}
/** The package, as Node loads it. */
export const wasm = createRequire(import.meta.url)(pkgPath);
export const wasmFile = path.join(path.dirname(pkgPath), "genloom_wasm_bg.wasm");

const goldenPath = process.env.GENLOOM_WASM_GOLDEN ?? path.join(rootDir, "target", "wasm-golden", "golden.json");
if (!existsSync(goldenPath)) {
  throw new Error(
    `${goldenPath} is missing: run (at the repository root) cargo run -p genloom-tests --example wasm-golden -- ${goldenPath}`,
  );
}
/** What native genloom produced, per model. */
export const golden = JSON.parse(readFileSync(goldenPath, "utf8"));

/** The bytes of a demo model (models-demo/NAME.onnx). */
export function modelBytes(name) {
  return new Uint8Array(readFileSync(path.join(rootDir, "models-demo", `${name}.onnx`)));
}

/** Float32Array from an array of f32 bit patterns. */
export function fromBits(bits) {
  return new Float32Array(Uint32Array.from(bits).buffer);
}

/** Bytes from base64. */
export function fromBase64(s) {
  return new Uint8Array(Buffer.from(s, "base64"));
}

/** Float32Array from base64 of little-endian f32 values. */
export function floatsFromBase64(s) {
  const b = Buffer.from(s, "base64");
  return new Float32Array(b.buffer.slice(b.byteOffset, b.byteOffset + b.length));
}

/** The JS options of a golden case (its firstIndex is a decimal string: a BigInt here). */
export function caseOptions(c) {
  const o = { ...c.options };
  if (o.firstIndex !== undefined) o.firstIndex = BigInt(o.firstIndex);
  return o;
}

/** The labels of a golden case as a BigInt64Array, or undefined. */
export function caseLabels(c) {
  return c.labels ? BigInt64Array.from(c.labels.map(BigInt)) : undefined;
}

/** Largest absolute difference between two equally long arrays, and how many entries differ. */
export function compare(a, b) {
  if (a.length !== b.length) throw new Error(`lengths differ: ${a.length} vs ${b.length}`);
  let max = 0;
  let differ = 0;
  for (let i = 0; i < a.length; i++) {
    const d = Math.abs(a[i] - b[i]);
    if (d > 0) differ += 1;
    if (d > max || Number.isNaN(d)) max = Number.isNaN(d) ? Infinity : d;
  }
  return { max, differ };
}

/** Width and height from a PNG's IHDR, after checking its signature. */
export function pngSize(bytes) {
  const sig = [0x89, 0x50, 0x4e, 0x47, 0x0d, 0x0a, 0x1a, 0x0a];
  if (!sig.every((v, i) => bytes[i] === v)) throw new Error("not a PNG signature");
  const dv = new DataView(bytes.buffer, bytes.byteOffset, bytes.byteLength);
  return { width: dv.getUint32(16), height: dv.getUint32(20) };
}

/** Generators of the demo models, built once per test file. */
const cache = new Map();
export function generator(name) {
  if (!cache.has(name)) cache.set(name, new wasm.Generator(modelBytes(name)));
  return cache.get(name);
}
