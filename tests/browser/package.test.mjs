// The ES module package www/dist/pkg under Node: imports by name, evaluates, reports errors,
// and its TypeScript declarations describe what it really returns.

import { test } from "node:test";
import assert from "node:assert/strict";
import { execFile } from "node:child_process";
import { existsSync } from "node:fs";
import { mkdir, mkdtemp, rm, symlink, writeFile } from "node:fs/promises";
import { tmpdir } from "node:os";
import { join } from "node:path";
import { pathToFileURL } from "node:url";
import { promisify } from "node:util";
import { PKG, ROOT } from "./helpers.mjs";

const run = promisify(execFile);

async function withPackage(fn) {
  if (!existsSync(join(PKG, "package.json"))) throw new Error(`${PKG} is missing: build the page first (./dev page --no-serve)`);
  const dir = await mkdtemp(join(tmpdir(), "cw-pkg-"));
  try {
    await mkdir(join(dir, "node_modules"));
    await writeFile(join(dir, "package.json"), JSON.stringify({ name: "cw-package-check", private: true, type: "module" }));
    await symlink(PKG, join(dir, "node_modules", "clockwright"), "dir");
    return await fn(dir);
  } finally {
    await rm(dir, { recursive: true, force: true });
  }
}

test("the package imports by name under Node and evaluates a design", async () => {
  await withPackage(async (dir) => {
    const script = `
      import * as cw from "clockwright";
      const out = {};
      try { cw.demoDesigns(); out.early = "no error"; } catch (err) { out.early = err.message; }
      await cw.ready();
      await cw.ready();
      out.schema = cw.schemaVersion();
      const designs = cw.demoDesigns();
      out.names = designs.map((d) => d.name);
      out.validate = designs.map((d) => cw.validate(d).length);
      const e = cw.evaluate(designs[0], { target_instability: 1e-18 });
      out.checkpoints = e.checkpoints;
      out.curveLengths = Object.values(e.curve).map((v) => v.length);
      out.allFinite = Object.values(e.curve).every((v) => v.every(Number.isFinite));
      const bad = structuredClone(designs[0]);
      bad.atoms.count = 0;
      out.problems = cw.validate(bad);
      try { cw.evaluate(bad, null); out.threw = false; } catch (err) {
        out.threw = err instanceof Error; out.message = err.message; out.errProblems = err.problems;
      }
      try { cw.evaluate({ schema_version: 99 }, null); } catch (err) { out.versionMessage = err.message; }
      out.presets = cw.presets().map((p) => p.id);
      out.segments = cw.presetSegments(cw.presets()[0].preset).map((s) => s.kind);
      out.table = cw.parseSpectrumCsv("f_hz,l_dbc\\n1,-60\\n10,-80\\n100,-100\\n").points.length;
      try { cw.parseSpectrumCsv("f_hz,l_dbc\\n1,-60\\n10,oops\\n"); } catch (err) { out.csvProblems = err.problems; }
      console.log(JSON.stringify(out));
    `;
    await writeFile(join(dir, "use.mjs"), script);
    const { stdout } = await run(process.execPath, ["use.mjs"], { cwd: dir });
    const out = JSON.parse(stdout);
    assert.match(out.early, /await ready\(\) before calling demoDesigns\(\)/);
    assert.equal(out.schema, 1);
    assert.equal(out.names.length, 4);
    assert.deepEqual(out.validate, [0, 0, 0, 0]);
    assert.equal(out.checkpoints.length, 3);
    for (const c of out.checkpoints) assert.ok(Number.isFinite(c.total) && c.total > 0, JSON.stringify(c));
    assert.ok(out.curveLengths.every((n) => n === out.curveLengths[0] && n > 10), JSON.stringify(out.curveLengths));
    assert.ok(out.allFinite);
    assert.ok(out.problems.some((p) => p.path === "atoms.count" && p.value === "0" && p.allowed.length > 0), JSON.stringify(out.problems));
    assert.equal(out.threw, true);
    assert.match(out.message, /^atoms\.count: 0; /m);
    assert.ok(out.errProblems.some((p) => p.path === "atoms.count"));
    assert.match(out.versionMessage, /schema_version/);
    assert.ok(out.presets.length >= 1);
    assert.ok(out.segments.length >= 1 && out.segments.every((k) => k === "pulse" || k === "free"));
    assert.equal(out.table, 3);
    assert.ok(out.csvProblems.some((p) => p.path === "line 3"), JSON.stringify(out.csvProblems));
  });
});

test("the package imports by file path, as the README shows", async () => {
  const dir = await mkdtemp(join(tmpdir(), "cw-pkgpath-"));
  try {
    const entry = pathToFileURL(join(PKG, "clockwright.js")).href;
    const script = `
      import { ready, evaluate, demoDesigns } from ${JSON.stringify(entry)};
      await ready();
      const [design] = demoDesigns();
      const result = evaluate(design, { target_instability: 1e-18 });
      console.log(JSON.stringify({ level: result.sigma_1s_equivalent, checkpoints: result.checkpoints.length }));
    `;
    await writeFile(join(dir, "readme.mjs"), script);
    const { stdout } = await run(process.execPath, ["readme.mjs"], { cwd: dir });
    const out = JSON.parse(stdout);
    assert.ok(Number.isFinite(out.level) && out.level > 0);
    assert.equal(out.checkpoints, 3);
  } finally {
    await rm(dir, { recursive: true, force: true });
  }
});

test("the package's TypeScript declarations match the values it returns", async () => {
  await withPackage(async (dir) => {
    const dump = `
      import * as cw from "clockwright";
      await cw.ready();
      const designs = cw.demoDesigns();
      console.log(JSON.stringify({ designs, evaluation: cw.evaluate(designs[0], null), presets: cw.presets(), problems: cw.validate({ ...designs[0], name: "x".repeat(300) }) }));
    `;
    await writeFile(join(dir, "dump.mjs"), dump);
    const { stdout } = await run(process.execPath, ["dump.mjs"], { cwd: dir, maxBuffer: 64 * 1024 * 1024 });
    const v = JSON.parse(stdout);
    // Object literals are checked for missing and for unknown properties against the declarations.
    const ts = `import type { Design, Evaluation, PresetInfo, Problem } from "clockwright";
import { ready, evaluate } from "clockwright";
export async function use(d: Design): Promise<number> {
  await ready();
  return evaluate(d, { target_instability: 1e-18 }).sigma_1s_equivalent;
}
export const designs: Design[] = ${JSON.stringify(v.designs)};
export const evaluation: Evaluation = ${JSON.stringify(v.evaluation)};
export const presets: PresetInfo[] = ${JSON.stringify(v.presets)};
export const problems: Problem[] = ${JSON.stringify(v.problems)};
`;
    await writeFile(join(dir, "shapes.ts"), ts);
    await writeFile(
      join(dir, "tsconfig.json"),
      JSON.stringify({ compilerOptions: { strict: true, noEmit: true, module: "NodeNext", moduleResolution: "NodeNext", target: "ES2022", lib: ["ES2022", "DOM", "ESNext.Disposable"], types: [], skipLibCheck: false }, files: ["shapes.ts"] }),
    );
    try {
      await run(process.execPath, [join(ROOT, "node_modules/typescript/bin/tsc"), "-p", "tsconfig.json"], { cwd: dir });
    } catch (err) {
      assert.fail(`tsc rejects the returned values against the declarations:\n${err.stdout}${err.stderr}`);
    }
  });
});
