// The clock-pair view in headless Chromium from file://: the numbers shown equal the engine's
// own (the ES package www/dist/pkg run under Node), bad input, markup in names, the workspace
// version 2 and the migration of version-1 files.

import { test } from "node:test";
import assert from "node:assert/strict";
import { execFile } from "node:child_process";
import { existsSync } from "node:fs";
import { mkdir, mkdtemp, readFile, rm, symlink, writeFile } from "node:fs/promises";
import { tmpdir } from "node:os";
import { join } from "node:path";
import { promisify } from "node:util";
import { PAGE_URL, PKG, ROOT, artifactsDir, launch, openPage, readShown, readTable } from "./helpers.mjs";

const run = promisify(execFile);
const FIXTURE = join(ROOT, "tests/browser/fixtures/workspace-v1.json");

/** Runs `body` (an async function body using `cw`, returning JSON-able data) under Node. */
async function inNode(body, input) {
  if (!existsSync(join(PKG, "package.json"))) throw new Error(`${PKG} is missing: build the page first (./dev page --no-serve)`);
  const dir = await mkdtemp(join(tmpdir(), "cw-pair-"));
  try {
    await mkdir(join(dir, "node_modules"));
    await writeFile(join(dir, "package.json"), JSON.stringify({ name: "cw-pair-check", private: true, type: "module" }));
    await symlink(PKG, join(dir, "node_modules", "clockwright"), "dir");
    await writeFile(join(dir, "input.json"), JSON.stringify(input ?? null));
    await writeFile(
      join(dir, "use.mjs"),
      `import * as cw from "clockwright";\nimport { readFileSync } from "node:fs";\nawait cw.ready();\nconst input = JSON.parse(readFileSync("input.json", "utf8"));\nconst out = await (async () => {${body}})();\nconsole.log(JSON.stringify(out));\n`,
    );
    const { stdout } = await run(process.execPath, ["use.mjs"], { cwd: dir, maxBuffer: 64 * 1024 * 1024 });
    return JSON.parse(stdout);
  } finally {
    await rm(dir, { recursive: true, force: true });
  }
}

/** The engine's figures for a pair document: ratio at 1 s and 1 day, drift bound, best d_e. */
const FIGURES = `
  const pair = input.pair;
  const e = cw.evaluatePair(pair, null);
  const r = cw.reach(pair, { rho_dm_gev_per_cm3: input.rho ?? 0.4 });
  let best = null;
  r.dark_matter.d_e.forEach((v) => { if (v !== null && (best === null || v < best)) best = v; });
  return {
    ratio1s: e.checkpoints.find((c) => c.tau_s === 1).sigma,
    ratio1d: e.checkpoints.find((c) => c.tau_s === 86400).sigma,
    deltaK: e.delta_k,
    kB: e.k_alpha_b,
    drift: r.drift.alpha_drift_per_year,
    height1s: r.levelling.checkpoints.find((c) => c.tau_s === 1).height_m,
    best,
  };`;

/** The pair table as {rowId: cell text}. */
async function readPairTable(page) {
  return page.evaluate(() => {
    const out = {};
    for (const tr of document.querySelectorAll("#pair-table tbody tr")) out[tr.dataset.row] = tr.querySelector("td").textContent;
    return out;
  });
}

async function waitForReach(page) {
  await page.waitForSelector('#pair-table[data-state="done"] tbody tr[data-row="drift"]', { timeout: 30_000 });
}

function assertShown(text, want, what) {
  const got = readShown(text);
  assert.ok(got, `${what}: nothing readable in ${JSON.stringify(text)}`);
  assert.ok(Math.abs(got.value - want) <= got.halfStep * 1.0001, `${what}: shown ${text}, engine ${want}`);
}

/** Types into the pair field at `path` and waits for the view to settle. */
async function typePair(page, path, text) {
  await page.fill(`#pair-view [data-path="${path}"]`, text);
}

test("the pair view renders from file:// without requests and shows the engine's numbers", async () => {
  const demo = await inNode("return cw.demoPairs()[0];");
  const ref = await inNode(FIGURES, { pair: { ...demo, a: (await inNode("return cw.demoDesigns()[0];")), b: (await inNode("return cw.demoDesigns()[3];")) } });
  const b = await launch();
  try {
    const requests = [];
    b.context.on("request", (r) => requests.push(r.url()));
    await openPage(b.page);
    await waitForReach(b.page);
    const rows = await readPairTable(b.page);
    assertShown(rows["ratio-1s"], ref.ratio1s, "ratio at 1 s");
    assertShown(rows["ratio-1d"], ref.ratio1d, "ratio at 1 day");
    assertShown(rows["delta-k"], ref.deltaK, "delta K");
    assertShown(rows.drift, ref.drift, "drift bound of alpha");
    assertShown(rows["height-1s"], ref.height1s, "height at 1 s");
    assertShown(rows["de-best"], ref.best, "best d_e");
    assert.match(rows["k-a"], /\(.+\)/, "K of A names its source");
    assert.ok((await b.page.locator("#pair-ratio-plot path.curve.total").count()) === 1);
    assert.ok((await b.page.locator("#pair-reach-plot path.curve.total").count()) === 1);
    assert.ok((await b.page.locator("#pair-notes li").count()) >= 4, "assumptions listed");
    assert.ok((await b.page.locator(".species-table tbody tr").count()) >= 11, "species catalog listed");
    const notAllowed = requests.filter((u) => u !== PAGE_URL && !u.startsWith("data:") && !u.startsWith("blob:"));
    assert.deepEqual(notAllowed, [], "requests other than the page itself");

    // Markup in a design name is shown as text in the pair view.
    const evil = '<img src=x onerror="window.__hit=1"><b>Bold</b> clock';
    await b.page.fill('[data-focus-key="name"]', evil);
    await b.page.waitForFunction((n) => [...document.querySelectorAll('#pair-view [data-path="pair.a"] option')].some((o) => o.textContent === n), evil);
    await waitForReach(b.page);
    assert.equal(await b.page.locator("#pair-view b, #pair-view img").count(), 0);
    assert.ok((await b.page.locator("#pair-table").textContent()).includes(evil));
    assert.equal(await b.page.evaluate(() => window.__hit), undefined);

    // The editor's species and K_alpha fields feed the pair.
    assert.equal(await b.page.locator('[data-focus-key="transition.species"]').inputValue(), "al27_ion");
    await b.page.fill('[data-focus-key="transition.k_alpha"]', "1.5");
    await b.page.waitForFunction(() => /1\.5.*the design's own value/.test(document.querySelector('#pair-table tr[data-row="k-a"]')?.textContent ?? ""));
    await waitForReach(b.page);
    const overridden = await readPairTable(b.page);
    assertShown(overridden["delta-k"], 1.5 - ref.kB, "delta K with A's override");
    await b.page.fill('[data-focus-key="transition.k_alpha"]', "");
    await b.page.waitForFunction(() => !/own value/.test(document.querySelector('#pair-table tr[data-row="k-a"]')?.textContent ?? ""));

    const dir = await artifactsDir();
    await b.page.evaluate(() => {
      document.documentElement.dataset.theme = "light";
    });
    await b.page.locator(".pair-card").screenshot({ path: join(dir, "pair-light.png") });
    await b.page.evaluate(() => {
      document.documentElement.dataset.theme = "dark";
    });
    await b.page.locator(".pair-card").screenshot({ path: join(dir, "pair-dark.png") });
    assert.deepEqual(b.errors, []);
  } finally {
    await b.close();
  }
});

test("bad pair input shows clear messages next to the fields and keeps the last good result", async () => {
  const b = await launch();
  try {
    await openPage(b.page);
    await waitForReach(b.page);
    const before = (await readPairTable(b.page))["ratio-1s"];

    await typePair(b.page, "pair.campaign.uptime", "0");
    const err = b.page.locator('#pair-view .field[data-field="pair.campaign.uptime"] .field-error');
    await err.waitFor({ state: "visible" });
    assert.match(await err.textContent(), /pair\.campaign\.uptime: .*0.*above 0/);
    assert.equal((await readPairTable(b.page))["ratio-1s"], before, "last good result stays");
    const stored = await b.page.evaluate(() => JSON.parse(localStorage.getItem("clockwright.workspace")));
    assert.equal(stored.workspace_version, 2);
    assert.equal(stored.pair.campaign.uptime, 0.7, "autosave keeps the last valid pair");

    await typePair(b.page, "pair.campaign.sessions", "many");
    const e2 = b.page.locator('#pair-view .field[data-field="pair.campaign.sessions"] .field-error');
    await e2.waitFor({ state: "visible" });
    assert.match(await e2.textContent(), /whole number/);
    await typePair(b.page, "pair.campaign.sessions", "52");
    await typePair(b.page, "pair.campaign.uptime", "0.7");
    await b.page.waitForFunction(() => document.querySelectorAll("#pair-view .field-error .problem").length === 0);

    // The same design twice: the same K, no sensitivity to alpha, said in words.
    const aValue = await b.page.locator('#pair-view [data-path="pair.a"]').inputValue();
    await b.page.selectOption('#pair-view [data-path="pair.b"]', aValue);
    await b.page.waitForFunction(() => /same sensitivity coefficient K/.test(document.querySelector('#pair-table tr[data-row="delta-k"]')?.textContent ?? ""));
    await waitForReach(b.page);
    const rows = await readPairTable(b.page);
    assert.match(rows["delta-k"], /no sensitivity to α: both clocks have the same sensitivity coefficient K/);
    assert.match(rows.drift, /no sensitivity/);
    assert.match(rows["de-best"], /no sensitivity/);
    assert.ok(!/NaN|Infinity/.test(JSON.stringify(rows)), JSON.stringify(rows));
    assert.ok(readShown(rows["ratio-1s"]).value > 0);
    assert.match(await b.page.locator("#pair-reach-plot").textContent(), /no sensitivity/i);
    await b.page.locator(".pair-card").screenshot({ path: join(await artifactsDir(), "pair-no-sensitivity.png") });
    assert.deepEqual(b.errors, []);
  } finally {
    await b.close();
  }
});

test("a version-1 workspace loads, migrates to version 2 and evaluates to the engine's numbers", async () => {
  const v1 = JSON.parse(await readFile(FIXTURE, "utf8"));
  assert.equal(v1.workspace_version, 1);
  const designs = v1.designs.map((e) => e.design);
  const ref = await inNode(
    `const demo = cw.demoPairs()[0];
     const ds = input.designs;
     const a = ds.find((d) => d.name === demo.a.name), b = ds.find((d) => d.name === demo.b.name);
     const pair = { ...demo, a, b };
     const e = cw.evaluatePair(pair, null);
     const r = cw.reach(pair, null);
     return { names: ds.map((d) => d.name), one: ds.map((d) => cw.evaluate(d, { target_instability: input.target }).checkpoints[0].total),
              ratio1s: e.checkpoints[0].sigma, drift: r.drift.alpha_drift_per_year };`,
    { designs, target: v1.target_instability },
  );
  const b = await launch();
  try {
    await openPage(b.page);
    await b.page.setInputFiles("#load-ws-file", FIXTURE);
    await b.page.waitForFunction(() => document.querySelector("#ws-message")?.textContent.includes("Loaded"));
    const { names, rows } = await readTable(b.page);
    assert.deepEqual(names, ref.names);
    // The designs evaluate to the same numbers as the engine gives for the file's designs.
    rows["sigma-0"].forEach((cell, i) => assertShown(cell, ref.one[i], `${ref.names[i]} at 1 s`));
    await b.page.waitForFunction(() => document.querySelector('#pair-table tr[data-row="k-b"]')?.textContent.includes("octupole"));
    await waitForReach(b.page);
    const pr = await readPairTable(b.page);
    assertShown(pr["ratio-1s"], ref.ratio1s, "migrated pair: ratio at 1 s");
    assertShown(pr.drift, ref.drift, "migrated pair: drift bound");
    const stored = await b.page.evaluate(() => JSON.parse(localStorage.getItem("clockwright.workspace")));
    assert.equal(stored.workspace_version, 2);
    assert.equal(stored.designs.length, 3);
    assert.deepEqual([stored.pair.a, stored.pair.b], [1, 0], "the demo pair's designs found by name");
    assert.equal(stored.designs[2].design.atoms.count, 5000);

    // An unknown version is refused with a clear problem; the workspace stays.
    const dir = await mkdtemp(join(tmpdir(), "cw-ws-"));
    try {
      const future = join(dir, "future.json");
      await writeFile(future, JSON.stringify({ ...stored, workspace_version: 9 }));
      await b.page.setInputFiles("#load-ws-file", future);
      await b.page.waitForFunction(() => document.querySelector("#ws-message")?.textContent.includes("was not loaded"));
      assert.match(await b.page.locator("#ws-message").textContent(), /workspace_version: 9; this page reads workspace versions 1 and 2/);
      const badPair = join(dir, "bad-pair.json");
      await writeFile(badPair, JSON.stringify({ ...stored, pair: { ...stored.pair, a: 7, campaign: { ...stored.pair.campaign, uptime: 0 } } }));
      await b.page.setInputFiles("#load-ws-file", badPair);
      await b.page.waitForFunction(() => document.querySelector("#ws-message")?.textContent.includes("pair.a"));
    } finally {
      await rm(dir, { recursive: true, force: true });
    }
    assert.equal((await readTable(b.page)).names.length, 3);
    assert.deepEqual(b.errors, []);
  } finally {
    await b.close();
  }
});
