// The demo page in a real browser: Debian's Chromium, driven by playwright-core, against our own
// static server on 127.0.0.1. Clicks through the page, reads the canvas pixels back and compares
// them with native genloom (within one level), and keeps screenshots for people to look at in
// target/wasm-screenshots/.

import { describe, it, before, after } from "node:test";
import assert from "node:assert/strict";
import { mkdtempSync, mkdirSync, readFileSync, rmSync } from "node:fs";
import { tmpdir } from "node:os";
import path from "node:path";
import { chromium } from "playwright-core";
import { startServer } from "./serve.mjs";
import { golden, rootDir, fromBase64, compare, pngSize } from "./helpers.mjs";

const CHROMIUM = process.env.GENLOOM_CHROMIUM ?? "/usr/bin/chromium";
const shots = path.join(rootDir, "target", "wasm-screenshots");

let server;
let context;
let profile;
const problems = []; // console errors and uncaught page errors, from every page

async function openPage(viewport) {
  const page = await context.newPage();
  await page.setViewportSize(viewport);
  page.on("console", (m) => {
    if (m.type() === "error") problems.push(`console: ${m.text()}`);
  });
  page.on("pageerror", (e) => problems.push(`page error: ${e.message}`));
  await page.goto(server.url);
  await page.waitForSelector('body[data-state="ready"]', { timeout: 30000 });
  await page.waitForFunction(() => Number(document.getElementById("grid").dataset.renders) >= 1);
  await page.waitForSelector("#morph-canvas[data-frame]");
  return page;
}

const renders = (page) => page.evaluate(() => Number(document.getElementById("grid").dataset.renders ?? 0));

/** Submits the tile form with these settings and waits for the new grid. */
async function generate(page, { seed, count, truncation, kind }) {
  const before = await renders(page);
  await page.fill("#seed", String(seed));
  await page.selectOption("#count", String(count));
  await page.setChecked("#trunc-on", truncation !== undefined);
  if (truncation !== undefined) await page.fill("#trunc", String(truncation));
  if (kind !== undefined) await page.selectOption("#kind", kind);
  await page.click("#generate");
  await page.waitForFunction((n) => Number(document.getElementById("grid").dataset.renders) > n, before);
}

/** The RGBA bytes of every tile canvas in the grid, concatenated. */
async function gridPixels(page) {
  const tiles = await page.evaluate(() =>
    [...document.querySelectorAll("#grid canvas")].map((c) =>
      Array.from(c.getContext("2d").getImageData(0, 0, c.width, c.height).data),
    ),
  );
  return Uint8Array.from(tiles.flat());
}

function goldenCase(model, name) {
  const c = golden.models[model].cases.find((k) => k.name === name);
  assert.ok(c, `no golden case ${name}`);
  return c;
}

describe("demo page in Chromium", { timeout: 240000 }, () => {
  before(async () => {
    mkdirSync(shots, { recursive: true });
    server = await startServer({ maxSeconds: 300 });
    profile = mkdtempSync(path.join(tmpdir(), "genloom-chromium-"));
    context = await chromium.launchPersistentContext(profile, {
      executablePath: CHROMIUM,
      headless: true,
      args: [
        "--headless",
        "--no-sandbox",
        "--disable-gpu",
        "--disable-background-networking",
        "--disable-component-update",
        "--disable-sync",
        "--no-first-run",
      ],
      acceptDownloads: true,
      timeout: 60000,
    });
  });

  after(async () => {
    await context?.close();
    await server?.close();
    if (profile) rmSync(profile, { recursive: true, force: true });
  });

  it("desktop: the grid, the morph and the PNG match native genloom", async (t) => {
    const page = await openPage({ width: 1280, height: 900 });
    const model = golden.models.tiles;
    let worst = 0;
    for (const [name, truncation] of [["page-default", undefined], ["truncation-0.7", 0.7]]) {
      const c = goldenCase("tiles", name);
      await generate(page, { seed: c.seed, count: c.count, truncation });
      const got = await gridPixels(page);
      const r = compare(got, fromBase64(c.rgba));
      assert.ok(r.max <= 1, `${name}: a canvas pixel is ${r.max} levels from native`);
      worst = Math.max(worst, r.max);
    }
    const timing = await page.textContent("#grid-timing");
    assert.match(timing, /16 tiles in [\d.]+ ms/);
    t.diagnostic(`grid: max difference ${worst} level(s); ${timing}`);

    // The morph plays; paused on frame 0 it shows the first tile of seed 7.
    const f0 = await page.getAttribute("#morph-canvas", "data-frame");
    await page.waitForFunction((f) => document.getElementById("morph-canvas").dataset.frame !== f, f0);
    await page.click("#play");
    assert.equal(await page.getAttribute("#morph-canvas", "data-playing"), "false");
    await page.fill("#scrub", "0");
    await page.waitForFunction(() => document.getElementById("morph-canvas").dataset.frame === "0");
    const frame = Uint8Array.from(
      await page.evaluate(() => {
        const c = document.getElementById("morph-canvas");
        return Array.from(c.getContext("2d").getImageData(0, 0, c.width, c.height).data);
      }),
    );
    const first = fromBase64(goldenCase("tiles", "page-default").rgba).subarray(0, frame.length);
    assert.ok(compare(frame, first).max <= 1, "morph frame 0 is not the first tile of seed 7");
    t.diagnostic(`morph: ${await page.textContent("#morph-timing")}`);

    // Download PNG: 16 tiles, 8 a row on a desktop, 4x scale, 4 px margins.
    await page.click("#play");
    const [dl] = await Promise.all([page.waitForEvent("download"), page.click("#download")]);
    const png = new Uint8Array(readFileSync(await dl.path()));
    const side = model.width * 4;
    assert.deepEqual(pngSize(png), { width: 8 * side + 9 * 4, height: 2 * side + 3 * 4 });
    assert.match(dl.suggestedFilename(), /^tiles-seed\d+-16\.png$/);

    await generate(page, { seed: 7, count: 16 });
    await page.screenshot({ path: path.join(shots, "desktop.png"), fullPage: true });
    await page.close();
  });

  it("desktop: the conditional demo draws each kind as native does", async (t) => {
    const page = await openPage({ width: 1280, height: 900 });
    const before = await renders(page);
    await page.selectOption("#demo", "tiles-kind");
    await page.waitForFunction((n) => Number(document.getElementById("grid").dataset.renders) > n, before);
    assert.equal(await page.isVisible("#kind-field"), true);
    const c = goldenCase("tiles-kind", "page-default");
    await generate(page, { seed: c.seed, count: c.count, kind: "mixed" });
    const r = compare(await gridPixels(page), fromBase64(c.rgba));
    assert.ok(r.max <= 1, `a canvas pixel is ${r.max} levels from native`);
    t.diagnostic(`tiles-kind grid: max difference ${r.max} level(s)`);
    await generate(page, { seed: 21, count: 32, kind: "2" });
    await page.screenshot({ path: path.join(shots, "desktop-kinds.png"), fullPage: true });
    await page.close();
  });

  it("a broken file is refused with the runtime's message; a good file then loads", async () => {
    const page = await openPage({ width: 1280, height: 900 });
    await page.setInputFiles("#file", {
      name: "broken.onnx",
      mimeType: "application/octet-stream",
      buffer: Buffer.from("this is not a model, only some text that someone saved with the wrong name"),
    });
    await page.waitForSelector("#model-error:not([hidden])");
    const message = await page.textContent("#model-error");
    assert.match(message, /Could not use broken\.onnx: .*not an ONNX model/);
    assert.equal(await page.getAttribute("body", "data-state"), "ready", "the demo model stays in use");
    await page.screenshot({ path: path.join(shots, "desktop-bad-file.png") });
    // The previous model still works.
    const c = goldenCase("tiles", "seed-123");
    await generate(page, { seed: c.seed, count: c.count });
    assert.ok(compare(await gridPixels(page), fromBase64(c.rgba)).max <= 1);
    // Now a real file, picked by the user.
    const before = await renders(page);
    await page.setInputFiles("#file", path.join(rootDir, "models-demo", "tiles-kind.onnx"));
    await page.waitForFunction((n) => Number(document.getElementById("grid").dataset.renders) > n, before);
    assert.equal(await page.isHidden("#model-error"), true);
    assert.match(await page.textContent("#demo option[value=file]"), /tiles-kind\.onnx/);
    assert.equal(await page.isVisible("#kind-field"), true);
    await page.close();
  });

  it("phone (390x844): readable, no sideways scrolling, same pixels", async (t) => {
    const page = await openPage({ width: 390, height: 844 });
    const c = goldenCase("tiles", "page-default");
    await generate(page, { seed: c.seed, count: c.count });
    assert.ok(compare(await gridPixels(page), fromBase64(c.rgba)).max <= 1);
    const { scrollWidth, tile, fontPx } = await page.evaluate(() => ({
      scrollWidth: document.documentElement.scrollWidth,
      tile: document.querySelector("#grid canvas").getBoundingClientRect().width,
      fontPx: parseFloat(getComputedStyle(document.body).fontSize),
    }));
    t.diagnostic(`phone: page ${scrollWidth}px wide, tiles shown ${tile.toFixed(0)}px, body text ${fontPx}px`);
    assert.ok(scrollWidth <= 390, `the page scrolls sideways (${scrollWidth}px wide)`);
    assert.ok(tile >= 64, `tiles are shown only ${tile}px wide`);
    assert.ok(fontPx >= 14, `body text is ${fontPx}px`);
    await page.screenshot({ path: path.join(shots, "phone.png"), fullPage: true });
    await page.screenshot({ path: path.join(shots, "phone-first-screen.png") });
    await page.close();
  });

  it("no console errors or uncaught exceptions on any page", () => {
    assert.deepEqual(problems, []);
  });
});
