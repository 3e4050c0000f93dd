// Simulation and measured data on the page: a run in the background worker with progress
// that equals the native run with the same seed and length; Cancel stops a long run at once
// while edits keep recomputing; measured CSV files overlay or report the bad line.

import { test } from "node:test";
import assert from "node:assert/strict";
import { execFile } from "node:child_process";
import { readFile } from "node:fs/promises";
import { join } from "node:path";
import { pathToFileURL } from "node:url";
import { promisify } from "node:util";
import { PKG, ROOT, artifactsDir, launch, openPage, readShown, updateCount, waitForUpdates } from "./helpers.mjs";

const run = promisify(execFile);
const FIXTURES = join(ROOT, "tests/browser/fixtures");
const DESIGN_FILE = join(ROOT, "core/designs/ion-single.json");

/** The engine's own headless simulation (core/examples/simulate.rs --json). */
async function nativeSimulation(designFile, options) {
  const { stdout } = await run("cargo", ["run", "--release", "-q", "-p", "clockwright-core", "--example", "simulate", "--", designFile, JSON.stringify(options), "--json"], {
    cwd: ROOT,
    maxBuffer: 64 * 1024 * 1024,
  });
  return JSON.parse(stdout);
}

/** Selects the design called `name` in the design list. */
async function selectDesign(page, name) {
  await page.locator("#design-list button", { hasText: name }).first().click();
}

/** Rows of a result table: [tau, value, low, high, fifth column] as shown. */
async function readRows(page, id) {
  return page.evaluate((sel) => [...document.querySelectorAll(`${sel} tbody tr`)].map((tr) => [...tr.querySelectorAll("td")].map((td) => td.textContent)), `#${id}`);
}

function assertShownEquals(text, value, what) {
  const r = readShown(text);
  assert.ok(r, `${what}: "${text}" is not a number`);
  assert.ok(Math.abs(r.value - value) <= r.halfStep * 1.0001 + Math.abs(value) * 1e-12, `${what}: shown ${text}, engine ${value}`);
}

test("a short simulation runs in the worker with progress and equals the native run with the same seed", async () => {
  const design = JSON.parse(await readFile(DESIGN_FILE, "utf8"));
  const options = { cycles: 200000, seed: 7 };
  const nativeP = nativeSimulation(DESIGN_FILE, { ...options, second_integrator: false, laser_noise: true });
  const b = await launch();
  try {
    const page = b.page;
    await openPage(page);
    await selectDesign(page, design.name);
    await page.fill("#sim-cycles", String(options.cycles));
    await page.fill("#sim-seed", String(options.seed));
    // Record every progress value the bar shows.
    await page.evaluate(() => {
      const bar = document.getElementById("sim-progress");
      window.__progress = [];
      new MutationObserver(() => window.__progress.push(Number(bar.getAttribute("aria-valuenow")))).observe(bar, { attributes: true, attributeFilter: ["aria-valuenow"] });
    });
    await page.click("#sim-run");
    await page.waitForSelector("#sim-table tbody tr", { timeout: 50_000 });
    console.log(await page.textContent("#sim-status"));
    const progress = await page.evaluate(() => window.__progress);
    assert.ok(progress.some((v) => v > 0 && v < 100), `progress values between 0 and 100 were shown: ${progress.join(", ")}`);
    assert.equal(await page.locator("#sim-progress").isHidden(), true, "the bar is hidden after the run");
    const native = await nativeP;
    const rows = await readRows(page, "sim-table");
    assert.equal(rows.length, native.locked.points.length, "one row per simulated averaging time");
    native.locked.points.forEach((p, i) => {
      assertShownEquals(rows[i][0], p.tau_s, `tau ${i}`);
      assertShownEquals(rows[i][1], p.deviation, `simulated sigma at ${p.tau_s} s`);
      assertShownEquals(rows[i][2], p.ci_low, `interval low at ${p.tau_s} s`);
      assertShownEquals(rows[i][3], p.ci_high, `interval high at ${p.tau_s} s`);
      const j = Math.floor(Math.log2(p.m));
      if (j < native.analytic.total.length) assertShownEquals(rows[i][4], native.analytic.total[j], `analytic sigma at ${p.tau_s} s`);
    });
    const findings = await page.textContent("#sim-findings");
    if (native.departures.length === 0) assert.match(findings, /agree/);
    else for (const d of native.departures) assert.ok(findings.includes(d.reason), `departure reason shown: ${d.reason}`);
    const circles = await page.locator("#sim-plot circle.point").count();
    assert.equal(circles, native.locked.points.filter((p) => p.deviation > 0).length, "one point per simulated averaging time");
    assert.equal(await page.locator("#sim-plot path.band").count(), 1, "the confidence band is drawn");
    // Bad run lengths are errors next to the field, and the last result stays.
    for (const bad of ["abc", "1.5", "3", "1e12"]) {
      await page.fill("#sim-cycles", bad);
      await page.click("#sim-run");
      await page.waitForFunction(() => document.getElementById("sim-cycles-error").textContent !== "" || document.getElementById("sim-status").textContent.includes("did not run"), null, { timeout: 20_000 });
      const msg = (await page.textContent("#sim-cycles-error")) + (await page.textContent("#sim-status"));
      assert.match(msg, /cycles/, `an error names the run length for ${bad}: ${msg}`);
      assert.equal((await readRows(page, "sim-table")).length, rows.length, "the last result stays on screen");
      await page.fill("#sim-cycles", "");
      await page.evaluate(() => (document.getElementById("sim-status").textContent = ""));
    }
    await page.locator("#sim-card").screenshot({ path: join(await artifactsDir(), "simulate-run.png") });
    assert.deepEqual(b.errors, []);
  } finally {
    await b.close();
  }
});

test("Cancel stops a long run at once, edits recompute during the run, and an edited design marks the overlay stale", async () => {
  const b = await launch();
  try {
    const page = b.page;
    await openPage(page);
    const name = JSON.parse(await readFile(DESIGN_FILE, "utf8")).name;
    await selectDesign(page, name);
    await page.fill("#sim-cycles", "20000");
    await page.click("#sim-run");
    await page.waitForSelector("#sim-table tbody tr", { timeout: 30_000 });
    const before = await readRows(page, "sim-table");
    // A long run: the cap of recorded cycles.
    await page.fill("#sim-cycles", "10000000");
    await page.click("#sim-run");
    await page.waitForFunction(() => Number(document.getElementById("sim-progress").getAttribute("aria-valuenow")) > 0, null, { timeout: 30_000 });
    // An edit during the run recomputes the table and marks the overlay stale.
    const n = await updateCount(page);
    const input = page.locator('[data-path="atoms.count"]');
    await input.fill(String(Number(await input.inputValue()) + 1));
    await waitForUpdates(page, n + 1);
    assert.match(await page.textContent("#sim-findings"), /Stale: .* has been edited since this run/);
    assert.equal(await page.locator("#sim-progress").isVisible(), true, "the run is still going");
    const t0 = Date.now();
    await page.click("#sim-cancel");
    await page.waitForFunction(() => document.getElementById("sim-status").textContent.startsWith("Cancelled"), null, { timeout: 5_000 });
    const cancelMs = Date.now() - t0;
    assert.ok(await page.locator("#sim-progress").isHidden(), "the bar is gone");
    assert.equal(await page.locator("#sim-run").isEnabled(), true, "Simulate can be pressed again");
    assert.deepEqual(await readRows(page, "sim-table"), before, "the last result stays on screen");
    // The page stays usable: another edit recomputes.
    const m = await updateCount(page);
    await input.fill(String(Number(await input.inputValue()) + 1));
    await waitForUpdates(page, m + 1);
    console.log(`cancel took ${cancelMs} ms from click to the page saying so`);
    await page.locator("#sim-card").screenshot({ path: join(await artifactsDir(), "simulate-stale.png") });
    assert.deepEqual(b.errors, []);
  } finally {
    await b.close();
  }
});

test("a measured CSV with a gap overlays its Allan deviation; a bad row is reported by line; a file over the cap is refused", async () => {
  // The generated bindings of www/dist/pkg (the package entry does not re-export this call).
  const cw = await import(pathToFileURL(join(PKG, "clockwright_wasm.js")).href);
  await cw.default({ module_or_path: await readFile(join(PKG, "clockwright_wasm_bg.wasm")) });
  const gapText = await readFile(join(FIXTURES, "measured-gap.csv"), "utf8");
  const expected = cw.importMeasured(gapText, null);
  assert.ok(expected.gap_count >= 1, "the fixture has a gap");
  const b = await launch({ colorScheme: "dark" });
  try {
    const page = b.page;
    await openPage(page);
    await page.setInputFiles("#sim-file", join(FIXTURES, "measured-gap.csv"));
    await page.waitForSelector("#sim-measured-table tbody tr", { timeout: 20_000 });
    const status = await page.textContent("#sim-file-status");
    assert.ok(status.includes(`${expected.samples} samples`), status);
    assert.ok(status.includes(`${expected.gap_count} gap(s), ${expected.gap_samples} missing`), status);
    const rows = await readRows(page, "sim-measured-table");
    assert.equal(rows.length, expected.adev.points.length);
    expected.adev.points.forEach((p, i) => {
      assertShownEquals(rows[i][0], p.tau_s, `tau ${i}`);
      assertShownEquals(rows[i][1], p.deviation, `measured sigma at ${p.tau_s} s`);
      assertShownEquals(rows[i][2], p.ci_low, `low at ${p.tau_s} s`);
      assertShownEquals(rows[i][3], p.ci_high, `high at ${p.tau_s} s`);
      assert.equal(rows[i][4], String(p.terms));
    });
    assert.equal(await page.locator("#sim-plot path.band").count(), 1);
    // A bad row: the line is named and the last good curve stays.
    await page.setInputFiles("#sim-file", join(FIXTURES, "measured-bad.csv"));
    await page.waitForFunction(() => document.getElementById("sim-file-status").textContent.includes("was not imported"), null, { timeout: 20_000 });
    const badText = await readFile(join(FIXTURES, "measured-bad.csv"), "utf8");
    let line = "";
    try {
      cw.importMeasured(badText, null);
    } catch (err) {
      line = err.problems[0].path;
    }
    assert.equal(line, "line 7");
    assert.match(await page.textContent("#sim-file-status"), /line 7: .*oops/);
    assert.equal((await readRows(page, "sim-measured-table")).length, rows.length, "the last good result stays");
    // A file over the size cap is refused before it is read.
    await page.setInputFiles("#sim-file", { name: "huge.csv", mimeType: "text/csv", buffer: Buffer.alloc(32 * 1024 * 1024 + 1, 0x31) });
    await page.waitForFunction(() => document.getElementById("sim-file-status").textContent.includes("at most"), null, { timeout: 20_000 });
    await page.locator("#sim-card").screenshot({ path: join(await artifactsDir(), "simulate-measured-dark.png") });
    assert.deepEqual(b.errors, []);
  } finally {
    await b.close();
  }
});
