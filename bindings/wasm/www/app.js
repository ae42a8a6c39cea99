// The terrain tile workshop: loads a generator (a demo model or the user's .onnx file), shows a
// grid of tiles for a seed, and a looped morph between two seeds. All compute is synchronous
// in the genloom WebAssembly module; tiles are small, so calls stay within a frame or two.

import init, { Generator, latentPath, version, memoryBytes } from "./pkg/genloom_wasm.js";

const DEMOS = {
  tiles: { url: "./models/tiles.onnx", title: "terrain tiles" },
  "tiles-kind": {
    url: "./models/tiles-kind.onnx",
    title: "terrain tiles by kind",
    kinds: ["meadow", "shallows", "dunes", "scree"],
  },
};
const MAX_SEED = (1n << 64n) - 1n;
const MORPH_FPS = 15;

const $ = (id) => document.getElementById(id);
const ui = {
  status: $("status"), demo: $("demo"), file: $("file"), facts: $("facts"), modelError: $("model-error"),
  tilesForm: $("tiles-form"), seed: $("seed"), reseed: $("reseed"), count: $("count"),
  truncOn: $("trunc-on"), trunc: $("trunc"), truncOut: $("trunc-out"), kindField: $("kind-field"),
  kind: $("kind"), generate: $("generate"), download: $("download"), grid: $("grid"),
  gridTiming: $("grid-timing"), tilesError: $("tiles-error"),
  morphForm: $("morph-form"), seedA: $("seed-a"), seedB: $("seed-b"), indexA: $("index-a"),
  indexB: $("index-b"), steps: $("steps"),
  interp: $("interp"), morph: $("morph"), canvas: $("morph-canvas"), play: $("play"), scrub: $("scrub"),
  frameOut: $("frame-out"), strip: $("strip"), morphTiming: $("morph-timing"),
  downloadFrame: $("download-frame"), morphError: $("morph-error"), about: $("about"),
};

const state = {
  gen: null, // the Generator in use
  modelName: "",
  kinds: null, // class names of the demo's conditional model, if any
  last: null, // { latents, labels, count, cols, seed } of the grid on screen
  morph: null, // { latents, labels, rgba, frames, frame, playing, timer }
  renders: 0,
};

function setState(s, text) {
  document.body.dataset.state = s;
  if (text !== undefined) ui.status.textContent = text;
}

function show(el, message) {
  el.hidden = !message;
  el.textContent = message ?? "";
}

const ms = (t) => (t < 10 ? t.toFixed(2) : t < 100 ? t.toFixed(1) : t.toFixed(0));
const mib = (b) => `${(b / 1048576).toFixed(b < 10 * 1048576 ? 2 : 1)} MiB`;
const plural = (n, word) => `${n} ${word}${n === 1 ? "" : "s"}`;

/** A seed from a text field: a whole number from 0 to 2^64 - 1, as a BigInt. */
function readSeed(input, what) {
  const text = input.value.trim();
  if (!/^\d{1,20}$/.test(text) || BigInt(text) > MAX_SEED) {
    input.setCustomValidity("seed");
    throw new Error(`${what} must be a whole number from 0 to ${MAX_SEED}, not “${text}”`);
  }
  input.setCustomValidity("");
  return BigInt(text);
}

/** A tile number (the row of a seed's latents) from a text field. */
function readIndex(input, what) {
  const text = input.value.trim();
  if (!/^\d{1,5}$/.test(text) || Number(text) > 65535) {
    input.setCustomValidity("tile");
    throw new Error(`${what} must be a whole number from 0 to 65535, not “${text}”`);
  }
  input.setCustomValidity("");
  return BigInt(text);
}

/** The sampling options the tile form asks for (truncation), shared by the morph. */
function sampleOptions() {
  return ui.truncOn.checked ? { truncation: Number(ui.trunc.value) } : {};
}

function download(bytes, name) {
  const url = URL.createObjectURL(new Blob([bytes], { type: "image/png" }));
  const a = document.createElement("a");
  a.href = url;
  a.download = name;
  document.body.append(a);
  a.click();
  a.remove();
  setTimeout(() => URL.revokeObjectURL(url), 5000);
}

// ----- the model -----

async function loadModel(bytes, name, kinds) {
  const t0 = performance.now();
  let gen;
  try {
    gen = new Generator(bytes);
  } catch (e) {
    show(ui.modelError, `Could not use ${name}: ${e.message}`);
    setState(state.gen ? "ready" : "error", state.gen ? statusLine() : "No model loaded");
    return false;
  }
  const loadMs = performance.now() - t0;
  stopMorph();
  state.gen?.free();
  state.gen = gen;
  state.modelName = name;
  state.kinds = gen.labelClasses ? (kinds?.length === gen.labelClasses ? kinds : null) : null;
  show(ui.modelError, null);
  describeModel(bytes.length, loadMs);
  setupKinds();
  setState("ready", statusLine());
  return true;
}

function statusLine() {
  const g = state.gen;
  return `${state.modelName} · ${g.width}×${g.height} · ready`;
}

function describeModel(size, loadMs) {
  const g = state.gen;
  const info = g.info();
  const sig = g.signature();
  const chans = { 1: "gray", 3: "RGB", 4: "RGBA" }[g.channels] ?? `${g.channels} channels`;
  const [lo, hi] = g.range;
  const facts = [
    ["Model", state.modelName],
    ["File", `${mib(size)}, ${info.parameters.toLocaleString("en")} parameters`],
    ["Latent", `${sig.latent.name} · ${g.latentDim} values`],
    ["Labels", g.labelClasses ? `${sig.label.name} · ${g.labelClasses} classes` : "none"],
    ["Picture", `${g.width}×${g.height} ${chans}, range [${lo}, ${hi}]`],
    ["Load + plans", `${ms(loadMs)} ms`],
  ];
  ui.facts.replaceChildren(
    ...facts.map(([k, v]) => {
      const d = document.createElement("div");
      const dt = document.createElement("dt");
      const dd = document.createElement("dd");
      dt.textContent = k;
      dd.textContent = v;
      d.append(dt, dd);
      return d;
    }),
  );
}

function setupKinds() {
  const n = state.gen.labelClasses;
  ui.kindField.hidden = !n;
  if (!n) return;
  const names = state.kinds ?? Array.from({ length: n }, (_, i) => `class ${i}`);
  const opts = [new Option("Mixed", "mixed"), ...names.map((name, i) => new Option(name, String(i)))];
  ui.kind.replaceChildren(...opts);
}

/** One label per image for a conditional model (BigInt64Array), else undefined. */
function labelsFor(count) {
  const n = state.gen.labelClasses;
  if (!n) return undefined;
  const k = ui.kind.value;
  const labels = new BigInt64Array(count);
  for (let i = 0; i < count; i++) labels[i] = BigInt(k === "mixed" ? i % n : Number(k));
  return labels;
}

function kindName(label) {
  if (label === undefined) return "";
  const i = Number(label);
  return state.kinds?.[i] ?? `class ${i}`;
}

// ----- the grid -----

function columnsFor(count) {
  const narrow = matchMedia("(max-width: 560px)").matches;
  return narrow ? (count <= 16 ? 4 : 8) : Math.min(count, 8);
}

function generateGrid() {
  show(ui.tilesError, null);
  const g = state.gen;
  if (!g) return;
  let seed;
  try {
    seed = readSeed(ui.seed, "The seed");
  } catch (e) {
    show(ui.tilesError, e.message);
    return;
  }
  const count = Number(ui.count.value);
  const options = sampleOptions();
  try {
    const t0 = performance.now();
    const latents = g.sampleLatents(seed, count, options);
    const labels = labelsFor(count);
    const t1 = performance.now();
    const rgba = g.generateRgba(latents, labels);
    const t2 = performance.now();
    const cols = columnsFor(count);
    drawGrid(rgba, count, cols, labels, seed);
    const t3 = performance.now();
    state.last = { latents, labels, count, cols, seed };
    state.renders += 1;
    ui.grid.dataset.renders = String(state.renders);
    ui.download.disabled = false;
    ui.gridTiming.textContent =
      `${plural(count, "tile")} in ${ms(t2 - t1)} ms (${ms((t2 - t1) / count)} ms a tile)` +
      ` · latents ${ms(t1 - t0)} ms · drawing ${ms(t3 - t2)} ms`;
    updateFooter();
  } catch (e) {
    show(ui.tilesError, e.message);
  }
}

function drawGrid(rgba, count, cols, labels, seed) {
  const g = state.gen;
  const { width: w, height: h } = g;
  const per = w * h * 4;
  const figures = [];
  for (let i = 0; i < count; i++) {
    const fig = document.createElement("figure");
    const c = document.createElement("canvas");
    c.width = w;
    c.height = h;
    c.getContext("2d").putImageData(new ImageData(rgba.slice(i * per, (i + 1) * per), w, h), 0, 0);
    const kind = labels ? ` · ${kindName(labels[i])}` : "";
    c.setAttribute("aria-label", `Tile ${i} of seed ${seed}${kind}`);
    const cap = document.createElement("figcaption");
    cap.textContent = `#${i}${kind}`;
    fig.append(c, cap);
    fig.dataset.index = String(i);
    fig.title = "Morph toward this tile";
    fig.addEventListener("click", () => {
      ui.seedB.value = String(seed);
      ui.indexB.value = String(i);
      makeMorph();
    });
    figures.push(fig);
  }
  ui.grid.style.setProperty("--cols", String(cols));
  ui.grid.replaceChildren(...figures);
  ui.grid.dataset.seed = String(seed);
  markEndpoints();
}

/** Outlines the grid tiles that the morph starts from (solid) and walks toward (dashed). */
function markEndpoints() {
  const seed = ui.grid.dataset.seed;
  for (const fig of ui.grid.children) {
    const i = fig.dataset.index;
    const at = (s, k) => seed === s.value.trim() && i === String(Number(k.value));
    fig.classList.toggle("from", at(ui.seedA, ui.indexA));
    fig.classList.toggle("to", at(ui.seedB, ui.indexB));
  }
}

function downloadGrid() {
  const last = state.last;
  if (!last) return;
  try {
    const png = state.gen.generatePng(last.latents, last.labels, { columns: last.cols, scale: 4, margin: 4 });
    download(png, `tiles-seed${last.seed}-${last.count}.png`);
  } catch (e) {
    show(ui.tilesError, e.message);
  }
}

// ----- the morph -----

function stopMorph() {
  const m = state.morph;
  if (m?.timer) cancelAnimationFrame(m.timer);
  state.morph = null;
}

function makeMorph() {
  show(ui.morphError, null);
  const g = state.gen;
  if (!g) return;
  let a, b, ia, ib;
  try {
    a = readSeed(ui.seedA, "The first seed");
    ia = readIndex(ui.indexA, "The first tile");
    b = readSeed(ui.seedB, "The second seed");
    ib = readIndex(ui.indexB, "The second tile");
  } catch (e) {
    show(ui.morphError, e.message);
    return;
  }
  try {
    const t0 = performance.now();
    const keys = new Float32Array(2 * g.latentDim);
    const opts = sampleOptions();
    keys.set(g.sampleLatents(a, 1, { ...opts, firstIndex: ia }), 0);
    keys.set(g.sampleLatents(b, 1, { ...opts, firstIndex: ib }), g.latentDim);
    const steps = Number(ui.steps.value);
    const latents = latentPath(keys, g.latentDim, { steps, interpolation: ui.interp.value, looped: true });
    const frames = latents.length / g.latentDim;
    let labels;
    if (g.labelClasses) {
      // One kind for the whole walk: the chosen one, or (mixed) the first tile's own kind.
      const k = ui.kind.value === "mixed" ? ia % BigInt(g.labelClasses) : BigInt(ui.kind.value);
      labels = new BigInt64Array(frames).fill(k);
    }
    const t1 = performance.now();
    const rgba = g.generateRgba(latents, labels);
    const t2 = performance.now();
    stopMorph();
    state.morph = { latents, labels, rgba, frames, frame: 0, playing: true, timer: 0, last: 0 };
    ui.scrub.max = String(frames - 1);
    ui.scrub.disabled = false;
    ui.play.disabled = false;
    ui.downloadFrame.disabled = false;
    buildStrip();
    markEndpoints();
    showFrame(0);
    setPlaying(true);
    ui.morphTiming.textContent =
      `${plural(frames, "frame")} in ${ms(t2 - t1)} ms (${ms((t2 - t1) / frames)} ms a frame)` +
      ` · path ${ms(t1 - t0)} ms · playing at ${MORPH_FPS} fps`;
    updateFooter();
  } catch (e) {
    show(ui.morphError, e.message);
  }
}

function frameImage(i) {
  const { width: w, height: h } = state.gen;
  const per = w * h * 4;
  return new ImageData(state.morph.rgba.slice(i * per, (i + 1) * per), w, h);
}

function showFrame(i) {
  const m = state.morph;
  m.frame = i;
  const { width: w, height: h } = state.gen;
  ui.canvas.width = w;
  ui.canvas.height = h;
  ui.canvas.getContext("2d").putImageData(frameImage(i), 0, 0);
  ui.canvas.dataset.frame = String(i);
  ui.scrub.value = String(i);
  ui.frameOut.textContent = `${i + 1}/${m.frames}`;
  for (const c of ui.strip.children) c.classList.toggle("on", Number(c.dataset.frame) === i);
}

function buildStrip() {
  const m = state.morph;
  const { width: w, height: h } = state.gen;
  const n = Math.min(8, m.frames);
  const canvases = [];
  for (let k = 0; k < n; k++) {
    const i = Math.round((k * m.frames) / n);
    const c = document.createElement("canvas");
    c.width = w;
    c.height = h;
    c.dataset.frame = String(i);
    c.title = `Frame ${i + 1}`;
    c.getContext("2d").putImageData(frameImage(i), 0, 0);
    c.addEventListener("click", () => {
      setPlaying(false);
      showFrame(i);
    });
    canvases.push(c);
  }
  ui.strip.replaceChildren(...canvases);
}

function setPlaying(on) {
  const m = state.morph;
  if (!m) return;
  m.playing = on;
  ui.play.textContent = on ? "Pause" : "Play";
  ui.canvas.dataset.playing = String(on);
  if (m.timer) cancelAnimationFrame(m.timer);
  m.timer = 0;
  if (!on) return;
  const tick = (now) => {
    if (state.morph !== m || !m.playing) return;
    if (now - m.last >= 1000 / MORPH_FPS) {
      m.last = now;
      showFrame((m.frame + 1) % m.frames);
    }
    m.timer = requestAnimationFrame(tick);
  };
  m.timer = requestAnimationFrame(tick);
}

function downloadFrame() {
  const m = state.morph;
  if (!m) return;
  const dim = state.gen.latentDim;
  const z = m.latents.slice(m.frame * dim, (m.frame + 1) * dim);
  try {
    const png = state.gen.generatePng(z, m.labels?.slice(m.frame, m.frame + 1), { scale: 8 });
    const end = (s, k) => `${s.value.trim()}_${k.value.trim()}`;
    download(png, `morph-${end(ui.seedA, ui.indexA)}-${end(ui.seedB, ui.indexB)}-frame${m.frame + 1}.png`);
  } catch (e) {
    show(ui.morphError, e.message);
  }
}

// ----- wiring -----

function updateFooter() {
  ui.about.textContent =
    `genloom ${version()} · WebAssembly with SIMD, in this tab · module memory ${mib(memoryBytes())}`;
}

async function loadDemo(key) {
  const demo = DEMOS[key];
  setState("busy", `Fetching the ${demo.title} model…`);
  try {
    const res = await fetch(demo.url);
    if (!res.ok) throw new Error(`${demo.url} answered ${res.status} ${res.statusText}`);
    const bytes = new Uint8Array(await res.arrayBuffer());
    setState("busy", "Building the generator…");
    return await loadModel(bytes, `demo: ${demo.title}`, demo.kinds);
  } catch (e) {
    show(ui.modelError, `Could not fetch the demo model: ${e.message}`);
    setState(state.gen ? "ready" : "error", state.gen ? statusLine() : "No model loaded");
    return false;
  }
}

function refresh() {
  generateGrid();
  makeMorph();
}

function wire() {
  ui.tilesForm.addEventListener("submit", (e) => {
    e.preventDefault();
    generateGrid();
  });
  ui.morphForm.addEventListener("submit", (e) => {
    e.preventDefault();
    makeMorph();
  });
  ui.reseed.addEventListener("click", () => {
    ui.seed.value = String(crypto.getRandomValues(new Uint32Array(1))[0]);
    generateGrid();
  });
  ui.truncOn.addEventListener("change", () => {
    ui.trunc.disabled = !ui.truncOn.checked;
    ui.truncOut.textContent = ui.truncOn.checked ? Number(ui.trunc.value).toFixed(2) : "off";
  });
  ui.trunc.addEventListener("input", () => {
    ui.truncOut.textContent = Number(ui.trunc.value).toFixed(2);
  });
  ui.download.addEventListener("click", downloadGrid);
  ui.downloadFrame.addEventListener("click", downloadFrame);
  ui.play.addEventListener("click", () => setPlaying(!state.morph?.playing));
  ui.scrub.addEventListener("input", () => {
    if (!state.morph) return;
    setPlaying(false);
    showFrame(Number(ui.scrub.value));
  });
  ui.kind.addEventListener("change", refresh);
  ui.demo.addEventListener("change", async () => {
    if (ui.demo.value === "file") return;
    if (await loadDemo(ui.demo.value)) refresh();
  });
  ui.file.addEventListener("change", async () => {
    const f = ui.file.files?.[0];
    ui.file.value = "";
    if (!f) return;
    setState("busy", `Reading ${f.name}…`);
    const bytes = new Uint8Array(await f.arrayBuffer());
    if (await loadModel(bytes, f.name)) {
      ui.demo.value = "file";
      ui.demo.options[2].textContent = `Your file: ${f.name}`;
      refresh();
    }
  });
}

async function main() {
  wire();
  try {
    await init();
  } catch (e) {
    setState("error", "WebAssembly unavailable");
    show(ui.modelError, `This browser could not start the generator (it needs WebAssembly with SIMD): ${e.message}`);
    return;
  }
  updateFooter();
  if (await loadDemo(ui.demo.value)) refresh();
}

main();
