// Trade-off studies: the optimum probe time of the selected design, sweeps (curves for every
// design) and maps (heat map with the engine's contours, in the worker), and uncertainty
// bands (in the worker). The engine computes; this view converts, forwards and draws.

import * as cw from "../dist/pkg/clockwright_wasm.js";
import { clear, h, s } from "./dom";
import { jobs, problemsOf, problemText, type Design, type Problem } from "./engine";
import { Cancelled, JobFailed } from "./jobs";
import { appendNumber, numberText, parseNumber } from "./format";
import { drawLegend, drawLogPlot, type LogSeries } from "./plots";
import { joinPath, type Key } from "./paths";
import type { Slot } from "./workspace";

/** What the view needs from the page. */
export interface StudyHost {
  slots(): Slot[];
  selected(): Slot | null;
  /** Replaces the design of `slot` through the editor's path (validation, redraw, storage). */
  apply(slot: Slot, design: Design): void;
}

/** Most field paths offered in a select. */
const MAX_PATHS = 80;
/** Points evaluated between progress reports in the worker. */
const MAP_CHUNK = 25;
const BAND_CHUNK = 8;
/** Sweeps with more evaluations than this (points times designs) go to the worker. */
const SYNC_SWEEP_MAX = 800;


/** Numeric leaves of a design as the core names them ("sequence.segments[2].duration_s"). */
function numericPaths(v: unknown, keys: Key[] = [], out: string[] = []): string[] {
  if (out.length >= MAX_PATHS) return out;
  if (typeof v === "number") {
    if (keys[0] !== "schema_version") out.push(joinPath(keys));
  }
  else if (Array.isArray(v)) v.forEach((x, i) => numericPaths(x, [...keys, i], out));
  else if (v && typeof v === "object") for (const [k, x] of Object.entries(v)) numericPaths(x, [...keys, k], out);
  return out;
}

function field(label: string, control: HTMLElement): HTMLLabelElement {
  return h("label", { class: "study-field" }, h("span", { text: label }), control);
}
function num(value: string, name: string): HTMLInputElement {
  return h("input", { attrs: { type: "text", inputmode: "decimal", value, name, size: "7" } });
}
function choice(name: string, options: [string, string][]): HTMLSelectElement {
  const el = h("select", { attrs: { name } });
  for (const [v, t] of options) el.append(h("option", { text: t, attrs: { value: v } }));
  return el;
}
function button(text: string, cls = ""): HTMLButtonElement {
  return h("button", { text, class: cls, attrs: { type: "button" } });
}

/** Reads a number field; a problem names `path` when the text is not a number. */
function read(el: HTMLInputElement, path: string, problems: Problem[], integer = false): number {
  const r = parseNumber(el.value, integer);
  if (r.ok) return r.value;
  problems.push({ path, value: JSON.stringify(el.value), allowed: r.allowed });
  return NaN;
}

/** Runs `f` (a request check); shows the engine's problems in `el` and returns false if it throws. */
function checked(el: HTMLElement, f: () => void): boolean {
  try {
    f();
    return true;
  } catch (err) {
    showProblems(el, problemsOf(err));
    return false;
  }
}

function showProblems(el: HTMLElement, problems: Problem[]): void {
  clear(el);
  for (const p of problems.slice(0, 8)) el.append(h("p", { class: "problem", text: problemText(p) }));
}

/** Perceptually ordered colour scale (viridis, nine anchors, linear between them). */
const SCALE = ["#440154", "#472d7b", "#3b528b", "#2c728e", "#21918c", "#28ae80", "#5ec962", "#addc30", "#fde725"];
export function scaleColour(t: number): string {
  const u = Math.min(Math.max(t, 0), 1) * (SCALE.length - 1);
  const i = Math.min(Math.floor(u), SCALE.length - 2);
  const f = u - i;
  const a = SCALE[i];
  const b = SCALE[i + 1];
  let out = "#";
  for (let k = 1; k < 7; k += 2) {
    const c = Math.round(parseInt(a.slice(k, k + 2), 16) * (1 - f) + parseInt(b.slice(k, k + 2), 16) * f);
    out += c.toString(16).padStart(2, "0");
  }
  return out;
}

export function mountStudy(root: HTMLElement, host: StudyHost): void {
  // ----- optimum -------------------------------------------------------------------------
  const optTau = num("1000", "optimum-tau");
  const optRounds = num("", "optimum-rounds");
  const optRun = button("Find the optimum");
  const optCancel = button("Cancel");
  optCancel.hidden = true;
  const optProgress = h("progress", { attrs: { "aria-label": "optimum search" } });
  optProgress.hidden = true;
  const optErr = h("div", { class: "study-error", attrs: { role: "alert" } });
  const optOut = h("div", { class: "study-optimum", attrs: { "aria-live": "polite" } });
  root.append(
    h("h3", { text: "Optimum probe time (selected design)" }),
    h("div", { class: "study-row" }, field("at τ (s)", optTau), field("detection rounds up to (optional)", optRounds), optRun, optCancel, optProgress),
    optErr,
    optOut,
  );
  optRun.addEventListener("click", () => {
    const slot = host.selected();
    if (!slot) return;
    const problems: Problem[] = [];
    const tau = read(optTau, "tau_s", problems);
    const rounds = optRounds.value.trim() === "" ? null : read(optRounds, "max_rounds", problems, true);
    showProblems(optErr, problems);
    if (problems.length > 0) return;
    // In the worker: a search over many detection rounds takes seconds.
    const design = structuredClone(slot.design);
    void background(optRun, optCancel, optProgress, optErr, "optimum", { design, request: { tau_s: tau, max_rounds: rounds } }, 1, (r) => showOptimum(slot, r as cw.Optimum));
  });
  const showOptimum = (slot: Slot, o: cw.Optimum): void => {
    clear(optErr);
    clear(optOut);
    const dl = h("dl", { class: "study-facts" });
    const row = (term: string, fill: (dd: HTMLElement) => void, key: string): void => {
      const dd = h("dd", { data: { key } });
      fill(dd);
      dl.append(h("dt", { text: term }), dd);
    };
    row(o.probe_shape === "ramsey_free_time" ? "best free-evolution time" : "best pulse time", (dd) => appendNumber(dd, o.probe_time_s, 4, "s"), "probe");
    if (o.per_rounds.length > 0) row("detection rounds", (dd) => dd.append(String(o.rounds)), "rounds");
    row(`σ_y at τ = ${numberText(o.tau_s)} s`, (dd) => appendNumber(dd, o.sigma, 4), "sigma");
    row("set by", (dd) => dd.append(o.mechanism.replace(/_/g, " ").replace("dick", "Dick")), "mechanism");
    row("searched", (dd) => {
      appendNumber(dd, o.range_s[0], 3, "s");
      dd.append(" to ");
      appendNumber(dd, o.range_s[1], 3, "s");
      dd.append(o.at_range_end ? ` (optimum at the range end: ${o.range_end.replace(/_/g, " ")})` : ` (range ends at the ${o.range_end.replace(/_/g, " ")})`);
    }, "range");
    const apply = button(`Apply to “${slot.design.name || "(unnamed)"}”`);
    apply.addEventListener("click", () => {
      if (host.slots().includes(slot)) host.apply(slot, structuredClone(o.design));
      apply.disabled = true;
      apply.textContent = "Applied";
    });
    optOut.append(dl, h("p", { text: o.explanation }), apply);
  };

  // ----- sweeps and maps -----------------------------------------------------------------
  const axis = (name: string): { path: HTMLSelectElement; from: HTMLInputElement; to: HTMLInputElement; points: HTMLInputElement; spacing: HTMLSelectElement; row: HTMLElement } => {
    const path = h("select", { attrs: { name: `${name}-path` } });
    const from = num("1", `${name}-from`);
    const to = num("20", `${name}-to`);
    const points = num("20", `${name}-points`);
    const spacing = choice(`${name}-spacing`, [["linear", "linear"], ["log", "log"]]);
    const row = h("div", { class: "study-row" }, field(`${name} field`, path), field("from", from), field("to", to), field("points", points), field("spacing", spacing));
    return { path, from, to, points, spacing, row };
  };
  const x = axis("x");
  const y = axis("y");
  y.from.value = "1";
  y.to.value = "100";
  y.points.value = "12";
  y.spacing.value = "log";
  const useMap = h("input", { attrs: { type: "checkbox", name: "map" } });
  const output = choice("output", [
    ["sigma_at", "σ_y at τ"],
    ["sigma_1s_equivalent", "1-s-equivalent white level"],
    ["time_to_target", "time to target"],
    ["dick_share", "Dick share at 1 s"],
    ["dick_1s", "Dick effect at 1 s"],
    ["projection_1s", "projection noise at 1 s"],
    ["probe_phase_rms_rad", "probe phase (rad rms)"],
    ["cycle_time_s", "cycle time"],
  ]);
  const param = num("1000", "output-param");
  const paramLabel = field("τ (s)", param);
  const sweepRun = button("Run");
  const sweepCancel = button("Cancel");
  sweepCancel.hidden = true;
  const progress = h("progress", { attrs: { max: "1", value: "0", "aria-label": "map progress" } });
  progress.hidden = true;
  const sweepErr = h("div", { class: "study-error", attrs: { role: "alert" } });
  const sweepOut = h("div", { class: "study-plot", attrs: { "aria-live": "polite" } });
  y.row.hidden = true;
  root.append(
    h("h3", { text: "Sweeps and maps" }),
    x.row,
    h("div", { class: "study-row" }, h("label", { class: "study-check" }, useMap, " map over a second field (selected design)")),
    y.row,
    h("div", { class: "study-row" }, field("output", output), paramLabel, sweepRun, sweepCancel, progress),
    sweepErr,
    sweepOut,
  );
  const fillPaths = (): void => {
    const sel = host.selected();
    const paths = sel ? numericPaths(sel.design) : [];
    for (const [el, want] of [[x.path, "atoms.count"], [y.path, "lock.attack_time_s"], [bandPath, "atoms.count"]] as const) {
      const keep = el.value || want;
      if (el.options.length === paths.length && [...el.options].every((o, i) => o.value === paths[i])) continue;
      clear(el);
      for (const p of paths) el.append(h("option", { text: p, attrs: { value: p } }));
      el.value = paths.includes(keep) ? keep : (paths[0] ?? "");
    }
  };
  useMap.addEventListener("change", () => (y.row.hidden = !useMap.checked));
  output.addEventListener("change", () => {
    const k = output.value;
    paramLabel.hidden = k !== "sigma_at" && k !== "time_to_target";
    paramLabel.querySelector("span")!.textContent = k === "time_to_target" ? "target" : "τ (s)";
    param.value = k === "time_to_target" ? "1e-18" : "1000";
  });
  const readAxis = (a: typeof x, name: string, problems: Problem[]): cw.Axis => ({
    path: a.path.value,
    from: read(a.from, `${name}.from`, problems),
    to: read(a.to, `${name}.to`, problems),
    points: read(a.points, `${name}.points`, problems, true),
    spacing: a.spacing.value as cw.Spacing,
  });
  const readOutput = (problems: Problem[]): cw.Output => {
    const k = output.value;
    if (k === "sigma_at") return { kind: "sigma_at", tau_s: read(param, "output.tau_s", problems) };
    if (k === "time_to_target") return { kind: "time_to_target", target: read(param, "output.target", problems) };
    return { kind: k } as cw.Output;
  };
  sweepCancel.addEventListener("click", () => jobs().cancel());
  sweepRun.addEventListener("click", () => {
    const problems: Problem[] = [];
    const request: cw.GridRequest = { x: readAxis(x, "x", problems), output: readOutput(problems) };
    if (useMap.checked) request.y = readAxis(y, "y", problems);
    showProblems(sweepErr, problems);
    if (problems.length > 0) return;
    const slots = host.slots();
    if (!request.y && request.x.points * slots.length > SYNC_SWEEP_MAX) {
      if (!checked(sweepErr, () => new cw.MapRun(slots.map((s) => s.design), request).free())) return;
      void background(sweepRun, sweepCancel, progress, sweepErr, "map", { designs: slots.map((s) => s.design), request }, MAP_CHUNK, (r) => drawSweep(sweepOut, r as cw.GridResult, slots));
      return;
    }
    if (!request.y) {
      try {
        performance.mark("cw-sweep-start");
        const r = cw.sweep(slots.map((s) => s.design), request);
        performance.mark("cw-sweep-computed");
        drawSweep(sweepOut, r, slots);
        performance.measure("cw-sweep", "cw-sweep-start");
        performance.measure("cw-sweep-engine", "cw-sweep-start", "cw-sweep-computed");
      } catch (err) {
        showProblems(sweepErr, problemsOf(err));
      }
      return;
    }
    const sel = host.selected();
    if (!sel) return;
    // Check the request at once so a bad field shows without starting the worker.
    if (!checked(sweepErr, () => new cw.MapRun([sel.design], request).free())) return;
    void background(sweepRun, sweepCancel, progress, sweepErr, "map", { designs: [sel.design], request }, MAP_CHUNK, (r) => drawMap(sweepOut, r as cw.GridResult, request.x.spacing === "log", request.y?.spacing === "log"));
  });

  // ----- bands ---------------------------------------------------------------------------
  const bandPath = h("select", { attrs: { name: "band-path" } });
  const dist = choice("distribution", [["uniform", "uniform (low, high)"], ["log_uniform", "log-uniform (low, high)"], ["normal", "normal (mean, sd)"], ["log_normal", "log-normal (median, σ ln)"]]);
  const pa = num("1", "band-a");
  const pb = num("3", "band-b");
  const samples = num("200", "band-samples");
  const bandRun = button("Run");
  const bandCancel = button("Cancel");
  bandCancel.hidden = true;
  const bandProgress = h("progress", { attrs: { max: "1", value: "0", "aria-label": "band progress" } });
  bandProgress.hidden = true;
  const bandErr = h("div", { class: "study-error", attrs: { role: "alert" } });
  const bandOut = h("div", { class: "study-plot", attrs: { "aria-live": "polite" } });
  root.append(
    h("h3", { text: "Uncertainty bands (selected design)" }),
    h("div", { class: "study-row" }, field("uncertain field", bandPath), field("distribution", dist), field("first", pa), field("second", pb), field("samples", samples), bandRun, bandCancel, bandProgress),
    bandErr,
    bandOut,
  );
  bandCancel.addEventListener("click", () => jobs().cancel());
  bandRun.addEventListener("click", () => {
    const sel = host.selected();
    if (!sel) return;
    const problems: Problem[] = [];
    const a = read(pa, "uncertain[0].distribution", problems);
    const b = read(pb, "uncertain[0].distribution", problems);
    const n = read(samples, "samples", problems, true);
    showProblems(bandErr, problems);
    if (problems.length > 0) return;
    const k = dist.value;
    const distribution: cw.Distribution =
      k === "normal" ? { kind: "normal", mean: a, sd: b } : k === "log_normal" ? { kind: "log_normal", median: a, sigma_ln: b } : { kind: k as "uniform" | "log_uniform", low: a, high: b };
    const request: cw.BandRequest = { uncertain: [{ path: bandPath.value, distribution }], samples: n, quantiles: [0.16, 0.5, 0.84] };
    if (!checked(bandErr, () => new cw.BandRun(sel.design, request).free())) return;
    const colour = sel.colour;
    void background(bandRun, bandCancel, bandProgress, bandErr, "bands", { design: sel.design, request }, BAND_CHUNK, (r) => drawBands(bandOut, r as cw.BandResult, colour, sel.design.name));
  });

  root.addEventListener("focusin", fillPaths);
  root.addEventListener("pointerenter", fillPaths);
  fillPaths();
}

/** Runs a job in the worker with progress and cancel; the last good result stays on failure. */
async function background(run: HTMLButtonElement, cancel: HTMLButtonElement, bar: HTMLProgressElement, err: HTMLElement, kind: string, input: Record<string, unknown>, chunk: number, done: (r: unknown) => void): Promise<void> {
  const j = jobs();
  if (j.busy) {
    showProblems(err, [{ path: "(worker)", value: "", allowed: "another background job is running; cancel it or wait for it" }]);
    return;
  }
  run.disabled = true;
  cancel.hidden = false;
  bar.hidden = false;
  if (chunk > 1) bar.value = 0;
  performance.mark(`cw-${kind}-start`);
  try {
    const r = await j.run(kind, input, chunk, (f) => (bar.value = f));
    performance.measure(`cw-${kind}`, `cw-${kind}-start`);
    clear(err);
    done(r);
  } catch (e) {
    if (e instanceof Cancelled) showProblems(err, [{ path: kind, value: "", allowed: "cancelled; the last result stays" }]);
    else showProblems(err, e instanceof JobFailed ? e.problems : problemsOf(e));
  } finally {
    run.disabled = false;
    cancel.hidden = true;
    bar.hidden = true;
  }
}

function drawSweep(el: HTMLElement, r: cw.GridResult, slots: Slot[]): void {
  clear(el);
  const series: LogSeries[] = r.series.map((sr, i) => ({
    x: r.x,
    y: sr.values.map((v) => v ?? NaN),
    style: "total",
    colour: slots[i]?.colour ?? i,
    name: sr.design_name,
  }));
  const plot = h("div", { class: "plot study-sweep" });
  el.append(plot);
  drawLogPlot(plot, { label: `${r.output_label} against ${r.x_path} for each design`, xTitle: r.x_path, yTitle: r.output_label, series, empty: "No point of the sweep has a positive value." });
  const legend = h("div", { class: "legend" });
  el.append(legend);
  drawLegend(legend, series.map((sr) => ({ colour: sr.colour, name: sr.name, stale: false })));
  const holes = r.series.flatMap((sr) => sr.holes.slice(0, 3).map((hl) => `${sr.design_name} at ${r.x_path} = ${numberText(r.x[hl.index])}: ${hl.reason}`));
  for (const t of holes) el.append(h("p", { class: "study-hole", text: t }));
}

function drawMap(el: HTMLElement, r: cw.GridResult, xLog: boolean, yLog: boolean): void {
  clear(el);
  const sr = r.series[0];
  if (!sr) return;
  const nx = r.x.length;
  const ny = r.y.length;
  const logv = r.output.kind !== "dick_share";
  const tf = (v: number): number => (logv ? Math.log10(v) : v);
  const finite = sr.values.filter((v): v is number => v !== null && (!logv || v > 0)).map(tf);
  const lo = Math.min(...finite);
  const hi = Math.max(...finite);
  const W = 560;
  const H = 360;
  const L = 70;
  const B = 46;
  const T = 10;
  const R = 10;
  const ax = (vals: number[], log: boolean, a: number, b: number): ((v: number) => number) => {
    const f = (v: number): number => (log ? Math.log10(v) : v);
    const f0 = f(vals[0]);
    const f1 = f(vals[vals.length - 1]);
    return (v) => a + ((f(v) - f0) / (f1 - f0 || 1)) * (b - a);
  };
  const X = ax(r.x, xLog, L, W - R);
  const Y = ax(r.y, yLog, H - B, T);
  // Cell edges halfway between axis values (in the axis's own scale).
  const edges = (vals: number[], f: (v: number) => number): number[] => {
    const p = vals.map(f);
    return p.map((_, i) => [i === 0 ? p[0] - (p[1] - p[0]) / 2 : (p[i - 1] + p[i]) / 2, i === p.length - 1 ? p[i] + (p[i] - p[i - 1]) / 2 : (p[i] + p[i + 1]) / 2]).flat();
  };
  const ex = edges(r.x, X);
  const ey = edges(r.y, Y);
  const svg = s("svg", { viewBox: `0 0 ${W} ${H}`, role: "img", class: "study-map", "aria-label": `map of ${r.output_label} over ${r.x_path} and ${r.y_path}` });
  const clip = s("clipPath", { id: "study-map-clip" }, s("rect", { x: L, y: T, width: W - L - R, height: H - T - B }));
  svg.append(s("defs", {}, clip));
  const cells = s("g", { "clip-path": "url(#study-map-clip)" });
  for (let iy = 0; iy < ny; iy++) {
    for (let ix = 0; ix < nx; ix++) {
      const v = sr.values[iy * nx + ix];
      const x0 = Math.min(ex[2 * ix], ex[2 * ix + 1]);
      const y0 = Math.min(ey[2 * iy], ey[2 * iy + 1]);
      const rect = s("rect", { x: x0, y: y0, width: Math.abs(ex[2 * ix + 1] - ex[2 * ix]) + 0.5, height: Math.abs(ey[2 * iy + 1] - ey[2 * iy]) + 0.5 });
      const at = `${r.x_path} = ${numberText(r.x[ix])}, ${r.y_path} = ${numberText(r.y[iy])}`;
      if (v === null || (logv && !(v > 0))) {
        const reason = sr.holes.find((hl) => hl.index === iy * nx + ix)?.reason ?? "no positive value";
        rect.setAttribute("class", "study-hole-cell");
        rect.append(s("title", {}, `${at}: hole (${reason})`));
      } else {
        rect.setAttribute("fill", scaleColour(hi > lo ? (tf(v) - lo) / (hi - lo) : 0.5));
        rect.append(s("title", {}, `${at}: ${numberText(v)}`));
      }
      cells.append(rect);
    }
  }
  svg.append(cells);
  const contours = s("g", { class: "study-contours", "clip-path": "url(#study-map-clip)" });
  for (const c of sr.contours) {
    const g = s("g", { "data-level": String(c.level) }, s("title", {}, `contour ${numberText(c.level)}`));
    for (const [x0, y0, x1, y1] of c.segments) g.append(s("line", { x1: X(x0), y1: Y(y0), x2: X(x1), y2: Y(y1) }));
    contours.append(g);
  }
  svg.append(contours);
  const text = (x: number, y: number, t: string, anchor = "middle"): SVGTextElement => s("text", { x, y, "text-anchor": anchor, class: "study-tick" }, t);
  svg.append(
    s("rect", { x: L, y: T, width: W - L - R, height: H - T - B, class: "study-frame" }),
    text(L, H - B + 16, numberText(r.x[0])),
    text(W - R, H - B + 16, numberText(r.x[nx - 1]), "end"),
    text((L + W - R) / 2, H - 8, r.x_path),
    text(L - 4, H - B, numberText(r.y[0]), "end"),
    text(L - 4, T + 10, numberText(r.y[ny - 1]), "end"),
  );
  const ylab = text(14, (T + H - B) / 2, r.y_path ?? "");
  ylab.setAttribute("transform", `rotate(-90 14 ${(T + H - B) / 2})`);
  svg.append(ylab);
  const key = h("div", { class: "study-key" });
  if (finite.length > 0) {
    // The bar's gradient (the same nine anchors) is in study.css: inline styles are not allowed.
    const bar = h("span", { class: "study-key-bar", attrs: { "aria-hidden": "true" } });
    const back = (t: number): number => (logv ? 10 ** t : t);
    key.append(h("span", { text: `${r.output_label}: ` }), h("span", { text: numberText(back(lo)) }), bar, h("span", { text: numberText(back(hi)) }), h("span", { text: `${logv ? " (log)" : ""}; lines: contours; grey: holes` }));
  }
  const levels = sr.contours.map((c) => numberText(c.level, 2)).join(", ");
  el.append(h("p", { class: "study-caption", text: `${sr.design_name}: ${nx} × ${ny} points, ${sr.holes.length} holes${levels ? `; contours at ${levels}` : ""}` }), svg, key);
}

function drawBands(el: HTMLElement, r: cw.BandResult, colour: number, name: string): void {
  clear(el);
  const qi = (q: number): number => r.quantiles.findIndex((x) => Math.abs(x - q) < 1e-12);
  const [i16, i50, i84] = [qi(0.16), qi(0.5), qi(0.84)];
  const col = (k: number): number[] => (r.curve[k] ?? []).map((v) => v ?? NaN);
  const plot = h("div", { class: "plot study-band" });
  el.append(plot);
  drawLogPlot(plot, {
    label: `σ_y(τ) of ${name} with its 16–84 % band`,
    xTitle: "τ (s)",
    yTitle: "σ_y(τ)",
    series: [
      { x: r.tau_s, y: col(i50), lo: col(i16), hi: col(i84), style: "total", colour, name: `${name} (median)` },
      { x: r.tau_s, y: r.nominal_curve, style: "laser", colour, name: `${name} (nominal)` },
    ],
    empty: "No sample gave a curve.",
  });
  el.append(h("p", { class: "study-caption", text: `${r.method} Band: 16–84 %; solid: median; dashed: nominal design.` }));
  const table = h("table", { class: "study-table" }, h("thead", {}, h("tr", {}, ...["quantity", "nominal", "16 %", "median", "84 %"].map((t) => h("th", { text: t, attrs: { scope: "col" } })))));
  const body = h("tbody");
  for (const sc of r.scalars) {
    const tr = h("tr", { data: { name: sc.name } }, h("th", { text: sc.name, attrs: { scope: "row" } }));
    for (const v of [sc.nominal, sc.values[i16], sc.values[i50], sc.values[i84]]) {
      const td = h("td");
      if (v === null || v === undefined || !Number.isFinite(v)) td.append(h("span", { text: "—", title: sc.not_finite > 0 ? `${sc.not_finite} samples never reach it (infinite)` : "no value" }));
      else appendNumber(td, v, 3);
      tr.append(td);
    }
    body.append(tr);
  }
  table.append(body);
  el.append(table);
}
