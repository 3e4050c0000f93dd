// Benchmark (reported, not asserted on time): simulated interrogation cycles per second of a
// single-ion Ramsey design in the page's background worker (wasm in Chromium), printed beside
// the native figure of `cargo bench -p clockwright-core --bench simulate`.

import { test } from "node:test";
import assert from "node:assert/strict";
import { execFile } from "node:child_process";
import { mkdtemp, readFile, rm, writeFile } from "node:fs/promises";
import { tmpdir } from "node:os";
import { join } from "node:path";
import { pathToFileURL } from "node:url";
import { promisify } from "node:util";
import { PKG, ROOT, artifactsDir, launch, openPage } from "./helpers.mjs";

const run = promisify(execFile);
const CYCLES = 1_000_000;

/** The single-ion demo with a Ramsey probe of 5 ms + 150 ms + 5 ms, as core/benches/simulate.rs builds it. */
async function ramseyDesign() {
  // The generated bindings of www/dist/pkg (the package entry does not re-export this call).
  const cw = await import(pathToFileURL(join(PKG, "clockwright_wasm.js")).href);
  await cw.default({ module_or_path: await readFile(join(PKG, "clockwright_wasm_bg.wasm")) });
  const d = cw.demoDesigns()[0];
  d.name = "single ion, Ramsey 5 ms + 150 ms + 5 ms";
  const probe = cw.presetSegments({ kind: "ramsey", pulse_s: 0.005, free_s: 0.15 });
  const rest = d.sequence.segments.filter((s) => s.kind !== "pulse");
  const before = rest.filter((s) => !(s.kind === "dead" && s.label === "detection"));
  const after = rest.filter((s) => s.kind === "dead" && s.label === "detection");
  d.sequence.segments = [...before, ...probe, ...after];
  assert.deepEqual(cw.validate(d), []);
  return d;
}

test("benchmark: simulated cycles per second in the worker (Chromium, wasm) beside the native figure", async (t) => {
  const design = await ramseyDesign();
  const dir = await mkdtemp(join(tmpdir(), "cw-simbench-"));
  const file = join(dir, "ramsey-workspace.json");
  await writeFile(file, JSON.stringify({ workspace_version: 1, target_instability: 1e-18, selected: 0, designs: [{ colour: 0, design }] }));
  const b = await launch();
  const rates = [];
  try {
    const page = b.page;
    await openPage(page);
    await page.setInputFiles("#load-ws-file", file);
    await page.waitForFunction((n) => document.getElementById("selected-name").textContent === n, design.name, { timeout: 20_000 });
    await page.fill("#sim-cycles", String(CYCLES));
    for (let i = 0; i < 2; i++) {
      await page.evaluate(() => delete document.getElementById("sim-view").dataset.rate);
      await page.click("#sim-run");
      await page.waitForFunction(() => document.getElementById("sim-view").dataset.rate !== undefined, null, { timeout: 120_000 });
      rates.push(Number(await page.getAttribute("#sim-view", "data-rate")));
    }
    assert.deepEqual(b.errors, []);
  } finally {
    await b.close();
    await rm(dir, { recursive: true, force: true });
  }
  const { stdout } = await run("cargo", ["bench", "-q", "-p", "clockwright-core", "--bench", "simulate"], { cwd: ROOT, maxBuffer: 16 * 1024 * 1024 });
  const nativeLine = stdout.split("\n").find((l) => l.includes("Ramsey") && l.includes("4 sub-step")) ?? "";
  const native = Number(/([0-9.]+e[+-]?[0-9]+) cycles\/s/.exec(nativeLine)?.[1]);
  // The same run per second of the thread's CPU time (the build machine is shared).
  const nativeCpu = Number(/per CPU second\s+([0-9.]+e[+-]?[0-9]+)/.exec(nativeLine)?.[1]);
  const wasm = Math.max(...rates);
  assert.ok(wasm > 0 && Number.isFinite(wasm));
  const line = `benchmark: ${design.name}, ${CYCLES} cycles, 4 sub-steps per pulse: Chromium worker (wasm) ${wasm.toExponential(3)} cycles/s (runs: ${rates.map((r) => r.toExponential(3)).join(", ")}, wall time incl. settling and estimators); native one thread ${Number.isFinite(native) ? native.toExponential(3) : "(not found)"} cycles/s${Number.isFinite(nativeCpu) ? ` (per CPU second ${nativeCpu.toExponential(3)})` : ""}`;
  console.log(line);
  t.diagnostic(line);
  await writeFile(join(await artifactsDir(), "sim-bench.json"), JSON.stringify({ design: design.name, cycles: CYCLES, wasm_cycles_per_s: wasm, wasm_runs: rates, native_cycles_per_s: native, native_cycles_per_cpu_s: Number.isFinite(nativeCpu) ? nativeCpu : null, native_output: stdout }, null, 2) + "\n");
});
