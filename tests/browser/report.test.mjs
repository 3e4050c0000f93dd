// The printable design-review report: print to PDF at A4 and Letter (Page.printToPDF through
// Playwright), and in print emulation at each paper's printable width nothing is wider than
// the page (no clipped plot); screenshots of the print layout go to tests/browser/artifacts.

import { test } from "node:test";
import assert from "node:assert/strict";
import { writeFile } from "node:fs/promises";
import { join } from "node:path";
import { artifactsDir, launch, openPage } from "./helpers.mjs";

// Paper widths at 96 CSS px per inch, less the default PDF margins of 0.4 inch each side
// (Chromium's printToPDF defaults, from memory): what a printed line may take.
const PAPERS = [
  { format: "A4", width: Math.floor((210 / 25.4) * 96 - 2 * 0.4 * 96), height: Math.floor((297 / 25.4) * 96) },
  { format: "Letter", width: Math.floor(8.5 * 96 - 2 * 0.4 * 96), height: Math.floor(11 * 96) },
];

test("the report prints at A4 and Letter with every plot and table inside the page width", async () => {
  const dir = await artifactsDir();
  const b = await launch();
  try {
    await openPage(b.page);
    const page = b.page;
    // The report follows the workspace.
    await page.waitForSelector("#report .report-design", { state: "attached", timeout: 10_000 });
    assert.equal(await page.locator("#report").isVisible(), false, "the report is for print only");
    const cdp = await b.context.newCDPSession(page);
    for (const paper of PAPERS) {
      await page.setViewportSize({ width: paper.width, height: paper.height });
      await cdp.send("Emulation.setEmulatedMedia", { media: "print" });
      await page.waitForTimeout(300);
      const layout = await page.evaluate(() => {
        const vw = document.documentElement.clientWidth;
        const boxes = [];
        for (const el of document.querySelectorAll(".plot svg, #report table, #comparison, .card, #report .report-design")) {
          const r = el.getBoundingClientRect();
          const style = getComputedStyle(el);
          if (style.display === "none" || r.width === 0) continue;
          boxes.push({ what: el.id || el.className.baseVal || el.className || el.tagName, left: r.left, right: r.right });
        }
        return {
          vw,
          scroll: document.documentElement.scrollWidth,
          boxes,
          report: getComputedStyle(document.querySelector("#report")).display,
          editor: getComputedStyle(document.querySelector("#editor-panel")).display,
          designs: document.querySelectorAll("#report .report-design").length,
          refs: [...document.querySelectorAll("#report .report-refs li")].map((li) => li.textContent),
          headings: [...document.querySelectorAll("#report h3, #report h4")].map((x) => x.textContent),
          svgs: [...document.querySelectorAll(".plot svg")].filter((s) => s.getBoundingClientRect().width > 0).length,
        };
      });
      assert.equal(layout.report, "block", `${paper.format}: the report prints`);
      assert.equal(layout.editor, "none", `${paper.format}: the editor does not`);
      assert.equal(layout.designs, 4);
      assert.ok(layout.svgs >= 3, `${paper.format}: plots print (${layout.svgs})`);
      assert.ok(layout.scroll <= layout.vw, `${paper.format}: the printed page is ${layout.scroll} px wide, the paper ${layout.vw}`);
      for (const bx of layout.boxes) assert.ok(bx.left >= -0.5 && bx.right <= layout.vw + 0.5, `${paper.format}: ${bx.what} spans ${bx.left}..${bx.right} of ${layout.vw}`);
      for (const h of ["Assumptions", "Dominant limits", "Methods and references"]) assert.ok(layout.headings.includes(h), `${h} in ${layout.headings}`);
      for (const ref of ["IEEE Trans. UFFC 45, 887 (1998)", "Phys. Rev. A 47, 3554 (1993)", "IEEE Std 1139-2008", "IEEE Trans. Instrum. Meas. IM-20, 105 (1971)"]) {
        assert.ok(layout.refs.some((r) => r.startsWith(ref)), `${ref} in the references`);
      }
      await page.screenshot({ path: join(dir, `report-print-${paper.format}.png`), fullPage: true });
      await cdp.send("Emulation.setEmulatedMedia", { media: "" });

      const pdf = await page.pdf({ format: paper.format, printBackground: true });
      assert.equal(pdf.subarray(0, 5).toString(), "%PDF-");
      const pages = (pdf.toString("latin1").match(/\/Type\s*\/Page[^s]/g) ?? []).length;
      assert.ok(pages >= 3, `${paper.format}: ${pages} pages`);
      await writeFile(join(dir, `report-${paper.format}.pdf`), pdf);
    }
    assert.deepEqual(b.errors, []);
  } finally {
    await b.close();
  }
});
