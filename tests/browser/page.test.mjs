// The single-file page in headless Chromium, loaded from file://.

import { test } from "node:test";
import assert from "node:assert/strict";
import { readdir, readFile, stat, writeFile } from "node:fs/promises";
import { join } from "node:path";
import {
  PAGE_URL,
  ROOT,
  artifactsDir,
  engineEvaluation,
  launch,
  openPage,
  readCurves,
  readShown,
  readTable,
  updateCount,
  waitForUpdates,
} from "./helpers.mjs";

test("the page renders the four demo designs from file:// without any network request", async () => {
  const b = await launch();
  try {
    const requests = [];
    b.context.on("request", (r) => requests.push(r.url()));
    await openPage(b.page);
    const { names } = await readTable(b.page);
    assert.equal(names.length, 4, `table columns: ${JSON.stringify(names)}`);
    const curves = await readCurves(b.page);
    assert.equal(Object.keys(curves).length, 4);
    for (const [name, d] of Object.entries(curves)) assert.match(d, /^M[\d.]+,[\d.]+L/, `curve of ${name}`);
    assert.ok((await b.page.locator("#g-plot path.curve").count()) > 0, "g(t) plot has a curve");
    assert.ok((await b.page.locator("#line-plot circle.op-point").count()) === 2, "line shape marks both operating points");
    assert.ok(await b.page.getByText("projections are model estimates; measured performance decides", { exact: false }).first().isVisible());
    const notAllowed = requests.filter((u) => u !== PAGE_URL && !u.startsWith("data:") && !u.startsWith("blob:"));
    assert.deepEqual(notAllowed, [], "requests other than the page itself");
    assert.deepEqual(b.errors, []);

    // The Content-Security-Policy is present and in force: a fetch is refused before any request.
    const csp = await b.page.getAttribute('meta[http-equiv="Content-Security-Policy"]', "content");
    for (const part of ["default-src 'none'", "connect-src 'none'", "'wasm-unsafe-eval'", "img-src data: blob:"]) assert.ok(csp.includes(part), `CSP lacks ${part}: ${csp}`);
    assert.ok(!csp.includes("unsafe-inline") && !/script-src[^;]*'unsafe-eval'/.test(csp), csp);
    const outcome = await b.page.evaluate(async () => {
      const violations = [];
      document.addEventListener("securitypolicyviolation", (e) => violations.push(e.violatedDirective));
      let result;
      try {
        await fetch("http://127.0.0.1:9/");
        result = "fetched";
      } catch {
        result = "refused";
      }
      await new Promise((r) => setTimeout(r, 50));
      return { result, violations };
    });
    assert.equal(outcome.result, "refused");
    assert.ok(outcome.violations.some((v) => v.startsWith("connect-src")), JSON.stringify(outcome.violations));
    assert.deepEqual(requests.filter((u) => u.startsWith("http")), [], "the refused fetch made no request");
  } finally {
    await b.close();
  }
});

test("the numbers shown for the demo designs equal the engine's own", async () => {
  const dir = join(ROOT, "core/designs");
  const files = (await readdir(dir)).filter((f) => f.endsWith(".json") && !f.startsWith("pair-")).sort();
  assert.ok(files.length >= 4, `design files in core/designs: ${files}`);
  const byName = new Map();
  for (const f of files) {
    const design = JSON.parse(await readFile(join(dir, f), "utf8"));
    byName.set(design.name, { file: f, evaluation: await engineEvaluation(join(dir, f)) });
  }
  const b = await launch();
  try {
    await openPage(b.page);
    const { names, rows } = await readTable(b.page);
    assert.equal(names.length, 4);
    let compared = 0;
    names.forEach((name, col) => {
      const ref = byName.get(name);
      assert.ok(ref, `the page's demo design "${name}" has no file in core/designs (${[...byName.keys()].join(", ")})`);
      ref.evaluation.checkpoints.forEach((cp, k) => {
        const cell = rows[`sigma-${k}`]?.[col];
        assert.ok(cell !== undefined, `row sigma-${k} for ${name}`);
        const shown = readShown(cell);
        assert.ok(shown, `cannot read "${cell}"`);
        const err = Math.abs(shown.value - cp.total);
        assert.ok(err <= shown.halfStep * 1.0001, `${name} (${ref.file}) sigma at ${cp.tau_s} s: page shows "${cell}", engine gives ${cp.total}`);
        compared += 1;
      });
    });
    assert.equal(compared, 12, "three checkpoints for each of four designs");
    const labels = await b.page.$$eval("#comparison tbody tr[data-row^='sigma-'] th", (ths) => ths.map((t) => t.textContent));
    assert.deepEqual(labels, ["σy(τ = 1 s)", "σy(τ = 1000 s)", "σy(τ = 1 day)"]);
  } finally {
    await b.close();
  }
});

test("edits recompute live, bad input is marked and keeps the last good result, reload keeps edits", async () => {
  const b = await launch();
  try {
    await openPage(b.page);
    const page = b.page;
    const count = page.locator('[data-path="atoms.count"]');
    const before = await readTable(page);
    const curvesBefore = await readCurves(page);
    const name = before.names[0];
    const oldCount = Number(await count.inputValue());
    const newCount = oldCount * 4 + 3;

    const n0 = await updateCount(page);
    await count.fill(String(newCount));
    await waitForUpdates(page, n0 + 1);
    const after = await readTable(page);
    const curvesAfter = await readCurves(page);
    assert.notEqual(after.rows["sigma-0"][0], before.rows["sigma-0"][0], "σ(1 s) of the edited design changes");
    assert.notEqual(curvesAfter[name], curvesBefore[name], "its curve changes");
    for (let c = 1; c < after.names.length; c++) {
      assert.equal(readShown(after.rows["sigma-0"][c]).value, readShown(before.rows["sigma-0"][c]).value, "other designs are unchanged");
    }

    // A negative probe time: the first pulse's duration.
    const kinds = await page.$$eval('select[data-path$=".kind"][data-path^="sequence.segments"]', (ss) => ss.map((s) => [s.dataset.path, s.value]));
    const pulse = kinds.find(([, v]) => v === "pulse");
    assert.ok(pulse, "the design has a pulse");
    const durPath = pulse[0].replace(/\.kind$/, ".duration_s");
    const dur = page.locator(`[data-path="${durPath}"]`);
    const oldDur = await dur.inputValue();
    const n1 = await updateCount(page);
    await dur.fill("-0.1");
    await waitForUpdates(page, n1 + 1);
    assert.equal(await dur.getAttribute("aria-invalid"), "true");
    const field = page.locator(`.field[data-field="${durPath}"]`);
    assert.ok((await field.getAttribute("class")).includes("invalid"));
    const message = await field.locator(".field-error").textContent();
    assert.ok(message.includes(durPath) && message.includes("-0.1"), `error text: ${message}`);
    const held = await readTable(page);
    assert.deepEqual(held.rows, after.rows, "the table keeps the last good values");
    assert.deepEqual(await readCurves(page), curvesAfter, "the curves stay");
    assert.ok((await page.locator("#comparison thead th.design-col").first().textContent()).includes("last valid result"));
    const shownText = await page.locator("body").innerText();
    assert.ok(!/\bNaN\b/.test(shownText), "no NaN on the page");
    // Other fields stay editable.
    assert.ok(await count.isEditable());

    await page.reload();
    await page.waitForSelector("#comparison tbody tr");
    assert.equal(await page.locator('[data-path="atoms.count"]').inputValue(), String(newCount), "the valid edit survived the reload");
    assert.equal(await page.locator(`[data-path="${durPath}"]`).inputValue(), oldDur, "the invalid edit was not stored");
    const reloaded = await readTable(page);
    assert.deepEqual(reloaded.rows["sigma-0"], after.rows["sigma-0"]);
    assert.deepEqual(b.errors, []);
  } finally {
    await b.close();
  }
});

test("screenshots at 1280x800 (light, dark) and the print layout", async () => {
  const dir = await artifactsDir();
  const b = await launch();
  try {
    await openPage(b.page);
    await b.page.waitForTimeout(200);
    const file = join(dir, "page.png");
    await b.page.screenshot({ path: file });
    const png = await readFile(file);
    assert.equal(png.subarray(1, 4).toString(), "PNG");
    assert.ok((await stat(file)).size > 20_000);

    await b.page.emulateMedia({ colorScheme: "dark" });
    await b.page.waitForTimeout(100);
    await b.page.screenshot({ path: join(dir, "page-dark.png") });
    const bg = await b.page.evaluate(() => getComputedStyle(document.body).backgroundColor);
    assert.notEqual(bg, "rgb(255, 255, 255)", "dark theme follows prefers-color-scheme");
    await b.page.selectOption("#theme", "light");
    assert.equal(await b.page.evaluate(() => getComputedStyle(document.body).backgroundColor), "rgb(255, 255, 255)", "the toggle overrides it");

    await b.page.emulateMedia({ media: "print", colorScheme: "light" });
    assert.equal(await b.page.locator("#editor-panel").isVisible(), false, "editor hidden in print");
    assert.ok(await b.page.locator("#comparison").isVisible());
    assert.ok(await b.page.locator("#sigma-plot svg").isVisible());
    assert.ok(await b.page.locator(".estimate-note").isVisible());
    await writeFile(join(dir, "page-print.pdf"), await b.page.pdf({ format: "A4" }));
  } finally {
    await b.close();
  }
});

test("keyboard: controls are reachable by Tab, operable, labelled, with a visible focus", async () => {
  const b = await launch();
  try {
    await openPage(b.page);
    const page = b.page;
    const unlabelled = await page.$$eval("input, select", (els) => els.filter((e) => e.type !== "hidden" && !e.hidden && e.labels.length === 0).map((e) => e.id || e.dataset.path || e.outerHTML.slice(0, 80)));
    assert.deepEqual(unlabelled, [], "every input has a label");
    const seen = new Set();
    let dupFocused = false;
    // The pair, simulation and study cards come before the design list in tab order.
    for (let i = 0; i < 200 && !dupFocused; i++) {
      await page.keyboard.press("Tab");
      const id = await page.evaluate(() => document.activeElement?.id || document.activeElement?.dataset?.path || document.activeElement?.tagName);
      seen.add(id);
      dupFocused = id === "dup-design";
    }
    assert.ok(dupFocused, `Tab reaches the Duplicate button (seen: ${[...seen].join(", ")})`);
    const outline = await page.evaluate(() => getComputedStyle(document.activeElement).outlineStyle);
    assert.notEqual(outline, "none", "focus is visible");
    const n = await updateCount(page);
    await page.keyboard.press("Enter");
    await waitForUpdates(page, n + 1);
    assert.equal((await readTable(page)).names.length, 5, "Enter on Duplicate adds a design");
    let reachedEditor = false;
    for (let i = 0; i < 300 && !reachedEditor; i++) {
      await page.keyboard.press("Tab");
      reachedEditor = await page.evaluate(() => document.activeElement?.dataset?.path === "atoms.count");
    }
    assert.ok(reachedEditor, "Tab reaches the editor fields");
    await page.keyboard.press("Control+A");
    const m = await updateCount(page);
    await page.keyboard.type("7");
    await waitForUpdates(page, m + 1);
    assert.equal(await page.locator('[data-path="atoms.count"]').inputValue(), "7");
    assert.deepEqual(b.errors, []);
  } finally {
    await b.close();
  }
});

test("designs: add, duplicate, rename as text, remove; the workspace file round-trips", async () => {
  const b = await launch({ acceptDownloads: true });
  try {
    await openPage(b.page);
    const page = b.page;
    const hostile = '<img src=x onerror="document.title=1">Trap';
    await page.locator('[data-path="name"]').fill(hostile);
    await page.waitForFunction((t) => [...document.querySelectorAll("#comparison .design-name")].some((e) => e.textContent === t), hostile);
    assert.equal(await page.locator("#comparison img, #design-list img, #sigma-legend img").count(), 0, "names are inserted as text");
    await page.click("#add-design");
    await page.click("#dup-design");
    let t = await readTable(page);
    assert.equal(t.names.length, 6);
    assert.ok(t.names.includes("New design (copy)"), JSON.stringify(t.names));

    const [download] = await Promise.all([page.waitForEvent("download"), page.click("#save-ws")]);
    const saved = JSON.parse(await readFile(await download.path(), "utf8"));
    assert.equal(saved.workspace_version, 2);
    assert.equal(saved.designs.length, 6);
    assert.equal(saved.designs[0].design.name, hostile);

    await page.click("#remove-design");
    await page.waitForFunction(() => document.querySelectorAll("#comparison thead th.design-col").length === 5);
    await page.click("#ws-message button");
    await page.waitForFunction(() => document.querySelectorAll("#comparison thead th.design-col").length === 6);
    assert.deepEqual((await readTable(page)).names, t.names, "Undo puts the removed design back in its place");
    await page.click("#remove-design");
    await page.click("#reset-ws");
    await page.waitForFunction(() => document.querySelectorAll("#comparison thead th.design-col").length === 4);

    const dir = await artifactsDir();
    const good = join(dir, "workspace-roundtrip.json");
    await writeFile(good, JSON.stringify(saved));
    await page.setInputFiles("#load-ws-file", good);
    await page.waitForFunction(() => document.querySelectorAll("#comparison thead th.design-col").length === 6);
    t = await readTable(page);
    assert.deepEqual(t.names, saved.designs.map((d) => d.design.name));

    const bad = structuredClone(saved);
    bad.designs[1].design.atoms.count = 0;
    const badFile = join(dir, "workspace-invalid.json");
    await writeFile(badFile, JSON.stringify(bad));
    await page.setInputFiles("#load-ws-file", badFile);
    await page.waitForFunction(() => document.querySelector("#ws-message")?.textContent.includes("was not loaded"));
    const msg = await page.locator("#ws-message").textContent();
    assert.ok(msg.includes("designs[1].atoms.count"), msg);
    assert.equal((await readTable(page)).names.length, 6, "the workspace is unchanged");
    assert.deepEqual(b.errors, []);
  } finally {
    await b.close();
  }
});

test("editor: presets, segments, entanglement, noise terms and a spectrum table from CSV", async () => {
  const b = await launch();
  try {
    await openPage(b.page);
    const page = b.page;
    const kinds = () => page.$$eval('select[data-path^="sequence.segments"][data-path$=".kind"]', (ss) => ss.map((s) => s.value));
    const settle = async (action) => {
      const n = await updateCount(page);
      await action();
      await waitForUpdates(page, n + 1);
    };
    const problems = () => page.$$eval("#editor .problem", (ps) => ps.map((p) => p.textContent));

    // Preset: Ramsey replaces the probe segments and leaves the dead time around them.
    const before = await kinds();
    const dead = before.filter((k) => k === "dead").length;
    await page.selectOption('select[data-focus-key="preset"]', "ramsey");
    await settle(() => page.click('button[data-focus-key="preset-apply"]'));
    const after = await kinds();
    assert.equal(after.filter((k) => k === "dead").length, dead, "dead segments are kept");
    const probe = after.filter((k) => k !== "dead");
    assert.deepEqual(probe, ["pulse", "free", "pulse"], JSON.stringify(after));
    assert.deepEqual(await problems(), []);

    // Segments: move one so dead time sits between pulses -> the engine's problem lands on it.
    const firstPulse = after.indexOf("pulse");
    await settle(() => page.click(`button[data-focus-key="sequence.segments[${firstPulse - 1}].down"]`));
    const moved = await kinds();
    assert.equal(moved[firstPulse], "dead");
    const ps = await problems();
    assert.ok(ps.some((p) => p.startsWith(`sequence.segments[${firstPulse}].kind`)), JSON.stringify(ps));
    assert.equal(await page.locator(`[data-path="sequence.segments[${firstPulse}].kind"]`).getAttribute("aria-invalid"), "true");
    await settle(() => page.click(`button[data-focus-key="sequence.segments[${firstPulse}].up"]`));
    assert.deepEqual(await kinds(), after);
    assert.deepEqual(await problems(), []);
    await settle(() => page.click('button[data-focus-key="add-dead"]'));
    assert.equal((await kinds()).length, after.length + 1);

    // Entanglement: squeezing shows its gain field.
    await settle(() => page.selectOption('[data-path="atoms.entanglement.kind"]', "squeezed"));
    assert.ok(await page.locator('[data-path="atoms.entanglement.gain_db"]').isVisible());
    await settle(() => page.locator('[data-path="atoms.entanglement.gain_db"]').fill("99"));
    assert.ok((await problems()).some((p) => p.startsWith("atoms.entanglement.gain_db: 99")), JSON.stringify(await problems()));
    await settle(() => page.locator('[data-path="atoms.entanglement.gain_db"]').fill("3"));
    assert.deepEqual(await problems(), []);

    // Noise terms: add one of each kind shown in the menu, then remove it again.
    const terms = () => page.locator("ol.terms > li").count();
    const n0 = await terms();
    await page.selectOption('select[data-focus-key="add-term-kind"]', "power_law_at");
    await settle(() => page.click('button[data-focus-key="add-term"]'));
    assert.equal(await terms(), n0 + 1);
    assert.ok(await page.locator(`[data-path="laser.noise[${n0}].at_hz"]`).isVisible());
    await settle(() => page.click(`button[data-focus-key="laser.noise[${n0}].remove"]`));
    assert.equal(await terms(), n0);

    // A spectrum table: a bad file names its line, a good one is loaded and shown.
    const dir = await artifactsDir();
    const badCsv = join(dir, "spectrum-bad.csv");
    await writeFile(badCsv, "f_hz,l_dbc\n1,-40\n10,not-a-number\n");
    await page.setInputFiles('[data-focus-key="laser.table.file"]', badCsv);
    await page.waitForFunction(() => document.querySelector('[data-group="laser.table"] .group-error')?.textContent.includes("line 3"));
    const goodCsv = join(dir, "spectrum-good.csv");
    await writeFile(goodCsv, "# free-running laser\nf_hz,l_dbc\n1,-40\n10,-60\n100,-80\n1000,-100\n");
    await settle(() => page.setInputFiles('[data-focus-key="laser.table.file"]', goodCsv));
    assert.match(await page.locator(".table-status").textContent(), /Table: 4 rows/);
    assert.deepEqual(await problems(), []);
    await settle(() => page.click('button[data-focus-key="laser.table.remove"]'));
    assert.match(await page.locator(".table-status").textContent(), /No spectrum table/);

    // An unreadable number is marked while the engine still checks the other fields.
    await settle(() => page.locator('[data-path="atoms.count"]').fill("many"));
    await settle(() => page.locator('[data-path="lock.attack_time_s"]').fill("-5"));
    const both = await problems();
    assert.ok(both.some((p) => p.startsWith('atoms.count: "many"')), JSON.stringify(both));
    assert.ok(both.some((p) => p.startsWith("lock.attack_time_s")), JSON.stringify(both));
    assert.deepEqual(b.errors, []);
  } finally {
    await b.close();
  }
});

test("redrawing only what changed gives the same page as drawing it afresh", async () => {
  const b = await launch();
  try {
    await openPage(b.page);
    const page = b.page;
    const settle = async (action) => {
      const n = await updateCount(page);
      await action();
      await waitForUpdates(page, n + 1);
    };
    // What the user sees, with the counters that differ between visits (clip ids, design ids) taken out.
    const snapshot = () =>
      page.evaluate(() => {
        const out = {};
        for (const sel of ["#sigma-plot", "#sigma-legend", "#comparison", "#g-plot", "#line-plot", "#details", "#design-list", "#selected-name", "#editor .summary"]) {
          out[sel] = (document.querySelector(sel)?.innerHTML ?? "").replace(/cw-clip-\d+/g, "cw-clip").replace(/data-uid="\d+"/g, "data-uid");
        }
        return out;
      });
    const count = () => page.locator('[data-path="atoms.count"]');
    const select = (i) => page.locator("#design-list button").nth(i).click();

    // Designs added and removed first, then only values changed, so that the last drawings are partial.
    await settle(() => page.click("#dup-design"));
    await settle(() => page.click("#remove-design"));
    await settle(() => count().fill("3"));
    await select(2);
    await page.locator("#breakdown-all").check();
    await settle(() => count().fill("100000"));
    await settle(() => count().fill("x"));
    await settle(() => count().fill("2"));
    await settle(() => page.locator("#target-input").fill("3e-17"));
    await settle(() => page.locator('[data-path="name"]').fill("Renamed"));
    await select(0);
    await settle(() => count().fill("1"));
    await page.locator("#breakdown-all").uncheck();
    await select(1);
    await page.setViewportSize({ width: 1000, height: 800 });
    await page.waitForTimeout(200);
    await page.setViewportSize({ width: 1280, height: 800 });
    await page.waitForTimeout(200);
    await settle(() => count().fill("5"));
    const incremental = await snapshot();

    await page.reload();
    await page.waitForSelector("#comparison tbody tr");
    if (await page.locator("#breakdown-all").isChecked()) await page.locator("#breakdown-all").uncheck();
    await page.waitForTimeout(200);
    const fresh = await snapshot();
    for (const sel of Object.keys(fresh)) assert.equal(incremental[sel], fresh[sel], `${sel} after the edits equals a fresh drawing`);
    assert.deepEqual(b.errors, []);
  } finally {
    await b.close();
  }
});
