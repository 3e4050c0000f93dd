// Share links: the workspace round-trips through a link exactly; bad links give clear errors
// and change nothing; a good link does not overwrite the reader's autosaved workspace.

import { test } from "node:test";
import assert from "node:assert/strict";
import { PAGE_URL, launch, openPage, readTable } from "./helpers.mjs";
import { copied, makeLink, savedWorkspace } from "./share-helpers.mjs";

const HOSTILE = `<img src=x onerror="document.title='pwned'"> A & B "quoted" <b>bold</b>`;

async function openLink(page, fragment) {
  await page.goto("about:blank");
  await page.goto(`${PAGE_URL}#${fragment}`);
  await page.waitForSelector("#comparison tbody tr", { timeout: 30_000 });
}

const stored = (page) => page.evaluate(() => localStorage.getItem("clockwright.workspace"));

test("a share link round-trips every field of the workspace exactly; names with markup stay text", async () => {
  const a = await launch({ acceptDownloads: true });
  const b = await launch({ acceptDownloads: true });
  try {
    await openPage(a.page);
    const page = a.page;
    await page.locator('[data-path="name"]').fill(HOSTILE);
    await page.locator('[data-path="atoms.count"]').fill("3");
    await page.locator("#target-input").fill("3.3e-18");
    await page.locator("#design-list button").nth(2).click();
    await page.waitForFunction(() => document.querySelector("#comparison thead th.selected .design-name")?.textContent === "Fernhollow lattice");
    const original = await savedWorkspace(page);
    assert.equal(original.designs[0].design.name, HOSTILE);
    assert.equal(original.selected, 2);
    const link = await copied(page, "#copy-link", "#share=v1.");
    assert.ok(link.startsWith(`${PAGE_URL}#share=v1.`), link.slice(0, 120));
    assert.match(link.split("#")[1], /^share=v1\.[0-9a-f]{8}\.[A-Za-z0-9_-]+$/);

    // A fresh browser opens the link: the same workspace, every field (deep equality of the file).
    await b.page.goto(link);
    await b.page.waitForSelector("#comparison tbody tr");
    const reread = await savedWorkspace(b.page);
    assert.deepEqual(reread, original);
    assert.match(await b.page.locator("#link-banner").textContent(), /opened from a link/);
    // The hostile name is text in the list, the table and the legend; it made no element.
    const names = await b.page.$$eval("#comparison thead .design-name", (els) => els.map((e) => e.textContent));
    assert.equal(names[0], HOSTILE);
    assert.equal(await b.page.locator("#design-list img, #comparison img, #sigma-legend img, #link-banner img, #report img").count(), 0);
    assert.notEqual(await b.page.title(), "pwned");
    assert.deepEqual(a.errors, []);
    assert.deepEqual(b.errors, []);
  } finally {
    await a.close();
    await b.close();
  }
});

test("a link does not overwrite the autosaved workspace until it is kept; Back restores the reader's own", async () => {
  const b = await launch({ acceptDownloads: true });
  try {
    await openPage(b.page);
    const page = b.page;
    await page.locator('[data-path="atoms.count"]').fill("7");
    await page.waitForFunction(() => localStorage.getItem("clockwright.workspace")?.includes('"count":7'));
    const own = await stored(page);
    const ownDoc = JSON.parse(own);

    // Someone else's workspace: two of the demo designs, renamed.
    const theirs = structuredClone(ownDoc);
    theirs.designs = theirs.designs.slice(1, 3);
    theirs.designs[0].design.name = "Their design";
    theirs.selected = 1;
    theirs.pair.a = 0;
    theirs.pair.b = 1;
    await openLink(page, makeLink(theirs));
    assert.deepEqual((await readTable(page)).names, ["Their design", theirs.designs[1].design.name]);
    assert.equal(await stored(page), own, "opening the link stored nothing");
    await page.locator('[data-path="atoms.count"]').fill("5");
    await page.waitForFunction(() => [...document.querySelectorAll("#comparison tbody td")].length > 0);
    await page.waitForTimeout(100);
    assert.equal(await stored(page), own, "edits of the link's workspace are not autosaved before it is kept");

    await page.click("#link-back");
    await page.waitForFunction((n) => document.querySelectorAll("#comparison thead th.design-col").length === n, ownDoc.designs.length);
    assert.equal(await page.locator("#link-banner").isVisible(), false);
    assert.ok(!page.url().includes("#share="), "the link left the address");
    assert.deepEqual(await savedWorkspace(page), ownDoc, "the reader's own workspace is back, unchanged");

    // Keep: the link's workspace replaces the autosaved one.
    await openLink(page, makeLink(theirs));
    await page.click("#link-keep");
    await page.waitForFunction(() => localStorage.getItem("clockwright.workspace")?.includes("Their design"));
    assert.deepEqual(JSON.parse(await stored(page)), theirs);
    await page.reload();
    await page.waitForSelector("#comparison tbody tr");
    assert.deepEqual((await readTable(page)).names[0], "Their design");
    assert.deepEqual(b.errors, []);
  } finally {
    await b.close();
  }
});

test("tampered, truncated, unknown-version and invalid links give a clear error and change nothing", async () => {
  const b = await launch({ acceptDownloads: true });
  try {
    await openPage(b.page);
    const page = b.page;
    await page.locator('[data-path="atoms.count"]').fill("9");
    await page.waitForFunction(() => localStorage.getItem("clockwright.workspace")?.includes('"count":9'));
    const own = await stored(page);
    const ownDoc = JSON.parse(own);
    const good = makeLink(ownDoc);
    const [, crc, data] = /^share=v1\.([0-9a-f]{8})\.(.*)$/.exec(good);
    const flip = (s, i) => s.slice(0, i) + (s[i] === "A" ? "B" : "A") + s.slice(i + 1);
    const invalid = structuredClone(ownDoc);
    invalid.designs[1].design.atoms.count = 0;
    const future = structuredClone(ownDoc);
    future.workspace_version = 99;
    const cases = [
      ["tampered data", `share=v1.${crc}.${flip(data, Math.floor(data.length / 2))}`, /cut short or altered|altered or cut short|does not decompress/],
      ["truncated", good.slice(0, good.length - 40), /cut short|does not decompress|not whole base64url/],
      ["cut to the version", "share=v1.", /checksum, a dot and base64url/],
      ["altered checksum", `share=v1.${(parseInt(crc, 16) ^ 1).toString(16).padStart(8, "0")}.${data}`, /checksum does not match/],
      ["unknown link version", makeLink(ownDoc, "share", 7), /reads link version 1; version 7 may come from a newer page/],
      ["no version", `share=${data}`, /the version is missing/],
      ["characters outside base64url", `share=v1.${crc}.${data.slice(0, 10)}*${data.slice(11)}`, /base64url/],
      ["invalid design in the workspace", makeLink(invalid), /designs\[1\]\.atoms\.count/],
      ["unknown workspace version", makeLink(future), /workspace_version: 99; this page reads workspace versions 1 and 2/],
      ["not a workspace", makeLink([1, 2, 3]), /\(workspace\)/],
    ];
    for (const [what, fragment, expected] of cases) {
      await openLink(page, fragment);
      const banner = page.locator("#link-banner.bad");
      await banner.waitFor({ timeout: 10_000 });
      const text = await banner.textContent();
      assert.match(text, /could not be opened/, what);
      assert.match(text, expected, `${what}: ${text}`);
      assert.equal(await banner.getAttribute("role"), "alert");
      assert.deepEqual((await readTable(page)).names, ownDoc.designs.map((d) => d.design.name), `${what}: the workspace on screen is the reader's own`);
      assert.equal(await stored(page), own, `${what}: the autosave is untouched`);
    }
    // A link pasted into the open page (only the fragment changes) is read the same way.
    await page.evaluate((f) => (location.hash = f), `share=v1.${crc}.${data.slice(0, -8)}`);
    await page.waitForFunction(() => document.querySelector("#link-banner.bad")?.textContent.includes("could not be opened"));
    await page.evaluate((f) => (location.hash = f), good);
    await page.waitForFunction(() => document.querySelector("#link-banner")?.textContent.includes("opened from a link"));
    assert.deepEqual(await savedWorkspace(page), ownDoc);
    assert.deepEqual(b.errors, []);
  } finally {
    await b.close();
  }
});

test("the largest workspace the caps allow fits a link and opens; a larger one could not be made", async () => {
  // The caps (8 designs, 64 segments, 200 spectrum-table rows, names of 200 characters)
  // bound a workspace far below the 1 MiB a link may carry, so Copy link's refusal of a
  // larger workspace is a safety net no valid workspace reaches. This builds the largest
  // workspace the caps allow and checks that its link opens to the same workspace.
  const a = await launch({ acceptDownloads: true });
  const b = await launch({ acceptDownloads: true });
  try {
    await openPage(a.page);
    const page = a.page;
    const doc = await savedWorkspace(page);
    const rows = Array.from({ length: 200 }, (_, i) => [1e-3 * Math.exp(i * 0.05) * (1 + 1e-13 * i), 1e-30 * Math.exp(-i * 0.03) * (1 + 1e-13 * i)]);
    const base = doc.designs[0];
    doc.designs = Array.from({ length: 8 }, (_, k) => {
      const slot = structuredClone(doc.designs[k % doc.designs.length] ?? base);
      slot.colour = k;
      slot.design.name = `design ${k} `.padEnd(200, "x");
      slot.design.laser.table = { unit: "s_y", points: rows };
      return slot;
    });
    doc.selected = 0;
    const { writeFile } = await import("node:fs/promises");
    const { join } = await import("node:path");
    const { artifactsDir } = await import("./helpers.mjs");
    const file = join(await artifactsDir(), "workspace-largest.json");
    await writeFile(file, JSON.stringify(doc));
    await page.setInputFiles("#load-ws-file", file);
    await page.waitForFunction(() => document.querySelector("#ws-message")?.textContent.includes("Loaded"), null, { timeout: 60_000 });
    const original = await savedWorkspace(page);
    assert.equal(original.designs.length, 8);
    assert.ok(JSON.stringify(original).length < 1024 * 1024 / 4, `${JSON.stringify(original).length} bytes`);
    const link = await copied(page, "#copy-link", "#share=v1.");
    await b.page.goto(link);
    await b.page.waitForSelector("#comparison tbody tr", { timeout: 60_000 });
    assert.deepEqual(await savedWorkspace(b.page), original);
    assert.deepEqual(a.errors, []);
    assert.deepEqual(b.errors, []);
  } finally {
    await a.close();
    await b.close();
  }
});
