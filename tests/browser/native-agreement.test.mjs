// Native and wasm builds of the core agree to the last bit on the demo designs: all
// transcendental functions go through libm, so the same operations give the same doubles.
// Compares every number of the native headless entry's JSON with the ES module package's
// evaluation under Node 20.

import { test } from "node:test";
import assert from "node:assert/strict";
import { execFileSync } from "node:child_process";
import { readdirSync, readFileSync } from "node:fs";
import { join } from "node:path";
import { fileURLToPath } from "node:url";

const ROOT = fileURLToPath(new URL("../..", import.meta.url));
const PKG = join(ROOT, "www/dist/pkg/clockwright.js");

function nativeEvaluation(file) {
  const out = execFileSync("cargo", ["run", "--release", "-q", "-p", "clockwright-core", "--example", "evaluate", "--", file], { cwd: ROOT, encoding: "utf8", maxBuffer: 64 << 20 });
  return JSON.parse(out);
}

function compare(a, b, path, diffs) {
  if (typeof a === "number" && typeof b === "number") {
    if (!Object.is(a, b)) diffs.push(`${path}: native ${a} wasm ${b}`);
  } else if (Array.isArray(a) && Array.isArray(b)) {
    assert.equal(a.length, b.length, `${path}: lengths`);
    a.forEach((x, i) => compare(x, b[i], `${path}[${i}]`, diffs));
  } else if (a && b && typeof a === "object" && typeof b === "object") {
    assert.deepEqual(Object.keys(a).sort(), Object.keys(b).sort(), `${path}: keys`);
    for (const k of Object.keys(a)) compare(a[k], b[k], `${path}.${k}`, diffs);
  } else {
    assert.equal(a, b, path);
  }
}

test("native and wasm evaluations of the demo designs are bit-identical", async () => {
  const { ready, evaluate } = await import(PKG);
  await ready();
  const dir = join(ROOT, "core/designs");
  for (const name of readdirSync(dir).filter((f) => f.endsWith(".json") && !f.startsWith("pair-"))) {
    const file = join(dir, name);
    const native = nativeEvaluation(file);
    const wasm = evaluate(JSON.parse(readFileSync(file, "utf8")), null);
    const diffs = [];
    compare(native, JSON.parse(JSON.stringify(wasm)), name, diffs);
    assert.deepEqual(diffs.slice(0, 5), [], `${name}: ${diffs.length} numbers differ`);
  }
});
