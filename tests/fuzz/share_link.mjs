#!/usr/bin/env node
// Fuzz harness of the share-link reader (www/src/share.ts: decodeLink, then readDoc with the
// engine's validation), run in Node on the page's own code and engine module.
//
//   node tests/fuzz/share_link.mjs [COUNT] [--seed N] [--no-time-limit] [--write-corpus]
//
// COUNT inputs (default 2000) are made from the seed links in tests/fuzz/corpus/share_link/ by
// seeded mutations at three levels: the link text (characters flipped, cut, inserted, the
// version or the checksum changed), the JSON inside (nodes replaced by hostile values: huge
// or negative numbers, wrong types, markup, deep nesting, long strings, keys removed or added;
// then packed again with a correct checksum, so the workspace reader is reached) and the bytes
// before compression (invalid UTF-8, broken JSON). Each input must give either a workspace or
// the reader's clear problems ({path, value, allowed}); any other exception, or a read over
// 100 ms, is a failure (an input over the limit once is timed three more times and the
// fastest counts, so a pause of a busy machine is not taken for a slow input; "retimed" counts
// them). With --no-time-limit the times are measured and reported but no input fails on
// them (the browser tests' short run: behaviour is tested there, speed by the long run).
// Prints the counts as one JSON line; exit code 1 on any failure.
// Needs the built page (./dev page --no-serve) for www/dist/pkg.

import { build } from "esbuild";
import { mkdtemp, readFile, readdir, rm, writeFile } from "node:fs/promises";
import { tmpdir } from "node:os";
import { dirname, join, resolve } from "node:path";
import { fileURLToPath, pathToFileURL } from "node:url";
import { deflateRawSync, crc32 } from "node:zlib";

const ROOT = resolve(dirname(fileURLToPath(import.meta.url)), "../..");
const CORPUS = join(ROOT, "tests/fuzz/corpus/share_link");
const LIMIT_MS = 100;

const args = process.argv.slice(2);
const count = Number(args.find((a) => /^\d+$/.test(a)) ?? 2000);
const seedArg = args.indexOf("--seed");
let seed = seedArg >= 0 ? Number(args[seedArg + 1]) : 20261202;
const timeLimited = !args.includes("--no-time-limit");

/** mulberry32: a small seeded generator, so that a failing input can be made again. */
function rand() {
  seed = (seed + 0x6d2b79f5) | 0;
  let t = seed;
  t = Math.imul(t ^ (t >>> 15), t | 1);
  t ^= t + Math.imul(t ^ (t >>> 7), t | 61);
  return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
}
const pick = (xs) => xs[Math.floor(rand() * xs.length)];
const int = (n) => Math.floor(rand() * n);

/** The page's share and workspace code bundled for Node, with the engine module started. */
export async function loadReader() {
  const dir = await mkdtemp(join(tmpdir(), "cw-fuzz-"));
  const out = join(dir, "reader.mjs");
  await build({
    stdin: {
      contents: `export { decodeLink, readLink, encodeLink, LinkError, crc32, toBase64url, fromBase64url } from "./www/src/share.ts";\nexport { toDoc } from "./www/src/workspace.ts";\nexport { default as init, demoDesigns, demoPairs } from "./www/dist/pkg/clockwright_wasm.js";\n`,
      resolveDir: ROOT,
      loader: "ts",
    },
    bundle: true,
    format: "esm",
    platform: "node",
    target: "node20",
    outfile: out,
    logLevel: "error",
  });
  const mod = await import(pathToFileURL(out).href);
  await mod.init({ module_or_path: await readFile(join(ROOT, "www/dist/pkg/clockwright_wasm_bg.wasm")) });
  await rm(dir, { recursive: true, force: true });
  return mod;
}

/** A link (fragment body) to any JSON value or raw bytes, with a correct checksum. */
function pack(bytes, kind = "share") {
  return `${kind}=v1.${crc32(bytes).toString(16).padStart(8, "0")}.${deflateRawSync(bytes).toString("base64url")}`;
}
const packJson = (value, kind) => pack(Buffer.from(JSON.stringify(value), "utf8"), kind);

const HOSTILE = [
  1e308, -1e308, 0, -0, -1, 1e-320, 2 ** 53 + 1, 4294967297, 0.5, "", "1e400", "NaN", "<script>fetch('http://127.0.0.1:9')</script>", "<img src=x onerror=alert(1)>",
  "\u0000\ud800", "x".repeat(20_000), true, false, null, [], {}, [[[[[[]]]]]], { "__proto__": { "polluted": 1 } }, { constructor: { prototype: { x: 1 } } },
];

function deep(n) {
  let v = 0;
  for (let i = 0; i < n; i++) v = [v];
  return v;
}

/** Replaces, removes or adds one node of a copy of `value`. */
function mutateJson(value) {
  const v = structuredClone(value);
  const nodes = [];
  const walk = (x, parent, key, depth) => {
    nodes.push([parent, key]);
    if (x && typeof x === "object" && depth < 12) for (const k of Object.keys(x)) walk(x[k], x, k, depth + 1);
  };
  walk(v, null, null, 0);
  const times = 1 + int(3);
  let root = v;
  for (let t = 0; t < times; t++) {
    const [parent, key] = pick(nodes);
    const r = rand();
    const hostile = r < 0.05 ? deep(10 + int(1500)) : r < 0.1 ? Array.from({ length: int(3000) }, () => pick(HOSTILE)) : pick(HOSTILE);
    if (parent === null) {
      root = hostile;
      break;
    }
    if (!parent || typeof parent !== "object") continue;
    const op = rand();
    if (op < 0.7) parent[key] = typeof hostile === "object" && hostile !== null ? JSON.parse(JSON.stringify(hostile)) : hostile;
    else if (op < 0.85) {
      if (Array.isArray(parent)) parent.splice(Number(key), 1);
      else delete parent[key];
    } else if (Array.isArray(parent)) parent.push(structuredClone(parent[key]));
    else parent[`extra_${int(100)}`] = hostile;
  }
  return root;
}

const B64 = "ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789-_";
const ODD = ["*", "=", "%", "#", "é", "\u0000", " ", ".", "\ud83d\ude00", "\u202e", "<", "&"];

/** Changes the link text itself. */
function mutateText(link) {
  const r = rand();
  const i = int(link.length + 1);
  if (r < 0.2) return link.slice(0, i);
  if (r < 0.35) return link.slice(0, i) + (rand() < 0.8 ? pick([...B64]) : pick(ODD)) + link.slice(i + 1);
  if (r < 0.45) return link.slice(0, i) + pick([...B64]) + link.slice(i);
  if (r < 0.55) {
    const j = Math.min(link.length, i + int(40));
    return link.slice(0, i) + link.slice(j);
  }
  if (r < 0.62) return link.replace(/v1\./, `v${pick(["0", "2", "9", "01", "999999999", "1x", "", "-1"])}.`);
  if (r < 0.7) return link.replace(/\.[0-9a-f]{8}\./, `.${int(2 ** 32).toString(16).padStart(8, "0")}.`);
  if (r < 0.75) return link.replace(/^share=/, pick(["embed=", "Share=", "share:", "", "share=share="]));
  if (r < 0.8) return link + link.slice(int(link.length));
  if (r < 0.85) return `${link}${pick(ODD)}`;
  // Many changes at once.
  let s = link;
  for (let k = 0; k < 5; k++) s = mutateText(s);
  return s;
}

/** Changes the bytes of the JSON text before compression (invalid UTF-8, broken JSON). */
function mutateBytes(json) {
  const b = Buffer.from(json, "utf8");
  const n = 1 + int(4);
  for (let k = 0; k < n; k++) b[int(b.length)] = int(256);
  return rand() < 0.3 ? b.subarray(0, int(b.length)) : b;
}

/** Writes the seed links: the demo workspace, one design, none, and a version-1 workspace. */
async function writeCorpus(reader) {
  const designs = reader.demoDesigns();
  const demo = reader.demoPairs()[0];
  const pair = { a: 0, b: 1, comparison: demo.comparison, link: demo.link ?? null, campaign: demo.campaign, reach: { rho_dm_gev_per_cm3: 0.4 } };
  const entries = designs.map((design, colour) => ({ colour, design }));
  const seeds = {
    "demo-workspace": [{ workspace_version: 2, target_instability: 1e-18, selected: 0, designs: entries, pair }, "share"],
    "one-design-embed": [{ workspace_version: 2, target_instability: 3e-18, selected: 0, designs: entries.slice(2, 3), pair: { ...pair, a: 0, b: 0 } }, "embed"],
    "empty-workspace": [{ workspace_version: 2, target_instability: 1e-18, selected: 0, designs: [], pair: { ...pair, a: 0, b: 0 } }, "share"],
    "version-1-workspace": [{ workspace_version: 1, target_instability: 1e-17, selected: 1, designs: entries.slice(0, 2) }, "share"],
  };
  for (const [name, [doc, kind]] of Object.entries(seeds)) {
    const link = await reader.encodeLink(doc, kind);
    const back = await reader.readLink(link);
    if (!("state" in back)) throw new Error(`seed ${name} does not read back: ${JSON.stringify(back.problems)}`);
    await writeFile(join(CORPUS, `${name}.txt`), `${link}\n`);
    console.log(`wrote ${name}.txt (${link.length} characters)`);
  }
}

async function main() {
  const reader = await loadReader();
  if (args.includes("--write-corpus")) {
    await writeCorpus(reader);
    return;
  }
  const seeds = [];
  for (const f of (await readdir(CORPUS)).filter((f) => f.endsWith(".txt")).sort()) seeds.push((await readFile(join(CORPUS, f), "utf8")).trim());
  if (seeds.length === 0) throw new Error(`no seed links in ${CORPUS}`);
  const seedJson = [];
  for (const s of seeds) seedJson.push((await reader.decodeLink(s)).value);

  // The worst cases, always included: a compression bomb, a workspace just under the size
  // cap, a huge name, nesting just past the depth cap, a long list of numbers.
  const big = structuredClone(seedJson[0]);
  const worst = [
    pack(Buffer.alloc(64 * 1024 * 1024, 32)),
    pack(Buffer.from(JSON.stringify({ ...big, designs: [{ colour: 0, design: { ...big.designs[0].design, name: "n".repeat(1000 * 1000 - 20000) } }] }))),
    packJson({ ...big, designs: [{ colour: 0, design: { ...big.designs[0].design, laser: { ...big.designs[0].design.laser, noise: Array.from({ length: 90_000 }, () => 1) } } }] }),
    packJson(deep(33)),
    packJson(Array.from({ length: 200_000 }, (_, i) => i)),
  ];
  const counts = { worstMs: [], retimed: 0, inputs: 0, accepted: 0, rejected: 0, escaped: 0, slow: 0, maxMs: 0, byLevel: { text: 0, json: 0, bytes: 0 }, byProblem: {} };
  const failures = [];
  const started = performance.now();
  for (let n = 0; n < count + worst.length; n++) {
    const k = int(seeds.length);
    const r = rand();
    let input;
    if (n >= count) {
      input = worst[n - count];
    } else if (r < 0.4) {
      input = mutateText(seeds[k]);
      counts.byLevel.text++;
    } else if (r < 0.85) {
      input = packJson(mutateJson(seedJson[k]), rand() < 0.9 ? "share" : "embed");
      counts.byLevel.json++;
    } else {
      input = pack(mutateBytes(JSON.stringify(seedJson[k])));
      counts.byLevel.bytes++;
    }
    if (rand() < 0.3) input = `#${input}`;
    const t0 = performance.now();
    let outcome;
    try {
      outcome = await reader.readLink(input);
    } catch (err) {
      counts.escaped++;
      if (failures.length < 10) failures.push({ input: input.slice(0, 300), error: String(err?.stack ?? err).slice(0, 500) });
      continue;
    } finally {
      let dt = performance.now() - t0;
      if (timeLimited && dt > LIMIT_MS) {
        // Over the limit once: time the same input three more times and keep the fastest, so
        // that a pause of the machine (another process, a garbage collection) is told apart
        // from an input that is slow to read. Both are counted.
        counts.retimed++;
        for (let k = 0; k < 3; k++) {
          const t1 = performance.now();
          await reader.readLink(input).catch(() => undefined);
          dt = Math.min(dt, performance.now() - t1);
        }
      }
      counts.maxMs = Math.max(counts.maxMs, dt);
      if (n >= count) counts.worstMs.push(Math.round(dt * 10) / 10);
      if (timeLimited && dt > LIMIT_MS) {
        counts.slow++;
        if (failures.length < 10) failures.push({ input: input.slice(0, 300), length: input.length, ms: dt });
      }
      counts.inputs++;
    }
    if ("state" in outcome) counts.accepted++;
    else {
      counts.rejected++;
      const ps = outcome.problems;
      const clear = Array.isArray(ps) && ps.length > 0 && ps.every((p) => typeof p.path === "string" && typeof p.value === "string" && typeof p.allowed === "string" && p.allowed.length > 0);
      if (!clear) {
        counts.escaped++;
        if (failures.length < 10) failures.push({ input: input.slice(0, 300), problems: ps });
      }
      const key = ps[0]?.path === "(link)" ? `link: ${ps[0].allowed.replace(/\(.*\)|\d+/g, "").slice(0, 50)}` : "workspace";
      counts.byProblem[key] = (counts.byProblem[key] ?? 0) + 1;
    }
  }
  counts.maxMs = Math.round(counts.maxMs * 10) / 10;
  counts.seconds = Math.round((performance.now() - started) / 100) / 10;
  console.log(JSON.stringify({ ...counts, failures }));
  process.exit(counts.escaped === 0 && counts.slow === 0 ? 0 : 1);
}

if (process.argv[1] && import.meta.url === pathToFileURL(resolve(process.argv[1])).href) {
  main().catch((err) => {
    console.error(err);
    process.exit(2);
  });
}
