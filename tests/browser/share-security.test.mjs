// A crafted share link whose design name carries <script>, <img onerror> and fetch() runs
// nothing, in the editor and in the embed view; the CSP blocks scripts and fetches injected
// into the page; no request leaves the page (CDP Network.requestWillBeSent).

import { test } from "node:test";
import assert from "node:assert/strict";
import { createServer } from "node:http";
import { PAGE_URL, launch, openPage } from "./helpers.mjs";
import { makeLink, savedWorkspace } from "./share-helpers.mjs";

// A local server that counts every connection: the trap the crafted strings aim at.
const hits = [];
const server = createServer((req, res) => {
  hits.push(req.url);
  res.end("x");
});
await new Promise((r) => server.listen(0, "127.0.0.1", r));
const TRAP = `http://127.0.0.1:${server.address().port}`;
const NAME = `<script>window.__pwned=1;fetch("${TRAP}/s")</script><img src="${TRAP}/i" onerror="window.__pwned=2;fetch('${TRAP}/e')"><svg onload="window.__pwned=3">`;

async function watch(b) {
  const cdp = await b.context.newCDPSession(b.page);
  // Chromium shows a request the CSP blocked to DevTools too, then fails it with the reason
  // "csp"; what would have left the page is what was not blocked.
  const sent = new Map();
  const blocked = new Set();
  await cdp.send("Network.enable");
  cdp.on("Network.requestWillBeSent", (e) => sent.set(e.requestId, e.request.url));
  cdp.on("Network.loadingFailed", (e) => {
    if (e.blockedReason === "csp") blocked.add(e.requestId);
  });
  const requests = {
    filter: (f) => [...sent].filter(([id]) => !blocked.has(id)).map(([, url]) => url).filter(f),
    blocked: () => [...blocked].map((id) => sent.get(id)),
  };
  // Runs before the page's own script in every document, whatever the CSP says (CDP).
  await b.page.addInitScript(() => {
    window.__violations = [];
    document.addEventListener("securitypolicyviolation", (e) => window.__violations.push(`${e.violatedDirective} ${e.blockedURI}`));
  });
  return requests;
}

const outside = (requests) => requests.filter((u) => !u.startsWith("file:") && !u.startsWith("data:") && !u.startsWith("blob:") && u !== "about:blank");

test("a crafted link runs nothing it carries, in the editor and in the embed view, and nothing leaves the page", async () => {
  const b = await launch({ acceptDownloads: true });
  try {
    const requests = await watch(b);
    await openPage(b.page);
    const page = b.page;
    const doc = await savedWorkspace(page);
    doc.designs[0].design.name = NAME;
    doc.designs[1].design.laser.label = NAME;
    doc.designs[1].design.transition.label = NAME;

    for (const kind of ["share", "embed"]) {
      await page.goto("about:blank");
      await page.goto(`${PAGE_URL}#${makeLink(doc, kind)}`);
      await page.waitForSelector(kind === "share" ? "#comparison tbody tr" : "#embed-plot svg path.total", { timeout: 30_000 });
      await page.waitForTimeout(300);
      const seen = await page.evaluate((name) => ({
        pwned: window.__pwned ?? null,
        foreign: document.querySelectorAll("img, iframe, [onload], [onerror]").length + [...document.scripts].filter((x) => x.textContent.includes("__pwned")).length,
        asText: [...document.querySelectorAll(".design-name, #embed-view h1")].some((e) => e.textContent === name),
      }), NAME);
      assert.equal(seen.pwned, null, `${kind}: nothing ran`);
      assert.equal(seen.foreign, 0, `${kind}: the name made no element`);
      assert.ok(seen.asText, `${kind}: the name is shown as text`);
      if (kind === "share") {
        // Everything that shows names: the report, the proposal paragraph, the tables.
        await page.waitForSelector("#report .report-design", { state: "attached" });
        await page.click("#copy-proposal");
        await page.click("#copy-html");
        await page.waitForTimeout(200);
        assert.equal(await page.evaluate(() => window.__pwned ?? null), null);
        assert.equal(await page.locator("img, iframe, [onerror], [onload]").count(), 0);
      }
    }
    assert.deepEqual(outside(requests), [], "no request left the page");

    // The CSP blocks what an attacker would inject if markup ever got in: an inline script, a
    // fetch, an image from the network.
    const blocked = await page.evaluate(async (trap) => {
      const s = document.createElement("script");
      s.textContent = `window.__pwned = "inline"; fetch("${trap}/inline")`;
      document.body.append(s);
      const img = document.createElement("img");
      img.src = `${trap}/pixel.png`;
      document.body.append(img);
      let fetched = "refused";
      try {
        await fetch(`${trap}/fetch`);
        fetched = "fetched";
      } catch {
        fetched = "refused";
      }
      await new Promise((r) => setTimeout(r, 200));
      return { pwned: window.__pwned ?? null, fetched, violations: window.__violations };
    }, TRAP);
    assert.equal(blocked.pwned, null, "the injected inline script did not run");
    assert.equal(blocked.fetched, "refused");
    const v = blocked.violations.join("\n");
    assert.match(v, /script-src/, v);
    assert.match(v, /connect-src .*\/fetch/, v);
    assert.match(v, /img-src .*pixel\.png/, v);
    assert.deepEqual(outside(requests), [], "no request left the page");
    assert.ok(requests.blocked().some((u) => u.endsWith("/pixel.png")), `the CSP blocked the image: ${requests.blocked()}`);
    assert.deepEqual(hits, [], "the trap server saw no request");
    assert.deepEqual(b.errors.filter((e) => !/Content Security Policy|Refused to|Failed to fetch/.test(e)), []);
  } finally {
    await b.close();
    server.close();
  }
});
