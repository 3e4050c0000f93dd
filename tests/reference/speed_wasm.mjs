// Timing of the wasm engine under Node for the side-by-side speed comparison
// (tests/reference/speed.py, ./dev speed). Imports the ES module package www/dist/pkg
// (built by ./dev page --no-serve) and prints JSON on standard output:
//
//   node tests/reference/speed_wasm.mjs eval <reps> design.json...
//       per design (reps 0: the numbers only): median, 10th and 90th percentile of one full evaluate() (default
//       options, JSON in and out as the page does), and the evaluation itself;
//   node tests/reference/speed_wasm.mjs sim <design.json> <cycles> <substeps> <seed>
//       one simulation run: cycles per second of advance() (one thread) and the simulated
//       Allan deviation at octave averaging times.

import { readFileSync } from "node:fs";
import { join } from "node:path";
import { fileURLToPath, pathToFileURL } from "node:url";

const ROOT = fileURLToPath(new URL("../..", import.meta.url));
const PKG = join(ROOT, "www/dist/pkg/clockwright.js");

function quantiles(v) {
  v.sort((a, b) => a - b);
  const q = (p) => v[Math.round((v.length - 1) * p)];
  return [q(0.5), q(0.1), q(0.9)];
}

async function main() {
  const [cmd, ...args] = process.argv.slice(2);
  const cw = await import(pathToFileURL(PKG).href);
  await cw.ready();
  if (cmd === "eval" && args.length >= 2) {
    const reps = Math.max(0, Math.min(10000, Number.parseInt(args[0], 10) || 0));
    const out = [];
    for (const file of args.slice(1)) {
      const design = JSON.parse(readFileSync(file, "utf8"));
      const evaluation = cw.evaluate(design, null);
      if (reps === 0) {
        // Numbers only (the agreement check of ./dev test).
        out.push({ file, name: design.name, median_s: null, evaluation });
        continue;
      }
      const t0 = performance.now();
      let warm = 0;
      while (performance.now() - t0 < 200 || warm < 5) {
        cw.evaluate(design, null);
        warm += 1;
      }
      const perBatch = Math.max(1, Math.ceil(20 / ((performance.now() - t0) / warm)));
      const samples = [];
      for (let r = 0; r < reps; r++) {
        const t = performance.now();
        for (let k = 0; k < perBatch; k++) cw.evaluate(design, null);
        samples.push((performance.now() - t) / 1000 / perBatch);
      }
      const [median, p10, p90] = quantiles(samples);
      out.push({ file, name: design.name, median_s: median, p10_s: p10, p90_s: p90, evaluation });
    }
    console.log(JSON.stringify(out));
  } else if (cmd === "sim" && args.length === 4) {
    const design = JSON.parse(readFileSync(args[0], "utf8"));
    const [cycles, substeps, seed] = args.slice(1).map((a) => Number.parseInt(a, 10));
    const sim = new cw.Simulation(design, { cycles, pulse_substeps: substeps, seed });
    const t = performance.now();
    let p = sim.advance(1e6);
    while (!p.finished) p = sim.advance(1e6);
    const seconds = (performance.now() - t) / 1000;
    const r = sim.finish();
    const locked = r.locked.points.map((q) => ({ m: q.m, tau_s: q.tau_s, deviation: q.deviation, edf: q.edf }));
    console.log(JSON.stringify({ name: design.name, cycles, substeps, seed, cycles_run: p.cycles_done, seconds, cycles_per_s: p.cycles_done / seconds, locked }));
  } else {
    console.error("usage: speed_wasm.mjs eval <reps> design.json... | speed_wasm.mjs sim <design.json> <cycles> <substeps> <seed>");
    process.exit(2);
  }
}

main().catch((e) => {
  console.error(e && e.message ? e.message : String(e));
  process.exit(2);
});
