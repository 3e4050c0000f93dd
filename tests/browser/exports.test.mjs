// The embed view in an iframe of a file:// host page, and the exports: design JSON, curve and
// breakdown CSV against the engine's own numbers, SVG (valid XML), PNG, Markdown and HTML
// tables, and the proposal paragraph against the engine's numbers.

import { test } from "node:test";
import assert from "node:assert/strict";
import { mkdtemp, readFile, rm, writeFile } from "node:fs/promises";
import { tmpdir } from "node:os";
import { join } from "node:path";
import { pathToFileURL } from "node:url";
import { PAGE_URL, artifactsDir, engineEvaluation, launch, openPage, readShown } from "./helpers.mjs";
import { copied, demoFiles, downloadText } from "./share-helpers.mjs";

/** Reads "2.35×10⁻¹⁶" (Unicode superscripts) as a number with its half step. */
function readPlain(text) {
  const sup = { "⁰": "0", "¹": "1", "²": "2", "³": "3", "⁴": "4", "⁵": "5", "⁶": "6", "⁷": "7", "⁸": "8", "⁹": "9", "⁻": "-" };
  return readShown(text.replace(/×10([⁰¹²³⁴⁵⁶⁷⁸⁹⁻]+)/g, (_, e) => `×10${[...e].map((c) => sup[c]).join("")}`));
}

function near(shown, value, what) {
  assert.ok(shown, `${what}: no number`);
  assert.ok(Math.abs(shown.value - value) <= shown.halfStep * 1.0001, `${what}: shown ${shown.value}, engine ${value}`);
}

test("the embed view renders in an iframe of a file:// host page, read-only, with a link back to the editor", async () => {
  const dir = await mkdtemp(join(tmpdir(), "cw-host-"));
  const b = await launch();
  try {
    const requests = [];
    b.context.on("request", (r) => requests.push(r.url()));
    await openPage(b.page);
    await b.page.selectOption("#embed-which", "all");
    const snippet = await copied(b.page, "#copy-embed", "<iframe");
    assert.match(snippet, /^<iframe src="file:\/\/[^"]+#embed=v1\.[0-9a-f]{8}\.[A-Za-z0-9_-]+" title="Clockwright: comparison of designs"/);
    await b.page.locator("#design-list button").nth(1).click();
    await b.page.selectOption("#embed-which", "one");
    const single = await copied(b.page, "#copy-embed", "<iframe");
    assert.notEqual(single, snippet);

    const host = join(dir, "wiki.html");
    await writeFile(host, `<!doctype html><html><head><meta charset="utf-8"><title>Wiki</title></head><body><h1>Our clocks</h1>\n${snippet}\n${single}\n</body></html>\n`);
    await b.page.goto(pathToFileURL(host).href);
    const frames = () => b.page.frames().filter((f) => f.url().includes("#embed="));
    await b.page.waitForFunction(() => document.querySelectorAll("iframe").length === 2);
    for (let i = 0; i < 100 && frames().length < 2; i++) await b.page.waitForTimeout(100);
    const [all, one] = frames();
    for (const [frame, n] of [
      [all, 4],
      [one, 1],
    ]) {
      await frame.waitForSelector("#embed-plot svg path.total", { timeout: 30_000 });
      const plot = await frame.evaluate(() => {
        const svg = document.querySelector("#embed-plot svg");
        const r = svg.getBoundingClientRect();
        return { w: r.width, h: r.height, curves: [...svg.querySelectorAll("path.total")].map((p) => [p.getAttribute("d").length, p.getBBox().width]) };
      });
      assert.ok(plot.w > 300 && plot.h > 150, JSON.stringify(plot));
      assert.equal(plot.curves.length, n);
      for (const [len, width] of plot.curves) assert.ok(len > 100 && width > 50, JSON.stringify(plot));
      assert.equal(await frame.locator(".embed-table tbody tr").count(), n);
      const fit = await frame.evaluate(() => ({ content: document.documentElement.scrollHeight, frame: window.innerHeight }));
      assert.ok(fit.content <= fit.frame, `the view fits the snippet's frame without scrolling: ${JSON.stringify(fit)}`);
      assert.match(await frame.locator("#embed-view .estimate-note").textContent(), /measured performance decides/);
      // Read-only: no editor, no inputs.
      assert.equal(await frame.locator("#editor-panel").isVisible(), false);
      assert.equal(await frame.locator("#embed-view input, #embed-view select, #embed-view textarea").count(), 0);
      const href = await frame.locator("a.embed-open").getAttribute("href");
      assert.equal(href, frame.url().replace("#embed=", "#share="), "the editor link carries the same workspace");
    }
    assert.equal(await one.locator("#embed-view h1").textContent(), "Fernhollow ion, string of four");
    await b.page.screenshot({ path: join(await artifactsDir(), "embed-host.png"), fullPage: true });
    // The editor link opens the same workspace in the full page.
    const href = await one.locator("a.embed-open").getAttribute("href");
    await b.page.goto(href);
    await b.page.waitForSelector("#comparison tbody tr");
    assert.deepEqual(await b.page.$$eval("#comparison thead .design-name", (e) => e.map((x) => x.textContent)), ["Fernhollow ion, string of four"]);
    const outside = requests.filter((u) => !u.startsWith("file:") && !u.startsWith("data:") && !u.startsWith("blob:") && u !== "about:blank");
    assert.deepEqual(outside, [], "no request left the page");
    // A damaged embed link says so in the frame.
    await b.page.goto("about:blank");
    await b.page.goto(`${PAGE_URL}#embed=v1.00000000.AAAA`);
    await b.page.waitForSelector("#embed-view .link-error");
    assert.match(await b.page.locator("#embed-view .link-error").textContent(), /could not be shown/);
    assert.deepEqual(b.errors, []);
  } finally {
    await b.close();
    await rm(dir, { recursive: true, force: true });
  }
});

test("exports download and parse: design JSON, curve and breakdown CSV equal the engine's numbers, SVG is XML, PNG at print size", async () => {
  const demos = await demoFiles();
  const b = await launch({ acceptDownloads: true });
  try {
    await openPage(b.page);
    const page = b.page;
    const name = await page.locator("#comparison thead th.selected .design-name").textContent();
    const demo = demos.get(name);
    assert.ok(demo, name);
    const engine = await engineEvaluation(demo.file);

    const json = await downloadText(page, "#export-json");
    assert.match(json.name, /^[A-Za-z0-9_-]+\.json$/);
    assert.deepEqual(JSON.parse(json.text), demo.design, "the design file is the design");

    const csv = await downloadText(page, "#export-csv");
    const rows = csv.text.trim().split(/\r\n/);
    const head = rows[0].split(",");
    assert.deepEqual(head, ["tau_s", "total", "laser", "projection", "dick", "mod_total", "free_laser"]);
    assert.equal(rows.length - 1, engine.curve.tau_s.length);
    let compared = 0;
    rows.slice(1).forEach((line, i) => {
      const cells = line.split(",");
      head.forEach((k, j) => {
        const want = engine.curve[k][i];
        if (Number.isFinite(want)) {
          assert.equal(Number(cells[j]), want, `${k}[${i}]`);
          compared++;
        } else assert.equal(cells[j], "", `${k}[${i}] is empty where the engine has no finite value`);
      });
    });
    assert.ok(compared > 200, `${compared} numbers compared`);

    const bd = await downloadText(page, "#export-breakdown");
    const bdRows = bd.text.trim().split(/\r\n/).map((l) => l.split(","));
    assert.deepEqual(bdRows[0], ["tau_s", "total", "laser", "projection", "dick", "dominant"]);
    engine.checkpoints.forEach((c, i) => {
      const r = bdRows[i + 1];
      assert.deepEqual([Number(r[0]), Number(r[1]), Number(r[2]), Number(r[3]), Number(r[4]), r[5]], [c.tau_s, c.total, c.laser, c.projection, c.dick, c.dominant]);
    });

    // SVG: a hostile name in the figure must stay text; the file parses as XML.
    const hostile = `<script>alert(1)</script> & "x" <img src=x onerror=alert(2)>`;
    await page.locator('[data-path="name"]').fill(hostile);
    await page.waitForFunction((t) => document.querySelector("#comparison thead th.selected .design-name")?.textContent === t, hostile);
    const svg = await downloadText(page, "#export-svg");
    assert.equal(svg.name, "clockwright-comparison.svg");
    const parsed = await page.evaluate((text) => {
      const doc = new DOMParser().parseFromString(text, "image/svg+xml");
      return {
        error: doc.querySelector("parsererror")?.textContent ?? null,
        root: doc.documentElement.localName,
        totals: doc.querySelectorAll("path.total").length,
        texts: [...doc.querySelectorAll("text")].map((t) => t.textContent),
        scripts: doc.querySelectorAll("script, img, foreignObject").length,
      };
    }, svg.text);
    assert.equal(parsed.error, null);
    assert.equal(parsed.root, "svg");
    assert.equal(parsed.totals, 4);
    assert.equal(parsed.scripts, 0);
    // Long names are cut to 48 characters in the legend.
    assert.ok(parsed.texts.includes(`${hostile.slice(0, 47)}…`), `the name is a text node of the figure: ${JSON.stringify(parsed.texts)}`);
    const dir = await artifactsDir();
    await writeFile(join(dir, "export-figure.svg"), svg.text);

    const png = await downloadText(page, "#export-png");
    const bytes = await readFile(png.path);
    assert.equal(bytes.subarray(1, 4).toString(), "PNG");
    assert.equal(bytes.readUInt32BE(16), 2880, "width at 3x");
    assert.equal(bytes.readUInt32BE(20), 1800, "height at 3x");
    assert.ok(bytes.length > 50_000, `${bytes.length} bytes`);
    await writeFile(join(dir, "export-figure.png"), bytes);

    // Tables for pages without scripts: the name is escaped in both.
    const md = await copied(page, "#copy-markdown", "| Design |");
    assert.ok(md.includes("&lt;script&gt;alert(1)&lt;/script&gt; &amp; \"x\" &lt;img src=x onerror=alert(2)&gt;"), md);
    assert.ok(!/<script|<img/i.test(md));
    const html = await copied(page, "#copy-html", "<table>");
    const cells = await page.evaluate((text) => {
      const doc = new DOMParser().parseFromString(text, "text/html");
      return { first: doc.querySelector("tbody td, tr:nth-child(2) td")?.textContent, bad: doc.querySelectorAll("script, img").length, rows: doc.querySelectorAll("tr").length };
    }, html);
    assert.equal(cells.bad, 0);
    assert.equal(cells.first, hostile);
    assert.equal(cells.rows, 5);

    // An invalid design is not exported: a message instead of a download.
    let downloads = 0;
    page.on("download", () => downloads++);
    await page.locator('[data-path="atoms.count"]').fill("0");
    await page.click("#export-json");
    await page.waitForFunction(() => document.querySelector(".share-status")?.textContent.includes("Fix the marked fields of the selected design"));
    await page.click("#export-csv");
    await page.waitForFunction(() => document.querySelector(".share-status")?.textContent.includes("no current result"));
    await page.click("#copy-link");
    await page.waitForFunction(() => document.querySelector(".share-status")?.textContent.includes("links and exports carry only valid designs"));
    await page.waitForTimeout(300);
    assert.equal(downloads, 0);
    assert.deepEqual(b.errors, []);
  } finally {
    await b.close();
  }
});

test("the proposal paragraph states the engine's numbers, the time to target, what limits it and the references", async () => {
  const demos = await demoFiles();
  const b = await launch();
  try {
    await openPage(b.page);
    const page = b.page;
    for (const idx of [0, 2]) {
      await page.locator("#design-list button").nth(idx).click();
      const name = await page.locator("#comparison thead th.selected .design-name").textContent();
      const e = await engineEvaluation(demos.get(name).file);
      const text = await copied(page, "#copy-proposal", "References");
      assert.ok(text.includes(`the design “${name}”`), text);
      near(readPlain(/instability of (\S+) at 1 s equivalent/.exec(text)?.[1] ?? ""), e.sigma_1s_equivalent, "1-s-equivalent");
      const list = /σ_y = (.+?) of averaging\./.exec(text)?.[1] ?? "";
      const parts = list.split(", ");
      assert.equal(parts.length, e.checkpoints.length, list);
      e.checkpoints.forEach((c, k) => near(readPlain(parts[k]), c.total, `σ at ${c.tau_s} s`));
      if (e.target.time_s !== null) {
        const m = /reaches the target instability of (\S+) after (\S+) s/.exec(text);
        assert.ok(m, text);
        near(readPlain(m[1]), e.target.target, "target");
        near(readPlain(m[2]), e.target.time_s, "time to target");
      } else assert.match(text, /does not reach the target/);
      const names = { laser: "laser", projection: "quantum projection noise", dick: "Dick effect" };
      const first = e.checkpoints[0].dominant;
      const last = e.checkpoints[e.checkpoints.length - 1].dominant;
      assert.ok(text.includes(first === last ? `limited by ${names[first]}` : `limited by ${names[first]}, at 1 day by ${names[last]}`), text);
      near(readPlain(/projection noise alone would give (\S+) at 1 s/i.exec(text)?.[1] ?? ""), e.projection.sigma_1s, "projection");
      near(readPlain(/the Dick effect (\S+)\./.exec(text)?.[1] ?? ""), e.dick.sigma_1s, "Dick");
      for (const ref of ["IEEE Trans. UFFC 45, 887 (1998)", "Phys. Rev. A 47, 3554 (1993)", "IEEE Std 1139-2008"]) assert.ok(text.includes(ref), ref);
      assert.match(text, /model estimates/);
    }
    assert.deepEqual(b.errors, []);
  } finally {
    await b.close();
  }
});
