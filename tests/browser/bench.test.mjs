// Benchmark (reported, not asserted on time): edit-to-redraw of the page with four designs,
// and the size of the single-file page.

import { test } from "node:test";
import assert from "node:assert/strict";
import { stat, writeFile } from "node:fs/promises";
import { join } from "node:path";
import { PAGE, artifactsDir, launch, median, openPage, readTable, updateCount, waitForUpdates } from "./helpers.mjs";

const EDITS = 30;
// 600 kB, decimal kilobytes, as the size is reported.
const SIZE_TARGET = 600_000;

test("benchmark: median edit-to-redraw over 30 edits with four designs; page size", async (t) => {
  const size = (await stat(PAGE)).size;
  const b = await launch();
  try {
    await openPage(b.page);
    const page = b.page;
    assert.equal((await readTable(page)).names.length, 4);
    await page.evaluate(() => ["cw-update", "cw-engine", "cw-draw"].forEach((m) => performance.clearMeasures(m)));
    const input = page.locator('[data-path="atoms.count"]');
    const base = Number(await input.inputValue());
    for (let i = 0; i < EDITS; i++) {
      const n = await updateCount(page);
      await input.fill(String(base + 1 + (i % 7)));
      await waitForUpdates(page, n + 1);
    }
    const durations = await page.evaluate(() => performance.getEntriesByName("cw-update").map((e) => e.duration));
    const engine = await page.evaluate(() => performance.getEntriesByName("cw-engine").map((e) => e.duration));
    const draw = await page.evaluate(() => performance.getEntriesByName("cw-draw").map((e) => e.duration));
    assert.equal(durations.length, EDITS, "one redraw per edit");
    const med = median(durations);
    assert.ok(Number.isFinite(med) && med > 0);
    const report = {
      edits: EDITS,
      designs: 4,
      median_edit_to_redraw_ms: Number(med.toFixed(1)),
      min_ms: Number(Math.min(...durations).toFixed(1)),
      max_ms: Number(Math.max(...durations).toFixed(1)),
      median_engine_ms: Number(median(engine).toFixed(1)),
      median_draw_ms: Number(median(draw).toFixed(1)),
      html_bytes: size,
      html_kb: Number((size / 1000).toFixed(1)),
    };
    const line =
      `benchmark: edit-to-redraw median ${report.median_edit_to_redraw_ms} ms (min ${report.min_ms}, max ${report.max_ms}; ` +
      `engine ${report.median_engine_ms} ms, drawing ${report.median_draw_ms} ms) over ${EDITS} edits with 4 designs; page ${report.html_kb} kB`;
    console.log(line);
    t.diagnostic(line);
    await writeFile(join(await artifactsDir(), "bench.json"), JSON.stringify(report, null, 2) + "\n");
    assert.ok(size <= SIZE_TARGET, `the page is ${report.html_kb} kB, above the ${SIZE_TARGET / 1000} kB target`);
  } finally {
    await b.close();
  }
});
