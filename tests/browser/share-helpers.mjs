// Links made outside the page, with Node's own zlib (an encoder independent of the page's
// CompressionStream code), and the workspace of the demo designs read from core/designs.

import { deflateRawSync, crc32 } from "node:zlib";
import { readFile, readdir } from "node:fs/promises";
import { join } from "node:path";
import { ROOT } from "./helpers.mjs";

/** The fragment body ("share=v1.<crc>.<data>") of a link to `doc`. */
export function makeLink(doc, kind = "share", version = 1) {
  const json = Buffer.from(JSON.stringify(doc), "utf8");
  return `${kind}=v${version}.${crc32(json).toString(16).padStart(8, "0")}.${deflateRawSync(json).toString("base64url")}`;
}

/** The demo designs by name, read from core/designs. */
export async function demoFiles() {
  const dir = join(ROOT, "core/designs");
  const out = new Map();
  for (const f of (await readdir(dir)).filter((f) => f.endsWith(".json") && !f.startsWith("pair-")).sort()) {
    const design = JSON.parse(await readFile(join(dir, f), "utf8"));
    out.set(design.name, { file: join(dir, f), design });
  }
  return out;
}

/** The workspace file the page saves ("Save workspace…"), parsed. */
export async function savedWorkspace(page) {
  const [download] = await Promise.all([page.waitForEvent("download"), page.click("#save-ws")]);
  return JSON.parse(await readFile(await download.path(), "utf8"));
}

/** Clicks `selector` and returns the text of the download it starts. */
export async function downloadText(page, selector) {
  const [download] = await Promise.all([page.waitForEvent("download"), page.click(selector)]);
  return { name: download.suggestedFilename(), text: await readFile(await download.path(), "utf8"), path: await download.path() };
}

/** Clicks a copy button and returns the text it put in the output box. */
export async function copied(page, selector, mustInclude) {
  await page.evaluate(() => (document.querySelector("#share-output").value = ""));
  await page.click(selector);
  await page.waitForFunction((s) => document.querySelector("#share-output").value.includes(s), mustInclude);
  return page.inputValue("#share-output");
}
