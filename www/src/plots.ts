// SVG plots: Allan deviation of every design, g(t) and line shape of the selected design.

import { axisBottom, axisLeft, type Axis } from "d3-axis";
import { scaleLinear, scaleLog, type NumberValue, type ScaleLogarithmic } from "d3-scale";
import { select, type Selection } from "d3-selection";
import { area, line } from "d3-shape";
import { clear, h, richSvg, s } from "./dom";
import { frequencyUnit, numberText, timeUnit } from "./format";
import type { Evaluation } from "./engine";

const MINUS = "\u2212";

/** What one design contributes to the Allan-deviation plot. */
export interface CurveSet {
  /** The design's identity, so that its curves are redrawn only when they change. */
  uid: number;
  colour: number;
  name: string;
  selected: boolean;
  evaluation: Evaluation;
}

interface Box {
  width: number;
  height: number;
  left: number;
  right: number;
  top: number;
  bottom: number;
}

/**
 * Widths of the plot containers, measured by a ResizeObserver, so that drawing never has to
 * ask for layout in the middle of DOM changes.
 */
const widths = new WeakMap<Element, number>();

/** Keeps the width of `container` known and calls `onResize` when it changes. */
export function watchWidth(container: HTMLElement, onResize: () => void): void {
  widths.set(container, container.clientWidth);
  new ResizeObserver((entries) => {
    let changed = false;
    for (const e of entries) {
      const w = Math.floor(e.contentRect.width);
      if (widths.get(e.target) !== w) {
        widths.set(e.target, w);
        changed = true;
      }
    }
    if (changed) onResize();
  }).observe(container);
}

function box(container: HTMLElement, aspect: number, minH: number, maxH: number): Box {
  const width = Math.max(320, Math.floor(widths.get(container) || container.clientWidth || 720));
  const height = Math.round(Math.min(maxH, Math.max(minH, width * aspect)));
  return { width, height, left: 84, right: 20, top: 16, bottom: 62 };
}

function svgFor(container: HTMLElement, b: Box, label: string): SVGSVGElement {
  clear(container);
  const svg = s("svg", { width: b.width, height: b.height, viewBox: `0 0 ${b.width} ${b.height}`, role: "img", "aria-label": label });
  container.append(svg);
  return svg;
}

const positive = (v: number): boolean => Number.isFinite(v) && v > 0;

/** Decades 10^a..10^b covering [lo, hi]. */
function decades(lo: number, hi: number): number[] {
  const out: number[] = [];
  for (let e = Math.ceil(Math.log10(lo) - 1e-9); e <= Math.floor(Math.log10(hi) + 1e-9); e++) out.push(10 ** e);
  return out;
}

function minorTicks(lo: number, hi: number): number[] {
  const out: number[] = [];
  for (let e = Math.floor(Math.log10(lo)); e <= Math.ceil(Math.log10(hi)); e++) {
    for (let m = 2; m <= 9; m++) {
      const v = m * 10 ** e;
      if (v >= lo && v <= hi) out.push(v);
    }
  }
  return out;
}

/** Writes "10" with a superscript exponent into a tick label. */
function powerLabel(text: SVGTextElement, value: number): void {
  const e = Math.round(Math.log10(value));
  while (text.firstChild) text.removeChild(text.firstChild);
  text.append(document.createTextNode("10"));
  const sup = document.createElementNS("http://www.w3.org/2000/svg", "tspan");
  sup.setAttribute("dy", "-0.55em");
  sup.setAttribute("class", "sup");
  sup.textContent = String(e).replace("-", MINUS);
  text.append(sup);
}

type G = Selection<SVGGElement, unknown, null, undefined>;

type LogScale = ScaleLogarithmic<number, number>;

function logAxis(g: G, axis: (scale: LogScale) => Axis<NumberValue>, scale: LogScale, lo: number, hi: number): void {
  let major = decades(lo, hi);
  if (major.length > 9) major = major.filter((_, i) => i % 2 === 0);
  g.call(
    axis(scale)
      .tickValues(minorTicks(lo, hi))
      .tickFormat(() => "")
      .tickSize(4)
      .tickSizeOuter(0) as unknown as (sel: G) => void,
  );
  g.selectAll(".tick").attr("class", "tick minor");
  const majorG = g.append("g").attr("class", "major");
  majorG.call(
    axis(scale)
      .tickValues(major)
      .tickFormat(() => "")
      .tickSize(8)
      .tickSizeOuter(0) as unknown as (sel: G) => void,
  );
  majorG.select(".domain").remove();
  majorG.selectAll<SVGTextElement, number>(".tick text").each(function (d) {
    powerLabel(this, d);
  });
}

function linearAxis(g: G, axis: Axis<NumberValue>): void {
  g.call(axis as unknown as (sel: G) => void);
}

/** Axis titles; "_" and "^" in them mark sub- and superscripts. */
function axisTitle(svg: SVGSVGElement, b: Box, xTitle: string, yTitle: string): void {
  svg.append(
    richSvg(s("text", { class: "axis-title", x: b.left + (b.width - b.left - b.right) / 2, y: b.height - 12, "text-anchor": "middle" }), xTitle),
    richSvg(s("text", { class: "axis-title", transform: `translate(20 ${b.top + (b.height - b.top - b.bottom) / 2}) rotate(-90)`, "text-anchor": "middle" }), yTitle),
  );
}

/** "1.0×10^{-18}" for SVG text. */
function powerText(x: number, digits: number): string {
  const t = numberText(x, digits);
  const i = t.indexOf("×10");
  return i < 0 ? t : `${t.slice(0, i + 3)}^{${t.slice(i + 3)}}`;
}

let clipCounter = 0;

function clipRect(svg: SVGSVGElement, b: Box): string {
  clipCounter += 1;
  const id = `cw-clip-${clipCounter}`;
  svg.append(s("defs", {}, s("clipPath", { id }, s("rect", { x: b.left, y: b.top, width: b.width - b.left - b.right, height: b.height - b.top - b.bottom }))));
  return id;
}

const MECHANISMS = ["laser", "projection", "dick"] as const;

/** What one design's group in the Allan-deviation plot was last drawn from. */
interface DrawnCurves {
  g: SVGGElement;
  evaluation: Evaluation;
  breakdown: boolean;
  className: string;
  name: string;
}

/**
 * What a plot container shows: `frame` names the axes, grid and scales it was drawn for, so
 * that an edit which leaves them alone redraws only the curves that changed.
 */
interface SigmaView {
  frame: string;
  plot: SVGGElement | null;
  path: (tau: number[], v: number[]) => string;
  designs: Map<number, DrawnCurves>;
}

const sigmaViews = new WeakMap<HTMLElement, SigmaView>();

/**
 * Replaces the plot with a note in a short strip (an empty plot area would only push the
 * rest of the page down), unless `frame` says that the same note is already shown.
 */
function emptyPlot(container: HTMLElement, b: Box, label: string, note: string, frame: string, last: string | undefined): void {
  if (last === frame) return;
  const strip = { ...b, height: Math.min(b.height, 96) };
  const svg = svgFor(container, strip, label);
  svg.append(s("text", { x: strip.width / 2, y: strip.height / 2, "text-anchor": "middle", "dominant-baseline": "middle", class: "empty" }, note));
}

/**
 * The decade-aligned axis ranges of the Allan-deviation plot of `evaluations` (with the target
 * line when it is near the curves), or null when nothing finite can be plotted. The page's
 * plot and the exported figure (exports.ts) both use it.
 */
export function sigmaRange(evaluations: Evaluation[], target: number | null): { xMin: number; xMax: number; yMin: number; yMax: number } | null {
  let tLo = Infinity;
  let tHi = 0;
  let yLo = Infinity;
  let yHi = 0;
  let totalLo = Infinity;
  let totalHi = 0;
  for (const e of evaluations) {
    const c = e.curve;
    const n = c.tau_s.length;
    for (let i = 0; i < n; i++) {
      const t = c.tau_s[i];
      if (!positive(t)) continue;
      tLo = Math.min(tLo, t);
      tHi = Math.max(tHi, t);
      for (const v of [c.total[i], c.laser[i], c.projection[i], c.dick[i]]) {
        if (positive(v)) {
          yLo = Math.min(yLo, v);
          yHi = Math.max(yHi, v);
        }
      }
      if (positive(c.total[i])) {
        totalLo = Math.min(totalLo, c.total[i]);
        totalHi = Math.max(totalHi, c.total[i]);
      }
      if (positive(c.free_laser[i]) && c.free_laser[i] < totalHi * 100) yHi = Math.max(yHi, c.free_laser[i]);
    }
  }
  if (!(tHi > tLo) || !(yHi > 0)) return null;
  // Keep the view on the totals: mechanisms far below them are cut off at three decades.
  yLo = Math.max(yLo, totalLo / 1e3);
  if (target !== null && positive(target) && target > yLo / 10 && target < yHi * 10) {
    yLo = Math.min(yLo, target);
    yHi = Math.max(yHi, target);
  }
  const yMin = 10 ** Math.floor(Math.log10(yLo));
  const yMax = 10 ** Math.ceil(Math.log10(yHi));
  const xMin = 10 ** Math.floor(Math.log10(tLo) + 1e-9);
  const xMax = 10 ** Math.ceil(Math.log10(tHi) - 1e-9);
  return { xMin, xMax, yMin, yMax };
}

/**
 * Allan deviation against averaging time for every design: total solid, the mechanisms
 * dashed or dotted, the free-running laser faint, the target as a grey line. Axes and grid
 * are kept while their ranges stay; only the curves of designs whose result changed are redrawn.
 */
export function drawSigma(container: HTMLElement, sets: CurveSet[], target: number | null, breakdownForAll: boolean): void {
  const label = "Allan deviation sigma_y(tau) of every design against averaging time, log-log";
  const b = box(container, 0.56, 300, 500);
  const last = sigmaViews.get(container);
  const empty = (note: string): void => {
    const frame = `empty|${b.width}|${b.height}|${note}`;
    emptyPlot(container, b, label, note, frame, last?.frame);
    sigmaViews.set(container, { frame, plot: null, path: () => "", designs: new Map() });
  };
  if (sets.length === 0) {
    empty("No design to plot");
    return;
  }
  const range = sigmaRange(sets.map((set) => set.evaluation), target);
  if (!range) {
    empty("No finite values to plot");
    return;
  }
  const { xMin, xMax, yMin, yMax } = range;
  const frame = [b.width, b.height, xMin, xMax, yMin, yMax, target].join("|");
  const view: SigmaView = last && last.frame === frame && last.plot ? last : sigmaFrame(container, b, label, frame, xMin, xMax, yMin, yMax, target);
  sigmaViews.set(container, view);
  const plot = view.plot!;

  // Unselected designs first, so the selected one is drawn on top.
  const ordered = [...sets].sort((a, c) => Number(a.selected) - Number(c.selected));
  const wanted: SVGGElement[] = [];
  const keep = new Set<number>();
  for (const set of ordered) {
    keep.add(set.uid);
    const breakdown = set.selected || breakdownForAll;
    const className = `design cw-c${set.colour}${set.selected ? " selected" : ""}`;
    let drawn = view.designs.get(set.uid);
    if (!drawn) {
      const g = s("g", { class: className, "data-name": set.name });
      drawn = { g, evaluation: set.evaluation, breakdown, className, name: set.name };
      fillCurves(g, set.evaluation, breakdown, view.path);
      view.designs.set(set.uid, drawn);
    } else {
      if (drawn.evaluation !== set.evaluation || drawn.breakdown !== breakdown) {
        drawn.evaluation = set.evaluation;
        drawn.breakdown = breakdown;
        fillCurves(drawn.g, set.evaluation, breakdown, view.path);
      }
      if (drawn.className !== className) {
        drawn.className = className;
        drawn.g.setAttribute("class", className);
      }
      if (drawn.name !== set.name) {
        drawn.name = set.name;
        drawn.g.setAttribute("data-name", set.name);
      }
    }
    wanted.push(drawn.g);
  }
  for (const [uid, drawn] of view.designs) {
    if (!keep.has(uid)) {
      drawn.g.remove();
      view.designs.delete(uid);
    }
  }
  // The design groups follow the target line, in drawing order; move them only when it changed.
  const present = [...plot.children].filter((el) => el.tagName === "g");
  if (present.length !== wanted.length || present.some((el, i) => el !== wanted[i])) plot.append(...wanted);
}

/**
 * A fresh log-log frame in `container`: decade grid, log axes, titles and a clipped group for
 * the curves (`plot`).
 */
function logFrame(container: HTMLElement, b: Box, label: string, [xMin, xMax]: [number, number], [yMin, yMax]: [number, number], xTitle: string, yTitle: string) {
  const svg = svgFor(container, b, label);
  const x = scaleLog().domain([xMin, xMax]).range([b.left, b.width - b.right]);
  const y = scaleLog().domain([yMin, yMax]).range([b.height - b.bottom, b.top]);
  const root = select(svg);
  const grid = root.append("g").attr("class", "grid");
  for (const t of decades(xMin, xMax)) grid.append("line").attr("x1", x(t)).attr("x2", x(t)).attr("y1", b.top).attr("y2", b.height - b.bottom);
  for (const v of decades(yMin, yMax)) grid.append("line").attr("x1", b.left).attr("x2", b.width - b.right).attr("y1", y(v)).attr("y2", y(v));
  logAxis(root.append("g").attr("class", "axis x").attr("transform", `translate(0 ${b.height - b.bottom})`), (sc) => axisBottom(sc), x, xMin, xMax);
  logAxis(root.append("g").attr("class", "axis y").attr("transform", `translate(${b.left} 0)`), (sc) => axisLeft(sc), y, yMin, yMax);
  axisTitle(svg, b, xTitle, yTitle);
  const clip = clipRect(svg, b);
  const plot = root.append("g").attr("clip-path", `url(#${clip})`).node()!;
  return { svg, x, y, plot };
}

/** Draws the grid, axes, titles, clip and target line of the Allan-deviation plot. */
function sigmaFrame(container: HTMLElement, b: Box, label: string, frame: string, xMin: number, xMax: number, yMin: number, yMax: number, target: number | null): SigmaView {
  const { svg, x, y, plot: plotNode } = logFrame(container, b, label, [xMin, xMax], [yMin, yMax], "averaging time τ (s)", "Allan deviation σ_y(τ)");
  const plot = select(plotNode);
  if (target !== null && positive(target) && target >= yMin && target <= yMax) {
    plot.append("line").attr("class", "target-line").attr("x1", b.left).attr("x2", b.width - b.right).attr("y1", y(target)).attr("y2", y(target));
    const label = s("text", { class: "target-label", x: b.left + 6, y: y(target) - 6 });
    svg.append(richSvg(label, `target ${powerText(target, 2)}`));
  }
  const path = (tau: number[], v: number[]): string =>
    line<number>()
      .defined((i) => positive(tau[i]) && positive(v[i]))
      .x((i) => x(tau[i]))
      .y((i) => y(Math.max(v[i], yMin / 10)))(tau.map((_, i) => i)) ?? "";
  return { frame, plot: plot.node(), path, designs: new Map() };
}

/** The curves of one design: the total, and with `breakdown` the mechanisms and the free laser. */
function fillCurves(g: SVGGElement, evaluation: Evaluation, breakdown: boolean, path: (tau: number[], v: number[]) => string): void {
  const c = evaluation.curve;
  const curves: [string, string][] = [];
  if (breakdown) {
    curves.push(["curve free", path(c.tau_s, c.free_laser)]);
    for (const m of MECHANISMS) curves.push([`curve ${m}`, path(c.tau_s, c[m])]);
  }
  curves.push(["curve total", path(c.tau_s, c.total)]);
  // The same curves as before: keep the path elements, change only the shapes that moved.
  const old = g.children;
  if (old.length === curves.length && curves.every(([cls], i) => old[i].getAttribute("class") === cls)) {
    curves.forEach(([, d], i) => {
      if (old[i].getAttribute("d") !== d) old[i].setAttribute("d", d);
    });
    return;
  }
  clear(g);
  g.append(...curves.map(([cls, d]) => s("path", { class: cls, d })));
}

const legendKeys = new WeakMap<HTMLElement, string>();

/** The key of line styles and the design colours, as HTML (names inserted as text). */
export function drawLegend(container: HTMLElement, sets: { colour: number; name: string; stale: boolean }[]): void {
  const key = JSON.stringify(sets);
  if (legendKeys.get(container) === key) return;
  legendKeys.set(container, key);
  clear(container);
  const sample = (cls: string): SVGSVGElement => s("svg", { width: 40, height: 14, "aria-hidden": "true", class: "key" }, s("line", { x1: 2, x2: 38, y1: 7, y2: 7, class: `curve ${cls}` }));
  const designs = h("ul", { class: "legend-designs", attrs: { "aria-label": "Designs" } });
  for (const d of sets) {
    designs.append(h("li", { class: `cw-c${d.colour}` }, sample("total"), h("span", { text: d.name }), d.stale ? h("span", { class: "stale-tag", text: " (last valid result)" }) : null));
  }
  const styles = h(
    "ul",
    { class: "legend-styles", attrs: { "aria-label": "Line styles" } },
    h("li", {}, sample("total"), "total (locked laser)"),
    h("li", {}, sample("laser"), "laser"),
    h("li", {}, sample("projection"), "quantum projection noise"),
    h("li", {}, sample("dick"), "Dick effect"),
    h("li", {}, sample("free"), "free-running laser"),
  );
  container.append(designs, styles);
}

/**
 * What a plot of the selected design shows: `frame` names its axes, `evaluation` and `colour`
 * its curves, `layer` the nodes drawn from them (the last children of the plot).
 */
interface SelectedView {
  frame: string;
  evaluation: Evaluation | null;
  colour: number;
  layer: Element[];
}

const selectedViews = new WeakMap<HTMLElement, SelectedView>();

/**
 * Keeps the frame (axes, titles) of a plot of the selected design while `frame` is unchanged and
 * redraws its curves only when the evaluation or the colour changed, and then only if they look
 * different. `drawFrame` draws a new frame into the emptied container and returns its svg;
 * `drawLayer` returns the curves, not yet in the page.
 */
function selectedPlot(container: HTMLElement, frame: string, evaluation: Evaluation | null, colour: number, drawFrame: () => SVGSVGElement, drawLayer: () => Element[]): void {
  const last = selectedViews.get(container);
  if (last && last.frame === frame) {
    if (last.evaluation === evaluation && last.colour === colour) return;
    const layer = drawLayer();
    if (layer.length === last.layer.length && layer.every((el, i) => el.isEqualNode(last.layer[i]))) {
      selectedViews.set(container, { frame, evaluation, colour, layer: last.layer });
      return;
    }
    for (const el of last.layer) el.remove();
    container.querySelector("svg")?.append(...layer);
    selectedViews.set(container, { frame, evaluation, colour, layer });
    return;
  }
  const svg = drawFrame();
  const layer = drawLayer();
  svg.append(...layer);
  selectedViews.set(container, { frame, evaluation, colour, layer });
}

/** The note shown instead of a plot of the selected design. */
function selectedEmpty(container: HTMLElement, b: Box, label: string, note: string): void {
  const frame = `empty|${b.width}|${b.height}|${note}`;
  const last = selectedViews.get(container);
  emptyPlot(container, b, label, note, frame, last?.frame);
  selectedViews.set(container, { frame, evaluation: null, colour: 0, layer: [] });
}

/** The sensitivity function g(t) over one cycle. */
export function drawSensitivity(container: HTMLElement, evaluation: Evaluation | null, colour: number): void {
  const label = "Sensitivity function g(t) over one cycle of the selected design";
  const b = box(container, 0.62, 220, 330);
  b.left = 64;
  const t = evaluation?.sensitivity.t_s ?? [];
  const gv = evaluation?.sensitivity.g ?? [];
  const n = Math.min(t.length, gv.length);
  const tMax = n > 0 ? t[n - 1] : 0;
  if (n < 2 || !(tMax > 0)) {
    selectedEmpty(container, b, label, "No sensitivity function");
    return;
  }
  const u = timeUnit(tMax);
  const x = scaleLinear().domain([0, tMax * u.factor]).range([b.left, b.width - b.right]);
  const y = scaleLinear().domain([-1.1, 1.1]).range([b.height - b.bottom, b.top]);
  const frame = [b.width, b.height, tMax * u.factor, u.unit].join("|");
  selectedPlot(
    container,
    frame,
    evaluation,
    colour,
    () => {
      const svg = svgFor(container, b, label);
      const root = select(svg);
      linearAxis(root.append("g").attr("class", "axis x").attr("transform", `translate(0 ${b.height - b.bottom})`), axisBottom(x).ticks(6).tickSizeOuter(0));
      linearAxis(
        root.append("g").attr("class", "axis y").attr("transform", `translate(${b.left} 0)`),
        axisLeft(y).tickValues([-1, -0.5, 0, 0.5, 1]).tickFormat((d) => String(d).replace("-", MINUS)).tickSizeOuter(0),
      );
      axisTitle(svg, b, `time in the cycle t (${u.unit})`, "g(t)");
      root.append("line").attr("class", "zero").attr("x1", b.left).attr("x2", b.width - b.right).attr("y1", y(0)).attr("y2", y(0));
      return svg;
    },
    () => {
      const idx = Array.from({ length: n }, (_, i) => i).filter((i) => Number.isFinite(t[i]) && Number.isFinite(gv[i]));
      const g = s(
        "g",
        { class: `design cw-c${colour}` },
        s("path", { class: "fill", d: area<number>().x((i) => x(t[i] * u.factor)).y0(y(0)).y1((i) => y(gv[i]))(idx) ?? "" }),
        s("path", { class: "curve total", d: line<number>().x((i) => x(t[i] * u.factor)).y((i) => y(gv[i]))(idx) ?? "" }),
      );
      return [g];
    },
  );
}

/** Excitation and measured excitation against detuning, with the operating points marked. */
export function drawLineShape(container: HTMLElement, evaluation: Evaluation | null, colour: number): void {
  const label = "Line shape of the selected design: excitation against laser detuning, with the lock's operating points";
  const b = box(container, 0.62, 220, 330);
  b.left = 64;
  const ls = evaluation?.line_shape;
  const d = ls?.detuning_hz ?? [];
  const n = Math.min(d.length, ls?.excitation.length ?? 0, ls?.measured.length ?? 0);
  const idx = Array.from({ length: n }, (_, i) => i).filter((i) => Number.isFinite(d[i]) && Number.isFinite(ls!.excitation[i]) && Number.isFinite(ls!.measured[i]));
  if (!ls || idx.length < 2) {
    selectedEmpty(container, b, label, "No line shape");
    return;
  }
  let span = 0;
  for (const i of idx) span = Math.max(span, Math.abs(d[i]));
  const u = frequencyUnit(span);
  const x = scaleLinear().domain([-span * u.factor, span * u.factor]).range([b.left, b.width - b.right]);
  const y = scaleLinear().domain([0, 1]).range([b.height - b.bottom, b.top]);
  const frame = [b.width, b.height, span * u.factor, u.unit].join("|");
  selectedPlot(
    container,
    frame,
    evaluation,
    colour,
    () => {
      const svg = svgFor(container, b, label);
      const root = select(svg);
      linearAxis(
        root.append("g").attr("class", "axis x").attr("transform", `translate(0 ${b.height - b.bottom})`),
        axisBottom(x)
          .ticks(6)
          .tickFormat((v) => String(v).replace("-", MINUS))
          .tickSizeOuter(0),
      );
      linearAxis(root.append("g").attr("class", "axis y").attr("transform", `translate(${b.left} 0)`), axisLeft(y).ticks(5).tickSizeOuter(0));
      axisTitle(svg, b, `laser detuning (${u.unit})`, "excitation probability");
      return svg;
    },
    () => {
      const g = s(
        "g",
        { class: `design cw-c${colour}` },
        s("path", { class: "curve total", d: line<number>().x((i) => x(d[i] * u.factor)).y((i) => y(ls.excitation[i]))(idx) ?? "" }),
        s("path", { class: "curve measured", d: line<number>().x((i) => x(d[i] * u.factor)).y((i) => y(ls.measured[i]))(idx) ?? "" }),
      );
      const layer: Element[] = [g];
      const op = evaluation!.operating_point;
      if (Number.isFinite(op.detuning_hz) && Number.isFinite(op.measured_excitation)) {
        for (const sign of [-1, 1]) {
          const px = x(sign * op.detuning_hz * u.factor);
          const py = y(op.measured_excitation);
          g.append(s("line", { class: "op-guide", x1: px, x2: px, y1: py, y2: b.height - b.bottom }), s("circle", { class: "op-point", cx: px, cy: py, r: 6 }));
        }
        layer.push(s("text", { class: "op-label", x: b.left + 6, y: b.top + 12 }, `○ ±${numberText(op.detuning_hz * u.factor, 3)} ${u.unit}`));
      }
      return layer;
    },
  );
}

/** One curve of a generic log-log plot; `lo`/`hi` (same length as `x`) draw a band around it. */
export interface LogSeries {
  x: number[];
  y: number[];
  /** Line style: "total", "laser", "projection", "dick", "free", "measured" (see style.css). */
  style: string;
  colour: number;
  name: string;
  lo?: number[];
  hi?: number[];
  /** Draw points (circles) instead of a line. */
  points?: boolean;
}

/** A generic log-log plot. */
export interface LogPlotSpec {
  /** Accessible description of the plot. */
  label: string;
  xTitle: string;
  yTitle: string;
  series: LogSeries[];
  /** A horizontal reference line with its label (e.g. a target). */
  reference?: { value: number; label: string };
  /** Shown when nothing can be plotted. */
  empty: string;
}

/**
 * Draws `spec` afresh into `container`: decade grid, log axes, bands (filled, faint), curves
 * and points in the design colours. Non-positive and non-finite values are left out.
 */
export function drawLogPlot(container: HTMLElement, spec: LogPlotSpec): void {
  const b = box(container, 0.56, 280, 460);
  let xLo = Infinity;
  let xHi = 0;
  let yLo = Infinity;
  let yHi = 0;
  for (const sr of spec.series) {
    for (let i = 0; i < sr.x.length; i++) {
      if (!positive(sr.x[i])) continue;
      for (const v of [sr.y[i], sr.lo?.[i], sr.hi?.[i]]) {
        if (v !== undefined && positive(v)) {
          xLo = Math.min(xLo, sr.x[i]);
          xHi = Math.max(xHi, sr.x[i]);
          yLo = Math.min(yLo, v);
          yHi = Math.max(yHi, v);
        }
      }
    }
  }
  const ref = spec.reference && positive(spec.reference.value) ? spec.reference : undefined;
  if (ref && yHi > 0 && ref.value > yLo / 100 && ref.value < yHi * 100) {
    yLo = Math.min(yLo, ref.value);
    yHi = Math.max(yHi, ref.value);
  }
  if (!(xHi > xLo) || !(yHi > 0)) {
    emptyPlot(container, b, spec.label, spec.empty, "empty", undefined);
    return;
  }
  const xMin = 10 ** Math.floor(Math.log10(xLo) + 1e-9);
  const xMax = 10 ** Math.ceil(Math.log10(xHi) - 1e-9);
  const yMin = 10 ** Math.floor(Math.log10(yLo));
  const yMax = 10 ** Math.ceil(Math.log10(yHi) + (yHi === yLo ? 1 : 0));
  const { svg, x, y, plot } = logFrame(container, b, spec.label, [xMin, xMax], [yMin, yMax], spec.xTitle, spec.yTitle);
  if (ref && ref.value >= yMin && ref.value <= yMax) {
    plot.append(s("line", { class: "target-line", x1: b.left, x2: b.width - b.right, y1: y(ref.value), y2: y(ref.value) }));
    svg.append(richSvg(s("text", { class: "target-label", x: b.left + 6, y: y(ref.value) - 6 }), ref.label));
  }
  const clampY = (v: number): number => y(Math.min(Math.max(v, yMin / 10), yMax * 10));
  for (const sr of spec.series) {
    const g = s("g", { class: `design cw-c${sr.colour}`, "data-name": sr.name });
    const idx = sr.x.map((_, i) => i).filter((i) => positive(sr.x[i]));
    if (sr.lo && sr.hi) {
      const lo = sr.lo;
      const hi = sr.hi;
      const bandIdx = idx.filter((i) => positive(lo[i]) && positive(hi[i]));
      g.append(s("path", { class: "band", d: area<number>().x((i) => x(sr.x[i])).y0((i) => clampY(lo[i])).y1((i) => clampY(hi[i]))(bandIdx) ?? "" }));
    }
    const lineIdx = idx.filter((i) => positive(sr.y[i]));
    if (sr.points) {
      for (const i of lineIdx) g.append(s("circle", { class: `point ${sr.style}`, cx: x(sr.x[i]), cy: clampY(sr.y[i]), r: 3.5 }));
    } else {
      const d =
        line<number>()
          .defined((i) => positive(sr.y[i]))
          .x((i) => x(sr.x[i]))
          .y((i) => clampY(sr.y[i]))(idx) ?? "";
      g.append(s("path", { class: `curve ${sr.style}`, d }));
    }
    plot.append(g);
  }
}
