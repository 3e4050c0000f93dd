// Shared pieces of the browser tests: paths, the browser, reading numbers off the page.

import { existsSync } from "node:fs";
import { mkdir, mkdtemp, rm } from "node:fs/promises";
import { tmpdir } from "node:os";
import { dirname, join, resolve } from "node:path";
import { fileURLToPath, pathToFileURL } from "node:url";
import { execFile } from "node:child_process";
import { promisify } from "node:util";
import { chromium } from "playwright-core";

const run = promisify(execFile);

export const ROOT = resolve(dirname(fileURLToPath(import.meta.url)), "../..");
export const PAGE = join(ROOT, "www/dist/clockwright.html");
export const PAGE_URL = pathToFileURL(PAGE).href;
export const PKG = join(ROOT, "www/dist/pkg");
export const ARTIFACTS = join(ROOT, "tests/browser/artifacts");
export const CHROMIUM = process.env.CLOCKWRIGHT_CHROMIUM || "/usr/bin/chromium";
export const FLAGS = ["--headless", "--no-sandbox", "--disable-gpu", "--no-first-run", "--disable-background-networking", "--disable-component-update", "--disable-sync"];

/** Fails with a clear message when the page or the browser is missing; never skips. */
export function requireBuilt() {
  if (!existsSync(PAGE)) throw new Error(`${PAGE} is missing: build the page first (./dev page --no-serve)`);
  if (!existsSync(CHROMIUM)) throw new Error(`no browser at ${CHROMIUM}: install Debian's chromium package (or set CLOCKWRIGHT_CHROMIUM)`);
}

/**
 * Starts Chromium with a fresh user-data directory. Returns the context, its first page and
 * a close function that also removes the directory. Pass the same `dataDir` to reopen a profile.
 */
export async function launch(options = {}) {
  requireBuilt();
  const dataDir = options.dataDir ?? (await mkdtemp(join(tmpdir(), "cw-browser-")));
  const { dataDir: _omit, ...rest } = options;
  const context = await chromium.launchPersistentContext(dataDir, {
    executablePath: CHROMIUM,
    headless: true,
    args: FLAGS,
    viewport: { width: 1280, height: 800 },
    ...rest,
  });
  const page = context.pages()[0] ?? (await context.newPage());
  const errors = [];
  page.on("pageerror", (e) => errors.push(`pageerror: ${e.message}`));
  page.on("console", (m) => {
    if (m.type() === "error") errors.push(`console: ${m.text()}`);
  });
  return {
    context,
    page,
    errors,
    dataDir,
    async close(keepData = false) {
      await context.close();
      if (!keepData) await rm(dataDir, { recursive: true, force: true });
    },
  };
}

/** Opens the page and waits until the comparison table has been drawn. */
export async function openPage(page) {
  await page.goto(PAGE_URL);
  await page.waitForSelector("#comparison tbody tr", { timeout: 30_000 });
}

/** Reads "2.35×10−17" (U+2212 minus, optional trailing marks) as a number and its shown precision. */
export function readShown(text) {
  const t = text.replace(/\u2212/g, "-");
  const m = /(-?\d+(?:\.(\d+))?)(?:×10(-?\d+))?/.exec(t);
  if (!m) return null;
  const mantissa = Number(m[1]);
  const exp = m[3] !== undefined ? Number(m[3]) : 0;
  const decimals = m[2] ? m[2].length : 0;
  return { value: mantissa * 10 ** exp, halfStep: 0.5 * 10 ** (exp - decimals) };
}

/** The comparison table as {names, rows: {rowId: [cell text per design]}}. */
export async function readTable(page) {
  return page.evaluate(() => {
    const names = [...document.querySelectorAll("#comparison thead th.design-col .design-name")].map((e) => e.textContent);
    const rows = {};
    for (const tr of document.querySelectorAll("#comparison tbody tr")) {
      rows[tr.dataset.row] = [...tr.querySelectorAll("td")].map((td) => td.textContent);
    }
    return { names, rows };
  });
}

/** The `d` of every total curve in the Allan-deviation plot, by design name. */
export async function readCurves(page) {
  return page.evaluate(() => {
    const out = {};
    for (const g of document.querySelectorAll("#sigma-plot g.design")) out[g.dataset.name] = g.querySelector("path.total")?.getAttribute("d") ?? "";
    return out;
  });
}

/** Number of cw-update measures taken so far. */
export async function updateCount(page) {
  return page.evaluate(() => performance.getEntriesByName("cw-update").length);
}

/** Waits until the page has finished at least `n` updates. */
export async function waitForUpdates(page, n) {
  await page.waitForFunction((k) => performance.getEntriesByName("cw-update").length >= k, n, { timeout: 30_000 });
}

/** Runs the engine's own headless entry on a design file and returns the Evaluation. */
export async function engineEvaluation(designFile) {
  const { stdout } = await run("cargo", ["run", "--release", "-q", "-p", "clockwright-core", "--example", "evaluate", "--", designFile], {
    cwd: ROOT,
    maxBuffer: 64 * 1024 * 1024,
  });
  return JSON.parse(stdout);
}

export async function artifactsDir() {
  await mkdir(ARTIFACTS, { recursive: true });
  return ARTIFACTS;
}

export function median(xs) {
  const s = [...xs].sort((a, b) => a - b);
  const n = s.length;
  return n === 0 ? NaN : n % 2 ? s[(n - 1) / 2] : (s[n / 2 - 1] + s[n / 2]) / 2;
}
