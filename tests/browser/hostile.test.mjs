// The hostile-input corpus (tests/fuzz/hostile/, expectations in expect.json) fed to the page
// through its own file inputs: workspace open, spectrum CSV (editor) and measured CSV
// (simulation card). Each file must give its expected answer: an error shown on the page, or
// a clean result with any markup shown as text. Nothing may execute (no dialog, no element
// made from the input, no console error), the last good result stays on screen and the
// autosaved workspace is not changed by a refused file. The same files are checked natively
// in tools/fuzz/tests/hostile.rs.

import { test } from "node:test";
import assert from "node:assert/strict";
import { readFile, writeFile } from "node:fs/promises";
import { join } from "node:path";
import { ROOT, artifactsDir, launch, openPage, readTable } from "./helpers.mjs";

const HOSTILE = join(ROOT, "tests/fuzz/hostile");
const EXPECT = JSON.parse(await readFile(join(HOSTILE, "expect.json"), "utf8"));
const FIXTURES = join(ROOT, "tests/browser/fixtures");
const AUTOSAVE = "clockwright.workspace";

/** What must not change when a file is refused, and what shows that nothing ran. */
async function snapshot(page) {
  return page.evaluate((key) => ({
    saved: localStorage.getItem(key),
    spectrum: document.querySelector(".table-status")?.textContent ?? null,
    measuredRows: [...document.querySelectorAll("#sim-measured-table tbody tr")].map((r) => r.textContent),
    // Elements an input could have injected: the page itself makes none of these.
    injected: document.querySelectorAll("img, iframe, object, embed, [onerror], [onload], [onclick], a[href^='javascript:']").length,
    scripts: document.querySelectorAll("script").length,
  }), AUTOSAVE);
}

test("hostile files get a clear error or a clean result through the page's own file inputs, and nothing they hold runs", async () => {
  const b = await launch();
  const dialogs = [];
  b.page.on("dialog", async (d) => {
    dialogs.push(d.message());
    await d.dismiss();
  });
  const page = b.page;
  try {
    await openPage(page);
    const dir = await artifactsDir();
    const start = await snapshot(page);

    // ----- Workspace files (Open workspace) --------------------------------------------------
    const wsMessage = () => page.locator("#ws-message").textContent();
    const openWorkspace = async (file, name) => {
      const before = await wsMessage();
      await page.setInputFiles("#load-ws-file", file);
      await page.waitForFunction(
        ([prev, n]) => {
          const t = document.getElementById("ws-message")?.textContent ?? "";
          return t !== prev && t.includes(n);
        },
        [before, name],
        { timeout: 30_000 },
      );
      return wsMessage();
    };
    const big = join(dir, "hostile-oversized.json");
    await writeFile(big, Buffer.concat([Buffer.from('{"workspace_version":1,"designs":[],"pad":"'), Buffer.alloc(6 * 1024 * 1024, 0x61), Buffer.from('"}')]));
    const workspaceCases = [...Object.entries(EXPECT.workspace).map(([n, want]) => [join(HOSTILE, "workspace", n), n, want]), [big, "hostile-oversized.json", "error"]];
    for (const [file, name, want] of workspaceCases) {
      const before = await snapshot(page);
      const table = await readTable(page);
      const msg = await openWorkspace(file, name);
      const after = await snapshot(page);
      if (want === "error") {
        assert.match(msg, /was not loaded|is not JSON|at most/, `${name}: ${msg}`);
        assert.ok(!/Loaded /.test(msg), `${name}: ${msg}`);
        assert.deepEqual(await readTable(page), table, `${name}: the last good result stays`);
        assert.equal(after.saved, before.saved, `${name}: the autosave is untouched`);
      } else {
        assert.match(msg, /Loaded /, `${name}: ${msg}`);
        const saved = JSON.parse(after.saved);
        assert.equal(saved.workspace_version, 2, `${name}: the autosave holds the loaded workspace`);
      }
      assert.equal(after.injected, start.injected, `${name}: no element made from the input`);
      assert.equal(after.scripts, start.scripts, `${name}: no script element added`);
    }
    // Markup in names is shown as text: the loaded file's name is the header's text.
    await openWorkspace(join(HOSTILE, "workspace", "markup-in-names.json"), "markup-in-names.json");
    const names = (await readTable(page)).names;
    assert.ok(names.includes("<img src=x onerror=alert(1)><script>alert(2)</script>"), JSON.stringify(names));
    const stored = JSON.parse(await page.evaluate((k) => localStorage.getItem(k), AUTOSAVE));
    assert.equal(stored.designs[0].design.name, "<img src=x onerror=alert(1)><script>alert(2)</script>");

    // ----- Spectrum CSV (editor of the selected design) ----------------------------------------
    const csvInput = '[data-focus-key="laser.table.file"]';
    const groupError = () => page.locator('[data-group="laser.table"] .group-error').textContent();
    const longSpectrum = join(dir, "hostile-spectrum-10MB-line.csv");
    await writeFile(longSpectrum, "f_hz,l_dbc\n" + "1,".repeat(5_000_000) + "\n");
    const spectrumCases = [...Object.entries(EXPECT.spectrum).map(([n, want]) => [join(HOSTILE, "spectrum", n), n, want]), [longSpectrum, "hostile-spectrum-10MB-line.csv", "error"]];
    for (const [file, name, want] of spectrumCases) {
      const before = await snapshot(page);
      const table = await readTable(page);
      await page.setInputFiles(csvInput, file);
      if (want === "error") {
        await page.waitForFunction((n) => (document.querySelector('[data-group="laser.table"] .group-error')?.textContent ?? "").includes(n), name, { timeout: 30_000 });
        const err = await groupError();
        assert.match(err, /line \d+|bytes|table|empty/, `${name}: ${err}`);
        const after = await snapshot(page);
        assert.equal(after.spectrum, before.spectrum, `${name}: the table status is unchanged`);
        assert.equal(after.saved, before.saved, `${name}: the autosave is untouched`);
        assert.deepEqual(await readTable(page), table, `${name}: the last good result stays`);
      } else {
        await page.waitForFunction(() => /Table: \d+ rows/.test(document.querySelector(".table-status")?.textContent ?? ""), null, { timeout: 30_000 });
        // Back to the design's own noise model for the next file.
        await page.click('button[data-focus-key="laser.table.remove"]');
        await page.waitForFunction(() => /No spectrum table/.test(document.querySelector(".table-status")?.textContent ?? ""), null, { timeout: 30_000 });
      }
      const after = await snapshot(page);
      assert.equal(after.injected, start.injected, `${name}: no element made from the input`);
    }

    // ----- Measured CSV (simulation card) ---------------------------------------------------
    const status = () => page.locator("#sim-file-status").textContent();
    await page.setInputFiles("#sim-file", join(FIXTURES, "measured-gap.csv"));
    await page.waitForSelector("#sim-measured-table tbody tr", { timeout: 30_000 });
    const longMeasured = join(dir, "hostile-measured-10MB-line.csv");
    await writeFile(longMeasured, "# tau0_s: 1\ny\n" + "1,".repeat(5_000_000) + "\n");
    const measuredCases = [...Object.entries(EXPECT.measured).map(([n, want]) => [join(HOSTILE, "measured", n), n, want]), [longMeasured, "hostile-measured-10MB-line.csv", "error"]];
    for (const [file, name, want] of measuredCases) {
      const before = await snapshot(page);
      await page.setInputFiles("#sim-file", file);
      await page.waitForFunction(
        (n) => {
          const t = document.getElementById("sim-file-status")?.textContent ?? "";
          return t.startsWith(n) && !t.startsWith(`Reading`);
        },
        name,
        { timeout: 60_000 },
      );
      const text = await status();
      const after = await snapshot(page);
      if (want === "error") {
        assert.match(text, /was not imported; the last result stays on screen/, `${name}: ${text}`);
        assert.deepEqual(after.measuredRows, before.measuredRows, `${name}: the last good curve stays`);
      } else {
        assert.match(text, /samples of/, `${name}: ${text}`);
      }
      assert.equal(after.saved, before.saved, `${name}: measured data never touches the autosave`);
      assert.equal(after.injected, start.injected, `${name}: no element made from the input`);
    }

    assert.deepEqual(dialogs, [], "no dialog opened");
    assert.deepEqual(b.errors, [], "no page or console error");
  } finally {
    await b.close();
  }
});
