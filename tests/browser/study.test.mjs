// Trade-off studies on the page: the optimum shown equals the engine's, a sweep draws one
// curve per design with the engine's values, a map runs in the worker with progress and can
// be cancelled, bad input names the field. The engine's own numbers come from the ES package
// www/dist/pkg (its wasm-bindgen module) run under Node.

import { test } from "node:test";
import assert from "node:assert/strict";
import { readFile } from "node:fs/promises";
import { join } from "node:path";
import { pathToFileURL } from "node:url";
import { PKG, artifactsDir, launch, openPage, readShown, updateCount, waitForUpdates } from "./helpers.mjs";

/** The engine under Node (the same module the page inlines). */
async function nodeEngine() {
  const cw = await import(pathToFileURL(join(PKG, "clockwright_wasm.js")).href);
  await cw.default({ module_or_path: await readFile(join(PKG, "clockwright_wasm_bg.wasm")) });
  return cw;
}

function near(shownText, want, what) {
  const r = readShown(shownText);
  assert.ok(r, `${what}: "${shownText}" does not read as a number`);
  assert.ok(Math.abs(r.value - want) <= r.halfStep * 1.000001, `${what}: shown ${shownText}, engine ${want}`);
}

test("optimum: the shown probe time and sigma equal the engine's; apply edits the design", async () => {
  const cw = await nodeEngine();
  const design = cw.demoDesigns()[0];
  const want = cw.optimum(design, { tau_s: 1000, max_rounds: null });
  const b = await launch();
  try {
    const page = b.page;
    await openPage(page);
    await page.fill('input[name="optimum-tau"]', "1000");
    await page.click("text=Find the optimum");
    await page.waitForSelector('.study-facts dd[data-key="probe"]');
    near(await page.textContent('.study-facts dd[data-key="probe"]'), want.probe_time_s, "probe time");
    near(await page.textContent('.study-facts dd[data-key="sigma"]'), want.sigma, "sigma at the optimum");
    assert.ok((await page.textContent(".study-optimum")).includes(want.explanation));
    const n = await updateCount(page);
    await page.click(".study-optimum button");
    await waitForUpdates(page, n + 1);
    const stored = await page.evaluate(() => JSON.parse(localStorage.getItem("clockwright.workspace")));
    assert.deepEqual(stored.designs[0].design, want.design, "apply stores the optimum design");
    // Bad input: the engine's problem (from the worker) names the field; the result stays.
    await page.fill('input[name="optimum-tau"]', "-5");
    await page.click("text=Find the optimum");
    await page.waitForSelector(".study-error >> nth=0 >> text=tau_s");
    assert.equal(await page.locator('.study-facts dd[data-key="probe"]').count(), 1);
    assert.deepEqual(b.errors, []);
  } finally {
    await b.close();
  }
});

test("sweep: one curve per design, values equal the engine's; bad input names the field", async () => {
  const cw = await nodeEngine();
  const request = { x: { path: "atoms.count", from: 1, to: 20, points: 20, spacing: "linear" }, output: { kind: "sigma_at", tau_s: 1000 } };
  const want = cw.sweep(cw.demoDesigns(), request);
  const b = await launch();
  try {
    const page = b.page;
    await openPage(page);
    await page.selectOption('select[name="x-path"]', "atoms.count");
    await page.fill('input[name="x-from"]', "1");
    await page.fill('input[name="x-to"]', "20");
    await page.fill('input[name="x-points"]', "20");
    await page.selectOption('select[name="output"]', "sigma_at");
    await page.fill('input[name="output-param"]', "1000");
    await page.click(".study-row >> text=Run >> nth=0");
    await page.waitForSelector(".study-sweep g.design path.curve");
    const names = await page.$$eval(".study-sweep g.design", (gs) => gs.map((g) => g.dataset.name));
    assert.deepEqual(names, want.series.map((s) => s.design_name));
    // The page's numbers: the sweep result it drew, recomputed in the page by the same call.
    const shown = await page.evaluate(() => performance.getEntriesByName("cw-sweep").length);
    assert.equal(shown, 1);
    // Each curve passes through the engine's values: compare the path's vertex count and the
    // engine's values read back through the plot's own scale (first and last point heights).
    for (const [i, s] of want.series.entries()) {
      const d = await page.getAttribute(`.study-sweep g.design:nth-of-type(${i + 1}) path.curve`, "d");
      const vertices = (d.match(/[ML]/g) ?? []).length;
      assert.equal(vertices, s.values.filter((v) => v !== null && v > 0).length, `${s.design_name}: one vertex per engine value`);
    }
    const ys = await page.$$eval(".study-sweep g.design path.curve", (ps) =>
      ps.map((p) => (p.getAttribute("d").match(/-?\d+(\.\d+)?(e-?\d+)?/g) ?? []).map(Number).filter((_, k) => k % 2 === 1)),
    );
    // Heights are linear in log10 of the value: the ratios of height differences equal the
    // ratios of log differences of the engine's values.
    for (const [i, s] of want.series.entries()) {
      const v = s.values.map((x) => Math.log10(x));
      const y = ys[i];
      const k = (y[y.length - 1] - y[0]) / (v[v.length - 1] - v[0]);
      for (let j = 0; j < v.length; j++) assert.ok(Math.abs(y[0] + k * (v[j] - v[0]) - y[j]) < 0.05, `${s.design_name} point ${j}`);
    }
    // Bad input: from > to is the engine's problem, shown next to the fields; the plot stays.
    await page.fill('input[name="x-points"]', "20000");
    await page.click(".study-row >> text=Run >> nth=0");
    const err = await page.textContent(".study-error >> nth=1");
    assert.match(err, /x\.points/);
    await page.fill('input[name="x-points"]', "abc");
    await page.click(".study-row >> text=Run >> nth=0");
    assert.match(await page.textContent(".study-error >> nth=1"), /x\.points: "abc"/);
    assert.equal(await page.locator(".study-sweep g.design").count(), 4, "the last good sweep stays");
    await page.locator("#study").screenshot({ path: join(await artifactsDir(), "study-sweep.png") });
    assert.deepEqual(b.errors, []);
  } finally {
    await b.close();
  }
});

test("map: runs in the worker with progress, matches the engine, and can be cancelled", async () => {
  const cw = await nodeEngine();
  const design = cw.demoDesigns()[0];
  const request = {
    x: { path: "atoms.count", from: 1, to: 10, points: 10, spacing: "linear" },
    y: { path: "lock.attack_time_s", from: 1, to: 100, points: 8, spacing: "log" },
    output: { kind: "sigma_at", tau_s: 1000 },
  };
  const want = cw.sweep([design], request);
  const b = await launch();
  try {
    const page = b.page;
    await openPage(page);
    await page.check('input[name="map"]');
    await page.selectOption('select[name="x-path"]', "atoms.count");
    await page.fill('input[name="x-from"]', "1");
    await page.fill('input[name="x-to"]', "10");
    await page.fill('input[name="x-points"]', "10");
    await page.selectOption('select[name="y-path"]', "lock.attack_time_s");
    await page.fill('input[name="y-from"]', "1");
    await page.fill('input[name="y-to"]', "100");
    await page.fill('input[name="y-points"]', "8");
    await page.selectOption('select[name="y-spacing"]', "log");
    await page.fill('input[name="output-param"]', "1000");
    await page.click(".study-row >> text=Run >> nth=0");
    await page.waitForSelector(".study-map rect[fill]", { timeout: 30_000 });
    const titles = await page.$$eval(".study-map g rect title", (ts) => ts.map((t) => t.textContent));
    assert.equal(titles.length, 80);
    for (let k = 0; k < 80; k++) {
      const v = want.series[0].values[k];
      if (v === null) assert.match(titles[k], /hole/);
      else near(titles[k].split(": ").pop(), v, `map cell ${k}`);
    }
    assert.equal(await page.locator(".study-contours g").count(), want.series[0].contours.length);
    await page.screenshot({ path: join(await artifactsDir(), "study-map.png"), fullPage: true });
    // A large map: progress shows, Cancel stops it, the last map stays. Its x axis (the one
    // that changes from point to point) is the probe time, so every point needs a line-shape
    // search of its own (no reuse of stages).
    await page.selectOption('select[name="x-path"]', "sequence.segments[2].duration_s");
    await page.fill('input[name="x-from"]', "0.01");
    await page.fill('input[name="x-to"]', "0.5");
    await page.fill('input[name="x-points"]', "100");
    await page.selectOption('select[name="x-spacing"]', "log");
    await page.selectOption('select[name="y-path"]', "atoms.count");
    await page.fill('input[name="y-from"]', "1");
    await page.fill('input[name="y-to"]', "100");
    await page.fill('input[name="y-points"]', "100");
    await page.click(".study-row >> text=Run >> nth=0");
    await page.waitForFunction(() => {
      const p = document.querySelector('.study progress[aria-label="map progress"]');
      return p && !p.hidden && p.value > 0;
    }, null, { timeout: 30_000 });
    await page.click(".study-row >> text=Cancel >> nth=1");
    await page.waitForSelector(".study-error >> text=cancelled");
    assert.equal(await page.locator(".study-map rect[fill]").count() + (await page.locator(".study-map .study-hole-cell").count()), 80, "the last map stays");
    assert.deepEqual(b.errors, []);
  } finally {
    await b.close();
  }
});

test("bands: 16-84 % band in the worker; table values equal the engine's", async () => {
  const cw = await nodeEngine();
  const design = cw.demoDesigns()[0];
  const request = { uncertain: [{ path: "atoms.count", distribution: { kind: "uniform", low: 1, high: 3 } }], samples: 40, quantiles: [0.16, 0.5, 0.84] };
  const want = cw.bands(design, request);
  const b = await launch();
  try {
    const page = b.page;
    await openPage(page);
    await page.selectOption('select[name="band-path"]', "atoms.count");
    await page.fill('input[name="band-a"]', "1");
    await page.fill('input[name="band-b"]', "3");
    await page.fill('input[name="band-samples"]', "40");
    await page.click(".study-row >> text=Run >> nth=1");
    await page.waitForSelector(".study-table tbody tr", { timeout: 30_000 });
    assert.equal(await page.locator(".study-band path.band").count(), 1);
    // The median curve has one vertex per averaging time where the engine gives a median.
    const d = await page.getAttribute(".study-band g.design:first-of-type path.curve", "d");
    assert.equal((d.match(/[ML]/g) ?? []).length, want.curve[1].filter((v) => v !== null && v > 0).length);
    const band = await page.getAttribute(".study-band path.band", "d");
    assert.equal((band.match(/[ML]/g) ?? []).length, 2 * want.curve[0].filter((v, i) => v > 0 && want.curve[2][i] > 0).length);
    for (const sc of want.scalars) {
      const cells = await page.$$eval(`.study-table tr[data-name="${sc.name}"] td`, (tds) => tds.map((t) => t.textContent));
      const vals = [sc.nominal, ...sc.values];
      for (let k = 0; k < 4; k++) {
        if (vals[k] === null || !Number.isFinite(vals[k])) assert.equal(cells[k], "—");
        else near(cells[k], vals[k], `${sc.name} column ${k}`);
      }
    }
    assert.match(await page.textContent(".study-band + .study-caption"), /Latin hypercube sampling/);
    // Bad input: low above high is the engine's problem.
    await page.fill('input[name="band-a"]', "5");
    await page.click(".study-row >> text=Run >> nth=1");
    assert.match(await page.textContent(".study-error >> nth=2"), /uncertain\[0\]/);
    await page.locator("#study").screenshot({ path: join(await artifactsDir(), "study-bands.png") });
    assert.deepEqual(b.errors, []);
  } finally {
    await b.close();
  }
});
