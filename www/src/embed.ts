// The embed view: the same page opened with "#embed=v1.…" shows a compact, read-only view of
// the linked workspace (its designs' Allan-deviation curves, a small table, the model-estimate
// note and a link back to the full editor with the same workspace), for an <iframe> on a wiki.
// Nothing is stored: the embed never touches the reader's own autosaved workspace.

import { clear, h, rich } from "./dom";
import { escapeXml } from "./exports";
import { engine, problemsOf, problemText, type Problem } from "./engine";
import { appendDuration, appendNumber, tauName } from "./format";
import { drawLegend, drawSigma, watchWidth } from "./plots";
import { readLink } from "./share";
import type { Slot } from "./workspace";

/** The page's address without its fragment. */
export function pageAddress(loc: Location): string {
  return loc.href.split("#")[0];
}

/** An <iframe> snippet that embeds `address` (the page with an "#embed=…" fragment) of `designs` designs; every value escaped. */
export function embedSnippet(address: string, title: string, designs: number): string {
  const esc = escapeXml;
  // Tall enough for the plot, its key, a table row per design and the note without scrolling.
  const height = 700 + 60 * Math.max(1, designs);
  return `<iframe src="${esc(address)}" title="${esc(title)}" width="760" height="${height}" style="border:0;max-width:100%" loading="lazy" referrerpolicy="no-referrer"></iframe>`;
}

/**
 * Replaces the page's content with the embed view of the link in `hash`. A bad link shows its
 * problems instead. Returns once drawn.
 */
export async function mountEmbed(doc: Document, hash: string): Promise<void> {
  doc.documentElement.classList.add("embed-mode");
  const root = h("div", { id: "embed-view", class: "embed" });
  doc.body.prepend(root);
  const r = await readLink(hash);
  if (!("state" in r)) {
    showProblems(root, "This embedded view could not be shown: its link is damaged or holds an invalid workspace.", r.problems);
    return;
  }
  const slots = r.state.slots;
  const target = r.state.target;
  const failed: Problem[] = [];
  for (const s of slots) {
    try {
      s.evaluation = engine.evaluate(s.design, { target_instability: target });
    } catch (err) {
      for (const p of problemsOf(err)) failed.push({ ...p, path: `${s.design.name}: ${p.path}` });
    }
  }
  const shown = slots.filter((s) => s.evaluation);
  const title = shown.length === 1 ? shown[0].design.name || "(unnamed)" : "Comparison of designs";
  const editor = h("a", { class: "embed-open", text: "Open in the full editor ↗", attrs: { href: `${pageAddress(doc.location)}#share=${hash.replace(/^#?embed=/, "")}`, target: "_blank", rel: "noopener noreferrer" } });
  const head = h("div", { class: "embed-head" }, h("h1", { text: title }), editor);
  const plot = h("div", { id: "embed-plot", class: "plot" });
  // A comparison draws the totals only: its key needs no line styles.
  const legend = h("div", { class: shown.length === 1 ? "legend" : "legend totals-only" });
  const table = h("table", { class: "comparison embed-table" });
  const note = h("p", { class: "estimate-note", attrs: { role: "note" } }, h("strong", { text: "Model estimate" }), " (Clockwright): projections rest on the model's assumptions and the numbers entered; measured performance decides.");
  root.append(head, plot, legend, h("div", { class: "table-wrap" }, table), note);
  if (failed.length > 0) showProblems(root, "Some designs could not be evaluated:", failed);
  const draw = () =>
    drawSigma(
      plot,
      shown.map((s) => ({ uid: s.uid, colour: s.colour, name: s.design.name, selected: shown.length === 1, evaluation: s.evaluation! })),
      target,
      shown.length === 1,
    );
  watchWidth(plot, draw);
  draw();
  drawLegend(
    legend,
    shown.map((s) => ({ colour: s.colour, name: s.design.name || "(unnamed)", stale: false })),
  );
  smallTable(table, shown, target);
}

/** Design, sigma_y at the checkpoints, the time to the target. */
function smallTable(table: HTMLTableElement, slots: Slot[], target: number): void {
  clear(table);
  const taus = slots[0]?.evaluation?.checkpoints.map((c) => c.tau_s) ?? [];
  const head = h("tr", {}, h("th", { attrs: { scope: "col" }, text: "Design" }));
  for (const t of taus) head.append(rich(h("th", { attrs: { scope: "col" } }), `σ_y(${tauName(t)})`));
  const th = h("th", { attrs: { scope: "col" } }, "Time to ");
  appendNumber(th, target, 2);
  head.append(th);
  const body = h("tbody");
  for (const s of slots) {
    const e = s.evaluation!;
    const tr = h("tr", {}, h("th", { attrs: { scope: "row" }, class: `design-col cw-c${s.colour}` }, h("span", { class: "design-name", text: s.design.name || "(unnamed)" })));
    for (const c of e.checkpoints) {
      const td = h("td");
      appendNumber(td, c.total, 3);
      tr.append(td);
    }
    const td = h("td");
    if (e.target.time_s === null) td.append("not reached");
    else appendDuration(td, e.target.time_s);
    tr.append(td);
    body.append(tr);
  }
  table.append(h("thead", {}, head), body);
}

function showProblems(root: HTMLElement, text: string, problems: Problem[]): void {
  root.append(h("div", { class: "link-error", attrs: { role: "alert" } }, h("p", { text }), h("ul", {}, ...problems.slice(0, 12).map((p) => h("li", { text: problemText(p) })))));
}
