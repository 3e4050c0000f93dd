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

/**
 * Allan deviation against averaging time for every design: total solid, the mechanisms
 * dashed or dotted, the free-running laser faint, the target as a grey line.
 */
export function drawSigma(container: HTMLElement, sets: CurveSet[], target: number | null, breakdownForAll: boolean): void {
  const b = box(container, 0.56, 300, 500);
  const svg = svgFor(container, b, "Allan deviation sigma_y(tau) of every design against averaging time, log-log");
  if (sets.length === 0) {
    svg.append(s("text", { x: b.width / 2, y: b.height / 2, "text-anchor": "middle", class: "empty" }, "No design to plot"));
    return;
  }
  let tLo = Infinity;
  let tHi = 0;
  let yLo = Infinity;
  let yHi = 0;
  let totalLo = Infinity;
  let totalHi = 0;
  for (const set of sets) {
    const c = set.evaluation.curve;
    c.tau_s.forEach((t, i) => {
      if (!positive(t)) return;
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
    });
  }
  if (!(tHi > tLo) || !(yHi > 0)) {
    svg.append(s("text", { x: b.width / 2, y: b.height / 2, "text-anchor": "middle", class: "empty" }, "No finite values to plot"));
    return;
  }
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
  const x = scaleLog().domain([xMin, xMax]).range([b.left, b.width - b.right]);
  const y = scaleLog().domain([yMin, yMax]).range([b.height - b.bottom, b.top]);

  const root = select(svg);
  // Decade grid.
  const grid = root.append("g").attr("class", "grid");
  for (const t of decades(xMin, xMax)) grid.append("line").attr("x1", x(t)).attr("x2", x(t)).attr("y1", b.top).attr("y2", b.height - b.bottom);
  for (const v of decades(yMin, yMax)) grid.append("line").attr("x1", b.left).attr("x2", b.width - b.right).attr("y1", y(v)).attr("y2", y(v));

  logAxis(root.append("g").attr("class", "axis x").attr("transform", `translate(0 ${b.height - b.bottom})`), (sc) => axisBottom(sc), x, xMin, xMax);
  logAxis(root.append("g").attr("class", "axis y").attr("transform", `translate(${b.left} 0)`), (sc) => axisLeft(sc), y, yMin, yMax);
  axisTitle(svg, b, "averaging time τ (s)", "Allan deviation σ_y(τ)");

  const clip = clipRect(svg, b);
  const plot = root.append("g").attr("clip-path", `url(#${clip})`);
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
  // Unselected designs first, so the selected one is drawn on top.
  const ordered = [...sets].sort((a, c) => Number(a.selected) - Number(c.selected));
  for (const set of ordered) {
    const c = set.evaluation.curve;
    const g = plot.append("g").attr("class", `design cw-c${set.colour}${set.selected ? " selected" : ""}`).attr("data-name", set.name);
    if (set.selected || breakdownForAll) {
      g.append("path").attr("class", "curve free").attr("d", path(c.tau_s, c.free_laser));
      for (const m of MECHANISMS) g.append("path").attr("class", `curve ${m}`).attr("d", path(c.tau_s, c[m]));
    }
    g.append("path").attr("class", "curve total").attr("d", path(c.tau_s, c.total));
  }
}

/** The key of line styles and the design colours, as HTML (names inserted as text). */
export function drawLegend(container: HTMLElement, sets: { colour: number; name: string; stale: boolean }[]): void {
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

/** The sensitivity function g(t) over one cycle. */
export function drawSensitivity(container: HTMLElement, evaluation: Evaluation | null, colour: number): void {
  const b = box(container, 0.62, 220, 330);
  b.left = 64;
  const svg = svgFor(container, b, "Sensitivity function g(t) over one cycle of the selected design");
  const t = evaluation?.sensitivity.t_s ?? [];
  const gv = evaluation?.sensitivity.g ?? [];
  const n = Math.min(t.length, gv.length);
  const tMax = n > 0 ? t[n - 1] : 0;
  if (n < 2 || !(tMax > 0)) {
    svg.append(s("text", { x: b.width / 2, y: b.height / 2, "text-anchor": "middle", class: "empty" }, "No sensitivity function"));
    return;
  }
  const u = timeUnit(tMax);
  const x = scaleLinear().domain([0, tMax * u.factor]).range([b.left, b.width - b.right]);
  const y = scaleLinear().domain([-1.1, 1.1]).range([b.height - b.bottom, b.top]);
  const root = select(svg);
  linearAxis(root.append("g").attr("class", "axis x").attr("transform", `translate(0 ${b.height - b.bottom})`), axisBottom(x).ticks(6).tickSizeOuter(0));
  linearAxis(
    root.append("g").attr("class", "axis y").attr("transform", `translate(${b.left} 0)`),
    axisLeft(y).tickValues([-1, -0.5, 0, 0.5, 1]).tickFormat((d) => String(d).replace("-", MINUS)).tickSizeOuter(0),
  );
  axisTitle(svg, b, `time in the cycle t (${u.unit})`, "g(t)");
  root.append("line").attr("class", "zero").attr("x1", b.left).attr("x2", b.width - b.right).attr("y1", y(0)).attr("y2", y(0));
  const idx = Array.from({ length: n }, (_, i) => i).filter((i) => Number.isFinite(t[i]) && Number.isFinite(gv[i]));
  const g = root.append("g").attr("class", `design cw-c${colour}`);
  g.append("path")
    .attr("class", "fill")
    .attr("d", area<number>().x((i) => x(t[i] * u.factor)).y0(y(0)).y1((i) => y(gv[i]))(idx) ?? "");
  g.append("path")
    .attr("class", "curve total")
    .attr("d", line<number>().x((i) => x(t[i] * u.factor)).y((i) => y(gv[i]))(idx) ?? "");
}

/** Excitation and measured excitation against detuning, with the operating points marked. */
export function drawLineShape(container: HTMLElement, evaluation: Evaluation | null, colour: number): void {
  const b = box(container, 0.62, 220, 330);
  b.left = 64;
  const svg = svgFor(container, b, "Line shape of the selected design: excitation against laser detuning, with the lock's operating points");
  const ls = evaluation?.line_shape;
  const d = ls?.detuning_hz ?? [];
  const n = Math.min(d.length, ls?.excitation.length ?? 0, ls?.measured.length ?? 0);
  const idx = Array.from({ length: n }, (_, i) => i).filter((i) => Number.isFinite(d[i]) && Number.isFinite(ls!.excitation[i]) && Number.isFinite(ls!.measured[i]));
  if (!ls || idx.length < 2) {
    svg.append(s("text", { x: b.width / 2, y: b.height / 2, "text-anchor": "middle", class: "empty" }, "No line shape"));
    return;
  }
  const span = Math.max(...idx.map((i) => Math.abs(d[i])));
  const u = frequencyUnit(span);
  const x = scaleLinear().domain([-span * u.factor, span * u.factor]).range([b.left, b.width - b.right]);
  const y = scaleLinear().domain([0, 1]).range([b.height - b.bottom, b.top]);
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
  const g = root.append("g").attr("class", `design cw-c${colour}`);
  g.append("path")
    .attr("class", "curve total")
    .attr("d", line<number>().x((i) => x(d[i] * u.factor)).y((i) => y(ls.excitation[i]))(idx) ?? "");
  g.append("path")
    .attr("class", "curve measured")
    .attr("d", line<number>().x((i) => x(d[i] * u.factor)).y((i) => y(ls.measured[i]))(idx) ?? "");
  const op = evaluation!.operating_point;
  if (Number.isFinite(op.detuning_hz) && Number.isFinite(op.measured_excitation)) {
    for (const sign of [-1, 1]) {
      const px = x(sign * op.detuning_hz * u.factor);
      const py = y(op.measured_excitation);
      g.append("line").attr("class", "op-guide").attr("x1", px).attr("x2", px).attr("y1", py).attr("y2", b.height - b.bottom);
      g.append("circle").attr("class", "op-point").attr("cx", px).attr("cy", py).attr("r", 6);
    }
    svg.append(s("text", { class: "op-label", x: b.left + 6, y: b.top + 12 }, `○ ±${numberText(op.detuning_hz * u.factor, 3)} ${u.unit}`));
  }
}
