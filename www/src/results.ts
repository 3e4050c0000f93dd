// The comparison table (designs as columns) and the details of the selected design.

import { clear, h, rich, srOnly } from "./dom";
import type { Evaluation, Mechanism } from "./engine";
import { appendDuration, appendNumber, tauName } from "./format";
import type { Slot } from "./workspace";

const MECHANISM_NAMES: Record<Mechanism, string> = { laser: "laser", projection: "projection noise", dick: "Dick effect" };

interface Row {
  /** Row heading; "_" and "^" mark sub- and superscripts. */
  label: string | ((th: HTMLElement) => void);
  /** Changes exactly when the heading does. */
  labelKey: string;
  /** The value of each design (null: none), compared for "best" (smaller is better). */
  values: (number | null)[];
  /** Writes a cell for design `i`. */
  cell: (td: HTMLElement, i: number) => void;
  best: boolean;
  id: string;
}

/** Values equal at the displayed precision count as equally good. */
function bestIndices(values: (number | null)[]): Set<number> {
  const shown = values.map((v) => (v !== null && Number.isFinite(v) && v > 0 ? Number(v.toPrecision(3)) : null));
  const finite = shown.filter((v): v is number => v !== null);
  if (finite.length < 2) return new Set();
  const min = Math.min(...finite);
  return new Set(shown.flatMap((v, i) => (v === min ? [i] : [])));
}

function stale(slot: Slot): boolean {
  return slot.problems.length > 0 || slot.drafts.size > 0;
}

/** A number for each evaluation object, so that a cell can tell whether its value may have changed. */
const evaluationIds = new WeakMap<Evaluation, number>();
let lastEvaluationId = 0;
function evaluationId(e: Evaluation | null): number {
  if (!e) return 0;
  let id = evaluationIds.get(e);
  if (id === undefined) {
    lastEvaluationId += 1;
    id = lastEvaluationId;
    evaluationIds.set(e, id);
  }
  return id;
}

/** What a table shows: keys of its head, of its row and column layout, of each heading and cell. */
interface TableView {
  caption: HTMLElement;
  head: HTMLElement | null;
  headKey: string;
  body: HTMLElement | null;
  bodyKey: string;
  labelKeys: string[];
  cellKeys: string[][];
}

const tableViews = new WeakMap<HTMLTableElement, TableView>();

/**
 * Draws the comparison table of every design into `table`. The table is kept between calls:
 * only headings and cells whose content may have changed are written again.
 */
export function drawTable(table: HTMLTableElement, slots: Slot[], selectedUid: number): void {
  let view = tableViews.get(table);
  if (!view) {
    clear(table);
    const caption = h("caption", { text: "Comparison of the designs (smaller is better; ◆ marks the best in each row)" });
    table.append(caption);
    view = { caption, head: null, headKey: "", body: null, bodyKey: "", labelKeys: [], cellKeys: [] };
    tableViews.set(table, view);
  }
  const headKey = JSON.stringify(slots.map((s) => [s.uid, s.colour, s.uid === selectedUid, s.design.name, stale(s), s.evaluation !== null]));
  if (headKey !== view.headKey || !view.head) {
    const head = h("tr", {}, h("th", { attrs: { scope: "col" }, text: "Quantity" }));
    slots.forEach((slot) => {
      const th = h("th", { attrs: { scope: "col" }, class: `design-col cw-c${slot.colour}${slot.uid === selectedUid ? " selected" : ""}`, data: { uid: String(slot.uid) } });
      th.append(h("span", { class: "swatch", attrs: { "aria-hidden": "true" } }), h("span", { class: "design-name", text: slot.design.name || "(unnamed)" }));
      if (stale(slot)) th.append(h("span", { class: "stale-tag", text: slot.evaluation ? "last valid result" : "no valid result yet" }));
      head.append(th);
    });
    const thead = h("thead", {}, head);
    if (view.head) view.head.replaceWith(thead);
    else view.caption.after(thead);
    view.head = thead;
    view.headKey = headKey;
  }
  if (slots.length === 0) {
    if (view.bodyKey !== "empty") {
      const body = h("tbody", {}, h("tr", {}, h("td", { text: "No designs. Add one from the list." })));
      if (view.body) view.body.replaceWith(body);
      else view.head.after(body);
      view.body = body;
      view.bodyKey = "empty";
    }
    return;
  }
  const evs: (Evaluation | null)[] = slots.map((s) => s.evaluation);
  const rows: Row[] = [];
  const taus = evs.find((e) => e)?.checkpoints.map((c) => c.tau_s) ?? [];
  taus.forEach((tau, k) => {
    const values = evs.map((e) => e?.checkpoints[k]?.total ?? null);
    rows.push({
      id: `sigma-${k}`,
      label: `σ_y(τ = ${tauName(tau)})`,
      labelKey: `σ_y(τ = ${tauName(tau)})`,
      values,
      best: true,
      cell: (td, i) => (values[i] === null ? td.append("—") : appendNumber(td, values[i]!, 3)),
    });
  });
  const level = evs.map((e) => e?.sigma_1s_equivalent ?? null);
  rows.push({
    id: "level-1s",
    label: "1-s-equivalent level",
    labelKey: "1-s-equivalent level",
    values: level,
    best: true,
    cell: (td, i) => (level[i] === null ? td.append("—") : appendNumber(td, level[i]!, 3)),
  });
  const times = evs.map((e) => (e && e.target.time_s !== null ? e.target.time_s : null));
  const target = evs.find((e) => e)?.target.target;
  rows.push({
    id: "time-to-target",
    label: (th) => {
      th.append("Time to σ");
      th.append(h("sub", { text: "y" }), " = ");
      if (target !== undefined) appendNumber(th, target, 3);
      else th.append("the target");
    },
    labelKey: String(target),
    values: times,
    best: true,
    cell: (td, i) => {
      const e = evs[i];
      if (!e) td.append("—");
      else if (e.target.time_s === null) {
        td.append(h("span", { text: "not reached" }));
        if (e.target.note) td.append(h("span", { class: "cell-note", text: e.target.note }));
      } else appendDuration(td, e.target.time_s);
    },
  });
  taus.forEach((tau, k) => {
    rows.push({
      id: `dominant-${k}`,
      label: `Dominant at ${tauName(tau)}`,
      labelKey: `Dominant at ${tauName(tau)}`,
      values: evs.map(() => null),
      best: false,
      cell: (td, i) => {
        const c = evs[i]?.checkpoints[k];
        td.append(c ? (MECHANISM_NAMES[c.dominant] ?? c.dominant) : "—");
      },
    });
  });

  const fillHeading = (th: HTMLElement, row: Row): void => {
    if (typeof row.label === "string") rich(th, row.label);
    else row.label(th);
  };
  const fillCell = (td: HTMLElement, row: Row, i: number, best: boolean): void => {
    const slot = slots[i];
    td.className = `cw-c${slot.colour}${slot.uid === selectedUid ? " selected" : ""}${best ? " best" : ""}`;
    if (best) {
      const strong = h("strong");
      row.cell(strong, i);
      td.append(h("span", { class: "best-value" }, strong, h("span", { class: "best-mark", attrs: { "aria-hidden": "true" }, text: "\u00a0◆" }), srOnly(" (best)")));
    } else {
      row.cell(td, i);
    }
  };
  const cellKey = (i: number, best: boolean): string => `${slots[i].colour}|${slots[i].uid === selectedUid}|${best}|${evaluationId(evs[i])}`;

  const bodyKey = JSON.stringify([rows.map((r) => r.id), slots.map((s) => s.uid)]);
  if (bodyKey !== view.bodyKey || !view.body) {
    // Other rows or designs: a new body.
    const body = h("tbody");
    view.labelKeys = [];
    view.cellKeys = [];
    for (const row of rows) {
      const th = h("th", { attrs: { scope: "row" } });
      fillHeading(th, row);
      view.labelKeys.push(row.labelKey);
      const tr = h("tr", { data: { row: row.id } }, th);
      const best = row.best ? bestIndices(row.values) : new Set<number>();
      const keys: string[] = [];
      slots.forEach((slot, i) => {
        const td = h("td", { data: { uid: String(slot.uid) } });
        fillCell(td, row, i, best.has(i));
        keys.push(cellKey(i, best.has(i)));
        tr.append(td);
      });
      view.cellKeys.push(keys);
      body.append(tr);
    }
    if (view.body) view.body.replaceWith(body);
    else view.head.after(body);
    view.body = body;
    view.bodyKey = bodyKey;
    return;
  }
  // The same rows and designs: rewrite only the headings and cells that may have changed.
  const trs = view.body.children;
  rows.forEach((row, r) => {
    const tr = trs[r] as HTMLTableRowElement;
    if (view.labelKeys[r] !== row.labelKey) {
      const th = tr.cells[0];
      clear(th);
      fillHeading(th, row);
      view.labelKeys[r] = row.labelKey;
    }
    const best = row.best ? bestIndices(row.values) : new Set<number>();
    slots.forEach((_, i) => {
      const key = cellKey(i, best.has(i));
      if (view.cellKeys[r][i] === key) return;
      const td = tr.cells[i + 1];
      clear(td);
      fillCell(td, row, i, best.has(i));
      view.cellKeys[r][i] = key;
    });
  });
}

const detailKeys = new WeakMap<HTMLElement, string>();

/** Numbers and findings of the selected design's last good evaluation. */
export function drawDetails(el: HTMLElement, slot: Slot | null): void {
  const key = slot ? `${slot.uid}|${evaluationId(slot.evaluation)}|${stale(slot)}` : "none";
  if (detailKeys.get(el) === key) return;
  detailKeys.set(el, key);
  clear(el);
  const e = slot?.evaluation;
  if (!slot || !e) {
    el.append(h("p", { class: "empty", text: slot ? "No valid result for this design yet." : "No design selected." }));
    return;
  }
  const dl = h("dl", { class: "details" });
  const item = (label: string, fill: (dd: HTMLElement) => void) => {
    const dd = h("dd");
    fill(dd);
    dl.append(h("dt", { text: label }), dd);
  };
  item("Projection noise at 1 s", (dd) => appendNumber(dd, e.projection.sigma_1s, 3));
  item("Dick effect at 1 s", (dd) => appendNumber(dd, e.dick.sigma_1s, 3));
  item("Atoms counted in the noise", (dd) => (Number.isInteger(e.projection.effective_atoms) ? dd.append(String(e.projection.effective_atoms)) : appendNumber(dd, e.projection.effective_atoms, 3)));
  item("Operating point", (dd) => {
    dd.append("±");
    appendNumber(dd, e.operating_point.detuning_hz, 3, "Hz");
    dd.append(", measured excitation ");
    appendNumber(dd, e.operating_point.measured_excitation, 3);
  });
  item("Laser phase excursion over the probe", (dd) => appendNumber(dd, e.limits.probe_phase_rms_rad, 3, "rad rms"));
  item("Probe limit from laser coherence", (dd) => (e.limits.coherence_probe_limit_s === null ? dd.append("above 10⁵ s") : appendNumber(dd, e.limits.coherence_probe_limit_s, 3, "s")));
  item("Servo lag from drift", (dd) => appendNumber(dd, e.limits.servo_lag_fractional, 3));
  el.append(dl);
  if (e.limits.notes.length > 0) {
    el.append(h("ul", { class: "notes" }, ...e.limits.notes.map((n) => h("li", { text: n }))));
  }
  if (stale(slot)) el.append(h("p", { class: "stale-tag", text: "These are the results of the last valid version of this design." }));
}
