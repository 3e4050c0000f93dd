// The clock-pair view: two of the workspace's designs, how they are compared, the campaign;
// the ratio's Allan deviation with its breakdown, the reach in d_e against the field's mass,
// a reach table and the assumptions. The engine computes everything; this module converts the
// fields, forwards them and draws. The reach runs in the background worker.

import { clear, h, rich, uniqueId } from "./dom";
import { engine, jobs, problemsOf, problemText, type PairDocument, type PairEvaluation, type Problem, type Reach, type Species } from "./engine";
import { Cancelled } from "./jobs";
import { appendDuration, appendNumber, inputText, parseNumber } from "./format";
import { drawLogPlot, watchWidth, type LogSeries } from "./plots";
import { pairDocument, pairSlot, type PairSettings, type Slot, type State } from "./workspace";

/** What the page does when the pair settings change (persist them). */
export interface PairHost {
  changed(): void;
}

const COMPARISONS: [string, string][] = [
  ["independent_lasers", "Independent lasers"],
  ["shared_laser", "One shared laser, synchronous"],
  ["correlation", "Correlation spectroscopy"],
];
const DEFAULT_DARK_TIME_S = 1;
const DEFAULT_LINK_CUTOFF_HZ = 1000;
/** The path under which reach options' problems are shown. */
const RHO_PATH = "pair.reach.rho_dm_gev_per_cm3";

/** A field of the pair form: where its value lives and how it reads. */
interface NumberSpec {
  path: string;
  label: string;
  unit: string;
  integer?: boolean;
  optional?: string;
  hint?: string;
  get: (p: PairSettings) => number | null;
  set: (p: PairSettings, v: number | null) => void;
}

function linkLevel(p: PairSettings, kind: "white_frequency" | "flicker_floor"): number | null {
  const t = p.link?.noise.find((n) => n.kind === kind);
  if (!t) return null;
  return t.kind === "white_frequency" ? t.sigma_y_1s : t.kind === "flicker_floor" ? t.sigma_y : null;
}

function setLinkLevel(p: PairSettings, kind: "white_frequency" | "flicker_floor", v: number | null): void {
  if (!p.link) return;
  const rest = p.link.noise.filter((n) => n.kind !== kind);
  if (v !== null) rest.push(kind === "white_frequency" ? { kind, sigma_y_1s: v } : { kind, sigma_y: v });
  // White frequency first, then the flicker floor.
  rest.sort((x, y) => (x.kind === "white_frequency" ? 0 : 1) - (y.kind === "white_frequency" ? 0 : 1));
  p.link.noise = rest;
}

/** Mounts the pair view in `root` (the card's body). */
export function mountPairView(root: HTMLElement, host: PairHost): PairView {
  return new PairView(root, host);
}

export class PairView {
  private state: State | null = null;
  private formKey = "";
  private computedKey = "";
  private evaluation: PairEvaluation | null = null;
  private reachResult: Reach | null = null;
  /** Key of the reach being computed in the worker. */
  private reachRunning = "";
  private catalog: Species[];
  private els: {
    form: HTMLFormElement;
    general: HTMLElement;
    status: HTMLElement;
    progress: HTMLProgressElement;
    cancel: HTMLButtonElement;
    ratioPlot: HTMLElement;
    ratioLegend: HTMLElement;
    reachPlot: HTMLElement;
    table: HTMLTableElement;
    notes: HTMLElement;
    catalog: HTMLElement;
  };

  constructor(
    root: HTMLElement,
    private host: PairHost,
  ) {
    this.catalog = engine.speciesCatalog();
    const progress = h("progress", { attrs: { max: "1", "aria-label": "Reach computation" } });
    progress.value = 0;
    const cancel = h("button", { class: "small", text: "Cancel", attrs: { type: "button" } });
    cancel.addEventListener("click", () => this.cancelReach());
    this.els = {
      form: h("form", { class: "pair-form", attrs: { novalidate: "", autocomplete: "off" } }),
      general: h("div", { class: "general-error", attrs: { role: "alert" } }),
      status: h("p", { class: "pair-status", attrs: { role: "status", "aria-live": "polite" } }),
      progress,
      cancel,
      ratioPlot: h("div", { id: "pair-ratio-plot", class: "plot" }),
      ratioLegend: h("ul", { class: "pair-legend" }),
      reachPlot: h("div", { id: "pair-reach-plot", class: "plot" }),
      table: h("table", { id: "pair-table", class: "comparison pair-table" }),
      notes: h("ul", { id: "pair-notes", class: "pair-notes" }),
      catalog: h("div", { class: "table-wrap" }),
    };
    this.els.form.addEventListener("submit", (ev) => ev.preventDefault());
    const busy = h("div", { class: "pair-busy" }, progress, cancel);
    busy.hidden = true;
    root.append(
      this.els.form,
      this.els.general,
      h("div", { class: "pair-results" }, this.els.status, busy),
      h("figure", {}, h("figcaption", { text: "Allan deviation of the ratio a/b with its breakdown" }), this.els.ratioPlot, this.els.ratioLegend),
      h(
        "figure",
        {},
        rich(h("figcaption"), "Projected reach in the coupling d_e of ultralight scalar dark matter to α: the shaded region above the curve is what the campaign would exclude"),
        this.els.reachPlot,
      ),
      h("div", { class: "pair-columns" }, h("div", { class: "table-wrap" }, this.els.table), h("div", {}, h("h3", { text: "Assumptions and notes" }), this.els.notes)),
      h("details", { class: "species-catalog" }, h("summary", { text: "Species catalog: clock transitions with their sources" }), this.els.catalog),
    );
    this.drawCatalog();
    for (const el of [this.els.ratioPlot, this.els.reachPlot]) watchWidth(el, () => this.drawPlots());
  }

  /** Brings the view up to date with `state` (after any edit of the workspace). */
  update(state: State): void {
    const fresh = state !== this.state;
    this.state = state;
    const formKey = JSON.stringify(state.slots.map((s) => [s.uid, s.design.name]));
    if (fresh || formKey !== this.formKey) {
      this.formKey = formKey;
      this.renderForm();
    }
    this.compute();
  }

  // ----- computing -------------------------------------------------------------------------

  private compute(): void {
    const state = this.state;
    if (!state) return;
    const p = state.pair;
    const a = pairSlot(state, "a");
    const b = pairSlot(state, "b");
    const general: string[] = [];
    if (!a || !b) {
      general.push(state.slots.length === 0 ? "Add a design to compare clocks." : "Choose the designs of clock A and clock B.");
      this.showProblems([], general);
      return;
    }
    for (const [name, s] of [["A", a], ["B", b]] as [string, Slot][]) {
      if (s.problems.length + s.drafts.size > 0) general.push(`Clock ${name}'s design “${s.design.name}” has problems (fix them in the design editor); the last good result is shown.`);
    }
    if (general.length > 0 || p.drafts.size > 0) {
      this.showProblems([], general);
      return;
    }
    const doc = pairDocument(p, a.design, b.design);
    const key = JSON.stringify([doc, p.rho_dm_gev_per_cm3]);
    if (key === this.computedKey && p.problems.length === 0) {
      this.showProblems([], []);
      return;
    }
    let problems = engine.validatePair(doc).filter((x) => !x.path.startsWith("pair.a.") && !x.path.startsWith("pair.b."));
    let evaluation: PairEvaluation | null = null;
    if (problems.length === 0) {
      try {
        evaluation = engine.evaluatePair(doc, null);
      } catch (err) {
        problems = problemsOf(err);
      }
    }
    p.problems = problems;
    if (!evaluation) {
      this.showProblems(problems, []);
      this.host.changed();
      return;
    }
    this.computedKey = key;
    this.evaluation = evaluation;
    this.showProblems([], []);
    this.drawPlots();
    this.drawTable();
    this.startReach(doc, p.rho_dm_gev_per_cm3, key);
    this.host.changed();
  }

  private startReach(doc: PairDocument, rho: number, key: string): void {
    const options = { rho_dm_gev_per_cm3: rho };
    let background;
    try {
      background = jobs();
    } catch {
      background = null;
    }
    if (this.reachRunning !== "" && background) background.cancel();
    this.reachRunning = "";
    if (!background || background.busy) {
      // No worker, or another view's job holds it: compute here.
      this.finishReach(() => engine.reach(doc, options));
      return;
    }
    this.reachRunning = key;
    this.setBusy(true, "Computing the reach…");
    background.run("reach", { pair: doc, options }, 1, (f) => {
      this.els.progress.value = f;
    }).then(
      (r) => {
        if (this.reachRunning !== key) return;
        this.reachRunning = "";
        this.setBusy(false, "");
        this.finishReach(() => r as Reach);
      },
      (err: unknown) => {
        if (this.reachRunning !== key) return;
        this.reachRunning = "";
        this.setBusy(false, err instanceof Cancelled ? "Reach computation cancelled; change a field to compute it again." : "");
        if (!(err instanceof Cancelled)) this.finishReach(() => { throw err; });
      },
    );
  }

  private finishReach(get: () => Reach): void {
    const p = this.state?.pair;
    try {
      const t0 = performance.now();
      this.reachResult = get();
      performance.measure("cw-pair-reach", { start: t0, end: performance.now() });
      if (p) p.problems = [];
      this.showProblems([], []);
    } catch (err) {
      const problems = problemsOf(err).map((x) => (x.path === "options.rho_dm_gev_per_cm3" ? { ...x, path: RHO_PATH } : x));
      if (p) p.problems = problems;
      this.computedKey = "";
      this.showProblems(problems, []);
      this.host.changed();
    }
    this.drawPlots();
    this.drawTable();
    this.els.table.dataset.state = "done";
  }

  private cancelReach(): void {
    if (this.reachRunning === "") return;
    this.computedKey = "";
    try {
      jobs().cancel();
    } catch {
      // No worker: nothing runs.
    }
  }

  private setBusy(busy: boolean, text: string): void {
    const box = this.els.progress.parentElement;
    if (box) box.hidden = !busy;
    this.els.progress.value = 0;
    this.els.status.textContent = text;
    if (busy) this.els.table.dataset.state = "busy";
  }

  // ----- the form --------------------------------------------------------------------------

  private renderForm(): void {
    const state = this.state!;
    const p = state.pair;
    const form = this.els.form;
    const hadFocus = form.contains(document.activeElement) ? (document.activeElement as HTMLElement).dataset.path : undefined;
    clear(form);
    const designChoice = (which: "a" | "b", label: string): HTMLElement => {
      const sel = h("select");
      const cur = which === "a" ? p.aUid : p.bUid;
      if (!state.slots.some((s) => s.uid === cur)) sel.append(h("option", { text: "(choose a design)", attrs: { value: "0" } }));
      for (const s of state.slots) {
        const o = h("option", { text: s.design.name || "(unnamed)" });
        o.value = String(s.uid);
        o.selected = s.uid === cur;
        sel.append(o);
      }
      sel.addEventListener("change", () => {
        const uid = Number(sel.value);
        if (which === "a") p.aUid = uid;
        else p.bUid = uid;
        this.changed();
      });
      return this.shell(`pair.${which}`, label, sel, "", which === "b" ? "the same design twice compares two equal clocks" : undefined);
    };
    const kind = h("select");
    for (const [value, text] of COMPARISONS) {
      const o = h("option", { text });
      o.value = value;
      o.selected = value === p.comparison.kind;
      kind.append(o);
    }
    kind.addEventListener("change", () => {
      p.drafts.delete("pair.comparison.dark_time_s");
      p.comparison = kind.value === "correlation" ? { kind: "correlation", dark_time_s: DEFAULT_DARK_TIME_S } : kind.value === "shared_laser" ? { kind: "shared_laser" } : { kind: "independent_lasers" };
      this.renderForm();
      this.changed();
    });
    const linkOn = h("input", { attrs: { type: "checkbox" } });
    linkOn.checked = p.link !== null;
    linkOn.dataset.path = "pair.link";
    const linkId = uniqueId("pl");
    linkOn.id = linkId;
    linkOn.addEventListener("change", () => {
      for (const k of [...p.drafts.keys()]) if (k.startsWith("pair.link")) p.drafts.delete(k);
      p.link = linkOn.checked ? { label: "link", noise: [{ kind: "white_frequency", sigma_y_1s: 1e-17 }], high_cutoff_hz: DEFAULT_LINK_CUTOFF_HZ } : null;
      this.renderForm();
      this.changed();
    });
    const campaign = (key: keyof PairSettings["campaign"], label: string, unit: string, extra: Partial<NumberSpec> = {}): HTMLElement =>
      this.numberField({
        path: `pair.campaign.${key}`,
        label,
        unit,
        get: (q) => q.campaign[key],
        set: (q, v) => {
          q.campaign[key] = v ?? 0;
        },
        ...extra,
      });
    form.append(
      this.section("Clocks", "pair.clocks", designChoice("a", "Clock A (numerator)"), designChoice("b", "Clock B (denominator)")),
      this.section(
        "Comparison",
        "pair.comparison",
        this.shell("pair.comparison.kind", "How the clocks are compared", kind, ""),
        p.comparison.kind === "correlation"
          ? this.numberField({
              path: "pair.comparison.dark_time_s",
              label: "Ramsey dark time",
              unit: "s",
              hint: "may exceed the laser's coherence time",
              get: (q) => (q.comparison.kind === "correlation" ? q.comparison.dark_time_s : null),
              set: (q, v) => {
                if (q.comparison.kind === "correlation") q.comparison.dark_time_s = v ?? 0;
              },
            })
          : null,
      ),
      this.section(
        "Link between the clocks",
        "pair.link",
        h("div", { class: "field check" }, linkOn, h("label", { attrs: { for: linkId }, text: "Add the link's noise" })),
        p.link
          ? this.numberField({
              path: "pair.link.white",
              label: "White frequency: σ_y at τ = 1 s",
              unit: "fractional",
              optional: "none",
              get: (q) => linkLevel(q, "white_frequency"),
              set: (q, v) => setLinkLevel(q, "white_frequency", v),
            })
          : null,
        p.link
          ? this.numberField({
              path: "pair.link.flicker",
              label: "Flicker floor σ_y",
              unit: "fractional",
              optional: "none",
              get: (q) => linkLevel(q, "flicker_floor"),
              set: (q, v) => setLinkLevel(q, "flicker_floor", v),
            })
          : null,
        p.link
          ? this.numberField({
              path: "pair.link.high_cutoff_hz",
              label: "High cut-off f_h",
              unit: "Hz",
              get: (q) => q.link?.high_cutoff_hz ?? null,
              set: (q, v) => {
                if (q.link) q.link.high_cutoff_hz = v ?? 0;
              },
            })
          : null,
      ),
      this.section(
        "Campaign",
        "pair.campaign",
        campaign("sessions", "Sessions", "", { integer: true }),
        campaign("session_length_s", "Session length", "s"),
        campaign("spacing_s", "Spacing (start to start)", "s"),
        campaign("uptime", "Uptime", "", { hint: "fraction of each session with valid data: above 0, at most 1" }),
        campaign("systematic_per_session", "Systematic uncertainty per session", "1σ", { hint: "fractional, independent between sessions" }),
      ),
      this.section(
        "Reach",
        "pair.reach",
        this.numberField({
          path: RHO_PATH,
          label: "Local dark-matter density ρ_{DM}",
          unit: "GeV/cm³",
          get: (q) => q.rho_dm_gev_per_cm3,
          set: (q, v) => {
            q.rho_dm_gev_per_cm3 = v ?? 0;
          },
        }),
      ),
    );
    if (hadFocus) form.querySelector<HTMLElement>(`[data-path="${CSS.escape(hadFocus)}"]`)?.focus();
    this.showProblems(p.problems, []);
  }

  private changed(): void {
    this.compute();
    this.host.changed();
  }

  private section(title: string, group: string, ...children: (Node | null)[]): HTMLFieldSetElement {
    const fs = h("fieldset", { class: "section", data: { group } }, h("legend", { text: title }), h("div", { class: "group-error", attrs: { role: "alert" } }));
    for (const c of children) if (c) fs.append(c);
    return fs;
  }

  private shell(path: string, label: string, control: HTMLElement, unit: string, hint?: string): HTMLElement {
    const id = uniqueId("pf");
    control.id = id;
    control.dataset.path = path;
    const err = h("span", { class: "field-error", id: `${id}-err`, attrs: { "aria-live": "polite" } });
    const row = h("div", { class: "control" }, control);
    const described = [err.id];
    if (unit) {
      row.append(h("span", { class: "unit", id: `${id}-unit`, text: unit }));
      described.unshift(`${id}-unit`);
    }
    const hintEl = hint ? h("span", { class: "hint", id: `${id}-hint`, text: hint }) : null;
    if (hintEl) described.push(hintEl.id);
    control.setAttribute("aria-describedby", described.join(" "));
    return h("div", { class: "field", data: { field: path } }, rich(h("label", { attrs: { for: id } }), label), row, hintEl, err);
  }

  private numberField(spec: NumberSpec): HTMLElement {
    const p = this.state!.pair;
    const input = h("input", { attrs: { type: "text", inputmode: "decimal", autocomplete: "off", spellcheck: "false" } });
    if (spec.optional) input.placeholder = spec.optional;
    const draft = p.drafts.get(spec.path);
    const cur = spec.get(p);
    input.value = draft ? draft.text : cur === null ? "" : inputText(cur);
    input.addEventListener("input", () => {
      const text = input.value;
      const q = this.state!.pair;
      if (spec.optional && text.trim() === "") {
        q.drafts.delete(spec.path);
        spec.set(q, null);
      } else {
        const r = parseNumber(text, spec.integer);
        if (r.ok) {
          q.drafts.delete(spec.path);
          spec.set(q, r.value);
        } else {
          q.drafts.set(spec.path, { text, problem: { path: spec.path, value: JSON.stringify(text), allowed: r.allowed } });
        }
      }
      this.changed();
    });
    return this.shell(spec.path, spec.label, input, spec.unit, spec.hint);
  }

  /** Marks the fields with problems (drafts, then the engine's), the rest in the general box. */
  private showProblems(engineProblems: Problem[], general: string[]): void {
    const p = this.state?.pair;
    const form = this.els.form;
    for (const el of form.querySelectorAll<HTMLElement>(".invalid")) el.classList.remove("invalid");
    for (const el of form.querySelectorAll<HTMLElement>("[aria-invalid]")) el.removeAttribute("aria-invalid");
    for (const el of form.querySelectorAll<HTMLElement>(".field-error, .group-error")) clear(el);
    clear(this.els.general);
    const all: Problem[] = [...(p?.drafts.values() ?? [])].map((d) => d.problem);
    for (const x of engineProblems) if (!p?.drafts.has(x.path)) all.push(x);
    for (const x of all) {
      const field = this.findField(x.path);
      if (field) {
        field.classList.add("invalid");
        field.querySelector("[data-path]")?.setAttribute("aria-invalid", "true");
        field.querySelector(".field-error")?.append(h("span", { class: "problem", text: problemText(x) }));
        continue;
      }
      const group = this.findGroup(x.path);
      group?.classList.add("invalid");
      (group?.querySelector(":scope > .group-error") ?? this.els.general).append(h("span", { class: "problem", text: problemText(x) }));
    }
    for (const g of general) this.els.general.append(h("span", { class: "problem", text: g }));
    if (all.length > 0 && (this.evaluation || this.reachResult)) this.els.general.append(h("span", { class: "stale-note", text: "The results below are those of the last valid pair." }));
  }

  private findField(path: string): HTMLElement | null {
    const exact = this.els.form.querySelector<HTMLElement>(`.field[data-field="${CSS.escape(path)}"]`);
    if (exact) return exact;
    // The link's noise terms are edited as two levels.
    const m = /^pair\.link\.noise\[\d+\]/.exec(path);
    if (m && this.state?.pair.link) {
      const i = Number(/\[(\d+)\]/.exec(path)![1]);
      const kind = this.state.pair.link.noise[i]?.kind;
      return this.els.form.querySelector<HTMLElement>(`.field[data-field="${kind === "flicker_floor" ? "pair.link.flicker" : "pair.link.white"}"]`);
    }
    return null;
  }

  private findGroup(path: string): HTMLElement | null {
    const groups = [...this.els.form.querySelectorAll<HTMLElement>("[data-group]")];
    return groups.find((g) => path.startsWith(g.dataset.group!)) ?? (path === "pair.comparison" ? groups.find((g) => g.dataset.group === "pair.comparison") ?? null : null);
  }

  // ----- drawing -------------------------------------------------------------------------

  private colours(): { a: number; b: number; total: number } {
    const state = this.state;
    const a = state ? pairSlot(state, "a")?.colour ?? 0 : 0;
    const b = state ? pairSlot(state, "b")?.colour ?? 1 : 1;
    const bb = b === a ? (a + 1) % 8 : b;
    let total = 0;
    while (total === a || total === bb) total++;
    return { a, b: bb, total };
  }

  private drawPlots(): void {
    const ev = this.evaluation;
    const c = this.colours();
    const series: LogSeries[] = [];
    if (ev) {
      series.push({ x: ev.tau_s, y: ev.total, style: "total", colour: c.total, name: "ratio a/b" });
      for (const part of ev.parts) {
        const style = part.id.endsWith(".laser") ? "laser" : part.id.endsWith(".projection") ? "projection" : part.id.endsWith(".dick") ? "dick" : "measured";
        const colour = part.id.startsWith("a") ? c.a : part.id.startsWith("b") ? c.b : c.total;
        series.push({ x: ev.tau_s, y: part.sigma, style, colour, name: part.label });
      }
    }
    drawLogPlot(this.els.ratioPlot, {
      label: "Allan deviation of the clock ratio against averaging time, with its breakdown",
      xTitle: "Averaging time τ (s)",
      yTitle: "σ_y(τ) of the ratio",
      series,
      empty: "No valid pair yet.",
    });
    clear(this.els.ratioLegend);
    for (const sr of series) {
      const sample = document.createElementNS("http://www.w3.org/2000/svg", "svg");
      sample.setAttribute("width", "34");
      sample.setAttribute("height", "10");
      sample.setAttribute("aria-hidden", "true");
      const g = document.createElementNS("http://www.w3.org/2000/svg", "g");
      g.setAttribute("class", `design selected cw-c${sr.colour}`);
      const l = document.createElementNS("http://www.w3.org/2000/svg", "path");
      l.setAttribute("class", `curve ${sr.style}`);
      l.setAttribute("d", "M2,5L32,5");
      g.append(l);
      sample.append(g);
      this.els.ratioLegend.append(h("li", {}, sample, h("span", { text: sr.name })));
    }
    const r = this.reachResult;
    const reachSeries: LogSeries[] = [];
    if (r) {
      const dm = r.dark_matter;
      const y = dm.d_e.map((v) => (v === null ? NaN : v));
      reachSeries.push({ x: dm.mass_ev, y, lo: y, hi: y.map((v) => v * 100), style: "total", colour: c.total, name: "d_e reach" });
    }
    drawLogPlot(this.els.reachPlot, {
      label: "Projected reach in d_e against the mass of the scalar field",
      xTitle: "Mass of the field m (eV)",
      yTitle: "d_e (1σ reach)",
      series: reachSeries,
      empty: r ? r.dark_matter.note : "No reach computed yet.",
    });
  }

  private drawTable(): void {
    const t = this.els.table;
    clear(t);
    const ev = this.evaluation;
    const r = this.reachResult;
    const state = this.state;
    const a = state ? pairSlot(state, "a") : null;
    const b = state ? pairSlot(state, "b") : null;
    t.append(h("caption", { text: "What the pair measures" }), h("thead", {}, h("tr", {}, h("th", { text: "Quantity", attrs: { scope: "col" } }), h("th", { text: "Value", attrs: { scope: "col" } }))));
    const body = h("tbody");
    t.append(body);
    /** A row; `label` may carry _ subscripts, `name` (a design's name) is plain text. */
    const row = (id: string, label: string, fill: (td: HTMLTableCellElement) => void, name = ""): void => {
      const td = h("td");
      fill(td);
      const th = rich(h("th", { attrs: { scope: "row" } }), label);
      if (name) th.append(` (${name})`);
      body.append(h("tr", { data: { row: id } }, th, td));
    };
    const none = (td: HTMLElement, why: string) => td.append(h("span", { class: "none", text: `— ${why}` }));
    if (!ev) {
      row("none", "Result", (td) => none(td, "no valid pair yet"));
      return;
    }
    const kText = (k: number | null, s: Slot | null, td: HTMLElement) => {
      if (k === null) {
        none(td, "not known (set the transition's catalog species or its K in the design editor)");
        return;
      }
      appendNumber(td, k, 3);
      td.append(h("span", { class: "source", text: ` (${this.kSource(s)})` }));
    };
    row("k-a", "K_α of A", (td) => kText(ev.k_alpha_a, a, td), a?.design.name);
    row("k-b", "K_α of B", (td) => kText(ev.k_alpha_b, b, td), b?.design.name);
    row("delta-k", "ΔK = K_A − K_B", (td) => {
      if (ev.delta_k === null) none(td, "no sensitivity to α: the sensitivity coefficient K is not known for both clocks");
      else if (ev.delta_k === 0) none(td, "no sensitivity to α: both clocks have the same sensitivity coefficient K");
      else appendNumber(td, ev.delta_k, 3);
    });
    for (const [id, tau, name] of [["ratio-1s", 1, "1 s"], ["ratio-1d", 86400, "1 day"]] as [string, number, string][]) {
      row(id, `Ratio σ_y at ${name}`, (td) => {
        const cp = ev.checkpoints.find((x) => x.tau_s === tau);
        if (!cp || cp.sigma === null) none(td, "shorter than one comparison cycle");
        else appendNumber(td, cp.sigma, 3);
      });
    }
    if (!r) {
      row("reach", "Reach", (td) => none(td, this.reachRunning ? "computing…" : "not computed"));
      return;
    }
    row("drift", "Drift of α, 1σ bound on (1/α) dα/dt", (td) => {
      if (r.drift.alpha_drift_per_year === null) none(td, `no sensitivity: ${r.drift.note}`);
      else appendNumber(td, r.drift.alpha_drift_per_year, 3, "per year");
    });
    row("ratio-drift", "Drift of the ratio, 1σ", (td) => {
      if (r.drift.ratio_drift_per_year === null) none(td, r.drift.note || "one session has no drift");
      else appendNumber(td, r.drift.ratio_drift_per_year, 3, "per year");
    });
    row("de-best", "Best d_e reach", (td) => {
      let best = -1;
      r.dark_matter.d_e.forEach((v, i) => {
        if (v !== null && (best < 0 || v < (r.dark_matter.d_e[best] as number))) best = i;
      });
      if (best < 0) none(td, `no sensitivity: ${r.dark_matter.note}`);
      else {
        appendNumber(td, r.dark_matter.d_e[best] as number, 3);
        td.append(" at m = ");
        appendNumber(td, r.dark_matter.mass_ev[best], 3, "eV");
      }
    });
    for (const [id, tau, name] of [["height-1s", 1, "1 s"], ["height-1d", 86400, "1 day"]] as [string, number, string][]) {
      row(id, `Height resolution at ${name}`, (td) => {
        const cp = r.levelling.checkpoints.find((x) => x.tau_s === tau);
        if (!cp || cp.height_m === null) none(td, "shorter than one comparison cycle");
        else appendNumber(td, cp.height_m, 3, "m");
      });
    }
    row("time-1cm", `Time to ${r.levelling.target_m * 100} cm of height`, (td) => {
      if (r.levelling.time_to_target_s === null) none(td, r.levelling.note);
      else appendDuration(td, r.levelling.time_to_target_s);
    });
    row("live", "Live time of the campaign", (td) => {
      appendDuration(td, r.live_time_s);
      td.append(" over a span of ");
      appendDuration(td, r.campaign_span_s);
    });
    this.drawNotes();
  }

  private kSource(s: Slot | null): string {
    const tr = s?.design.transition;
    if (!tr) return "";
    if (typeof tr.k_alpha === "number") return "the design's own value";
    const sp = this.catalog.find((x) => x.id === tr.species);
    return sp ? `${sp.name}: ${sp.k_alpha.source}` : "";
  }

  private drawNotes(): void {
    const ul = this.els.notes;
    clear(ul);
    const ev = this.evaluation;
    const r = this.reachResult;
    const lines = [...(ev?.assumptions ?? []), ...(r?.assumptions ?? []), ...(ev?.notes ?? [])];
    if (r) {
      lines.push(`Drift: ${r.drift.note}`, `Dark matter: ${r.dark_matter.note}`, `Levelling: ${r.levelling.note}`);
    }
    for (const l of lines) if (l.trim() !== "" && !/: $/.test(l)) ul.append(h("li", { text: l }));
  }

  private drawCatalog(): void {
    const table = h("table", { class: "comparison species-table" });
    table.append(
      h(
        "thead",
        {},
        h("tr", {}, ...["Transition", "Carrier", "ν_0", "Excited-state lifetime", "K_α", "Typical number", "Identifier"].map((t) => h("th", { text: t, attrs: { scope: "col" } }))),
      ),
    );
    const body = h("tbody");
    for (const sp of this.catalog) {
      const cell = (v: number, unit: string, source: string, range?: [number, number]) => {
        const td = h("td");
        appendNumber(td, v, 6, unit);
        if (range && (range[0] !== v || range[1] !== v)) {
          td.append(" (");
          appendNumber(td, range[0], 3);
          td.append(" to ");
          appendNumber(td, range[1], 3);
          td.append(")");
        }
        td.append(h("span", { class: "source", text: source }));
        return td;
      };
      body.append(
        h(
          "tr",
          {},
          h("th", { text: sp.name, attrs: { scope: "row" } }),
          h("td", { text: sp.carrier }),
          cell(sp.nu0_hz.value, "Hz", sp.nu0_hz.source),
          cell(sp.lifetime_s.value, "s", sp.lifetime_s.source, [sp.lifetime_s.low, sp.lifetime_s.high]),
          cell(sp.k_alpha.value, "", sp.k_alpha.source, [sp.k_alpha.low, sp.k_alpha.high]),
          cell(sp.typical_count.value, "", sp.typical_count.source),
          h("td", {}, h("code", { text: sp.id })),
        ),
      );
    }
    table.append(body);
    this.els.catalog.append(table);
  }
}
