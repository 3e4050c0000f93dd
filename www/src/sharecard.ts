// The "Share and export" card: a link to the workspace, an embed snippet, downloads (design
// JSON, result CSV, SVG and PNG figures, Markdown and HTML tables), the proposal paragraph and
// the printable report. Text for the clipboard is also shown in a read-only box, so it can be
// copied by hand where the browser refuses the clipboard.

import { h } from "./dom";
import { embedSnippet, pageAddress } from "./embed";
import { breakdownCsv, curveCsv, designJson, download, fileStem, htmlTable, markdownTable, sigmaSvg, svgToPng, type Result } from "./exports";
import { drawReport, proposalText } from "./report";
import { encodeLink, LinkError } from "./share";
import { isValid, pairDoc, toDoc, type Slot, type State, type WorkspaceDoc } from "./workspace";

export interface ShareHooks {
  state: () => State;
  selected: () => Slot | null;
  /** Whether the plot shows the breakdown of every design. */
  breakdownAll: () => boolean;
}

/** A design with a current result (valid as edited). */
function current(s: Slot): s is Slot & { evaluation: NonNullable<Slot["evaluation"]> } {
  return s.evaluation !== null && s.problems.length === 0 && s.drafts.size === 0;
}

function result(s: Slot, selected = false): Result {
  return { name: s.design.name, colour: s.colour, design: s.design, evaluation: s.evaluation!, selected };
}

/** The workspace reduced to one design (the pair then compares it with itself), for an embed of one design. */
export function singleDesignDoc(state: State, slot: Slot): WorkspaceDoc {
  const pair = { ...pairDoc(state), a: 0, b: 0 };
  return { workspace_version: toDoc(state).workspace_version, target_instability: state.target, selected: 0, designs: [{ colour: slot.colour, design: slot.design }], pair };
}

export function mountShareCard(root: HTMLElement, report: HTMLElement, hooks: ShareHooks): { refresh(): void } {
  const status = h("p", { class: "share-status", attrs: { role: "status", "aria-live": "polite" } });
  const out = h("textarea", { id: "share-output", class: "share-output", attrs: { readonly: "", rows: "4", spellcheck: "false", "aria-label": "Text to copy (link, snippet, table or paragraph)" } });
  const say = (t: string) => (status.textContent = t);
  const button = (id: string, text: string, run: () => void | Promise<void>) => {
    const b = h("button", { id, text, attrs: { type: "button" } });
    b.addEventListener("click", () => {
      Promise.resolve()
        .then(run)
        .catch((err: unknown) => say(err instanceof LinkError ? `No link: ${err.problems.map((p) => p.allowed).join("; ")}.` : `That did not work: ${err instanceof Error ? err.message : String(err)}`));
    });
    return b;
  };
  const copy = async (text: string, what: string) => {
    out.value = text;
    try {
      await navigator.clipboard.writeText(text);
      say(`Copied the ${what} to the clipboard (it is also in the box below).`);
    } catch {
      out.focus();
      out.select();
      say(`The browser did not allow copying: the ${what} is selected in the box below; copy it with Ctrl+C.`);
    }
  };
  const needValid = (): boolean => {
    if (isValid(hooks.state())) return true;
    say("Fix the marked fields first: links and exports carry only valid designs.");
    return false;
  };
  const selectedResult = (): Slot | null => {
    const s = hooks.selected();
    if (!s || !current(s)) {
      say("The selected design has no current result: fix its marked fields first.");
      return null;
    }
    return s;
  };
  const allResults = (): Result[] => hooks.state().slots.filter(current).map((s) => result(s));
  const embedWhich = h("select", { id: "embed-which" }, h("option", { text: "all designs (comparison)", attrs: { value: "all" } }), h("option", { text: "the selected design", attrs: { value: "one" } }));

  const figure = (): { svg: string; name: string } | null => {
    const sel = hooks.selected();
    // The selected design is drawn last, on top, as on the page.
    const results = hooks
      .state()
      .slots.filter(current)
      .sort((a, b) => Number(a === sel) - Number(b === sel))
      .map((s) => result(s, s === sel));
    if (results.length === 0) {
      say("No design has a current result to draw.");
      return null;
    }
    return { svg: sigmaSvg(results, hooks.state().target, hooks.breakdownAll()), name: results.length === 1 ? fileStem(results[0].name) : "clockwright-comparison" };
  };

  root.append(
    h("p", { class: "hint", text: "The link holds the whole workspace (in the part after #, which browsers do not send anywhere). Exports are made in this page." }),
    h(
      "div",
      { class: "row-buttons" },
      button("copy-link", "Copy link", async () => {
        if (!needValid()) return;
        await copy(`${pageAddress(location)}#${await encodeLink(toDoc(hooks.state()), "share")}`, "link");
      }),
    ),
    h(
      "div",
      { class: "row-buttons" },
      h("label", { attrs: { for: "embed-which" }, text: "Embed" }),
      embedWhich,
      button("copy-embed", "Copy embed snippet", async () => {
        if (!needValid()) return;
        const st = hooks.state();
        const one = embedWhich.value === "one" ? hooks.selected() : null;
        const doc = one ? singleDesignDoc(st, one) : toDoc(st);
        const title = one ? `Clockwright: ${one.design.name}` : "Clockwright: comparison of designs";
        await copy(embedSnippet(`${pageAddress(location)}#${await encodeLink(doc, "embed")}`, title, doc.designs.length), "embed snippet");
      }),
    ),
    h(
      "div",
      { class: "row-buttons" },
      button("export-json", "Design JSON", () => {
        const s = hooks.selected();
        if (!s) return;
        if (s.problems.length > 0 || s.drafts.size > 0) {
          say("Fix the marked fields of the selected design first: a design file holds only a valid design.");
          return;
        }
        download(`${fileStem(s.design.name)}.json`, designJson(s.design), "application/json");
        say(`Saved ${fileStem(s.design.name)}.json.`);
      }),
      button("export-csv", "Curve CSV", () => {
        const s = selectedResult();
        if (!s) return;
        download(`${fileStem(s.design.name)}-curve.csv`, curveCsv(s.evaluation!), "text/csv");
        say(`Saved ${fileStem(s.design.name)}-curve.csv: σ_y(τ) in total and by mechanism.`);
      }),
      button("export-breakdown", "Breakdown CSV", () => {
        const s = selectedResult();
        if (!s) return;
        download(`${fileStem(s.design.name)}-breakdown.csv`, breakdownCsv(s.evaluation!), "text/csv");
        say(`Saved ${fileStem(s.design.name)}-breakdown.csv.`);
      }),
    ),
    h(
      "div",
      { class: "row-buttons" },
      button("export-svg", "SVG figure", () => {
        const f = figure();
        if (!f) return;
        download(`${f.name}.svg`, f.svg, "image/svg+xml");
        say(`Saved ${f.name}.svg.`);
      }),
      button("export-png", "PNG figure", async () => {
        const f = figure();
        if (!f) return;
        say("Drawing the PNG…");
        download(`${f.name}.png`, await svgToPng(f.svg, 960, 600, 3), "image/png");
        say(`Saved ${f.name}.png (2880 × 1800 pixels).`);
      }),
      button("copy-markdown", "Markdown table", async () => {
        const r = allResults();
        if (r.length > 0) await copy(markdownTable(r), "Markdown table");
      }),
      button("copy-html", "HTML table", async () => {
        const r = allResults();
        if (r.length > 0) await copy(htmlTable(r), "HTML table");
      }),
    ),
    h(
      "div",
      { class: "row-buttons" },
      button("copy-proposal", "Proposal paragraph", async () => {
        const s = selectedResult();
        if (s) await copy(proposalText(result(s)), "proposal paragraph");
      }),
      button("print-report", "Print report…", () => {
        drawNow();
        window.print();
      }),
    ),
    status,
    out,
  );

  let timer: ReturnType<typeof setTimeout> | null = null;
  const drawNow = () => {
    if (timer !== null) clearTimeout(timer);
    timer = null;
    drawReport(report, allResults(), hooks.state().target);
  };
  window.addEventListener("beforeprint", drawNow);
  return {
    /** The report follows the workspace, drawn when edits pause (and always before printing). */
    refresh() {
      if (timer !== null) clearTimeout(timer);
      timer = setTimeout(drawNow, 300);
    },
  };
}
