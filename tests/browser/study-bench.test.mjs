// Benchmark (reported, not asserted on time): a 100-point sweep of the four demo designs on
// the page's thread (target 50 ms), and a 50x50 map in the background worker (target 1 s)
// with the page's longest frame gap meanwhile (the page must stay responsive).

import { test } from "node:test";
import assert from "node:assert/strict";
import { writeFile } from "node:fs/promises";
import { join } from "node:path";
import { artifactsDir, launch, median, openPage } from "./helpers.mjs";

const SWEEPS = 7;
const MAPS = 3;

async function setAxis(page, name, path, from, to, points, spacing) {
  await page.selectOption(`select[name="${name}-path"]`, path);
  await page.fill(`input[name="${name}-from"]`, String(from));
  await page.fill(`input[name="${name}-to"]`, String(to));
  await page.fill(`input[name="${name}-points"]`, String(points));
  await page.selectOption(`select[name="${name}-spacing"]`, spacing);
}

test("benchmark: 100-point sweep of four designs; 50x50 map in the worker", async (t) => {
  const b = await launch();
  try {
    const page = b.page;
    await openPage(page);
    await page.selectOption('select[name="output"]', "sigma_at");
    await page.fill('input[name="output-param"]', "1000");
    const sweeps = {};
    // The sweep (ion count 1 to 20: 100 points, 20 distinct designs each), one of 100
    // distinct counts (1 to 100), and one of 100 distinct durations of the first pulse (the
    // probe time of the Rabi designs), where every point needs a new line-shape search.
    const cases = {
      20: ["atoms.count", 1, 20, "linear"],
      100: ["atoms.count", 1, 100, "linear"],
      probe: ["sequence.segments[2].duration_s", 0.01, 1, "log"],
    };
    for (const [key, [path, from, to, spacing]] of Object.entries(cases)) {
      await page.evaluate(() => ["cw-sweep", "cw-sweep-engine"].forEach((m) => performance.clearMeasures(m)));
      await setAxis(page, "x", path, from, to, 100, spacing);
      for (let i = 0; i < SWEEPS; i++) {
        await page.click(".study-row >> text=Run >> nth=0");
        await page.waitForFunction((k) => performance.getEntriesByName("cw-sweep").length >= k, i + 1);
      }
      sweeps[key] = {
        all: await page.evaluate(() => performance.getEntriesByName("cw-sweep").map((e) => e.duration)),
        engine: await page.evaluate(() => performance.getEntriesByName("cw-sweep-engine").map((e) => e.duration)),
      };
    }
    assert.equal(await page.locator(".study-sweep g.design").count(), 4);

    await page.check('input[name="map"]');
    await setAxis(page, "x", "atoms.count", 1, 50, 50, "linear");
    await setAxis(page, "y", "lock.attack_time_s", 1, 100, 50, "log");
    const gaps = [];
    for (let i = 0; i < MAPS; i++) {
      // The longest gap between animation frames while the map runs: the page's responsiveness.
      await page.evaluate(() => {
        const w = window;
        w.__gap = 0;
        w.__frames = 0;
        let last = performance.now();
        w.__watch = true;
        const tick = (now) => {
          w.__gap = Math.max(w.__gap, now - last);
          w.__frames += 1;
          last = now;
          if (w.__watch) requestAnimationFrame(tick);
        };
        requestAnimationFrame(tick);
      });
      await page.click(".study-row >> text=Run >> nth=0");
      await page.waitForFunction((k) => performance.getEntriesByName("cw-map").length >= k, i + 1, { timeout: 60_000 });
      gaps.push(await page.evaluate(() => ((window.__watch = false), window.__gap)));
    }
    const maps = await page.evaluate(() => performance.getEntriesByName("cw-map").map((e) => e.duration));
    assert.equal(await page.locator(".study-map rect[fill]").count() + (await page.locator(".study-map .study-hole-cell").count()), 2500);
    const report = {
      sweep_points: 100,
      designs: 4,
      sweep_1_to_20_median_ms: Number(median(sweeps[20].all).toFixed(1)),
      sweep_1_to_20_min_ms: Number(Math.min(...sweeps[20].all).toFixed(1)),
      sweep_1_to_20_engine_median_ms: Number(median(sweeps[20].engine).toFixed(1)),
      sweep_1_to_100_median_ms: Number(median(sweeps[100].all).toFixed(1)),
      sweep_1_to_100_min_ms: Number(Math.min(...sweeps[100].all).toFixed(1)),
      sweep_1_to_100_engine_median_ms: Number(median(sweeps[100].engine).toFixed(1)),
      sweep_probe_time_median_ms: Number(median(sweeps.probe.all).toFixed(1)),
      sweep_probe_time_min_ms: Number(Math.min(...sweeps.probe.all).toFixed(1)),
      sweep_probe_time_engine_median_ms: Number(median(sweeps.probe.engine).toFixed(1)),
      map_points: 2500,
      map_ms: maps.map((m) => Number(m.toFixed(0))),
      map_longest_frame_gap_ms: gaps.map((g) => Number(g.toFixed(0))),
    };
    const line =
      `benchmark: 100-point sweep of 4 designs over ${SWEEPS} runs, atoms.count 1 to 20: median ${report.sweep_1_to_20_median_ms} ms (min ${report.sweep_1_to_20_min_ms}; engine ${report.sweep_1_to_20_engine_median_ms} ms); ` +
      `1 to 100: median ${report.sweep_1_to_100_median_ms} ms (min ${report.sweep_1_to_100_min_ms}; engine ${report.sweep_1_to_100_engine_median_ms} ms); ` +
      `first pulse 0.01 to 1 s: median ${report.sweep_probe_time_median_ms} ms (min ${report.sweep_probe_time_min_ms}; engine ${report.sweep_probe_time_engine_median_ms} ms); ` +
      `50x50 map in the worker: ${report.map_ms.join(", ")} ms (first includes starting the worker), longest frame gap meanwhile ${report.map_longest_frame_gap_ms.join(", ")} ms`;
    console.log(line);
    t.diagnostic(line);
    await writeFile(join(await artifactsDir(), "study-bench.json"), JSON.stringify(report, null, 2) + "\n");
    assert.deepEqual(b.errors, []);
  } finally {
    await b.close();
  }
});
