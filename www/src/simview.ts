// Simulation and measured data: runs the cycle-by-cycle simulation of the selected design in
// the background worker (progress bar, Cancel), and imports a measured CSV (also in the
// worker); both Allan deviations are drawn with their confidence bands over the analytic
// curve, and the departures the engine flags are listed in words.

import { clear, h } from "./dom";
import { jobs, problemsOf, problemText, type Design, type Problem } from "./engine";
import type { Estimate, MeasuredResult, SimOptions, SimResult } from "../dist/pkg/clockwright_wasm.js";
import { Cancelled } from "./jobs";
import { appendDuration, appendNumber, numberText, parseNumber } from "./format";
import { drawLogPlot, watchWidth, type LogSeries } from "./plots";
import type { Slot } from "./workspace";

/** Cycles run between two looks at the worker's message queue (progress, cancel). */
export const CHUNK_CYCLES = 20_000;
/** Simulated time of a run when the length field is empty: one day of clock operation. */
export const DEFAULT_RUN_S = 86_400;
/**
 * Most cycles of a run with the default length: well under a minute in Chromium at the
 * measured wasm rate (see README, Performance).
 */
export const DEFAULT_MAX_CYCLES = 1_000_000;
/** Largest measured-data file read, bytes. */
export const MAX_CSV_BYTES = 32 * 1024 * 1024;

/** What the page hands the view. */
export interface SimHost {
  /** The selected design slot (or null). */
  selected(): Slot | null;
  /** All slots, to find the one a result belongs to. */
  slots(): Slot[];
}

interface SimRun {
  uid: number;
  key: string;
  name: string;
  colour: number;
  result: SimResult;
}

interface Measured {
  file: string;
  result: MeasuredResult;
}

/** The controls of the view, by role. */
interface Els {
  cycles: HTMLInputElement;
  cyclesHint: HTMLElement;
  cyclesError: HTMLElement;
  seed: HTMLInputElement;
  seedError: HTMLElement;
  second: HTMLInputElement;
  noise: HTMLInputElement;
  run: HTMLButtonElement;
  cancel: HTMLButtonElement;
  bar: HTMLElement;
  fill: HTMLElement;
  status: HTMLElement;
  plot: HTMLElement;
  drop: HTMLElement;
  file: HTMLInputElement;
  fileButton: HTMLButtonElement;
  clearMeasured: HTMLButtonElement;
  fileStatus: HTMLElement;
  findings: HTMLElement;
  table: HTMLTableElement;
  measuredTable: HTMLTableElement;
}

const keyOf = (d: Design): string => JSON.stringify(d);

/** Builds the view inside `root` and returns `refresh`, to call after every redraw of the page. */
export function mountSimulation(root: HTMLElement, host: SimHost): { refresh(): void } {
  const el = build(root);
  let run: SimRun | null = null;
  let measured: Measured | null = null;
  let shownKey = "";

  /** The run length in cycles, or a problem; also writes the hint. */
  const lengthOf = (slot: Slot | null): { cycles: number } | { problem: Problem } => {
    const text = el.cycles.value.trim();
    const tc = slot?.evaluation?.cycle_time_s ?? 0;
    if (text === "") {
      if (!(tc > 0)) return { problem: { path: "cycles", value: "", allowed: "the design has no valid evaluation yet, so one day cannot be converted into cycles; enter a number of cycles" } };
      return { cycles: Math.max(16, Math.min(DEFAULT_MAX_CYCLES, Math.round(DEFAULT_RUN_S / tc))) };
    }
    const r = parseNumber(text, true);
    if (!r.ok) return { problem: { path: "cycles", value: JSON.stringify(text), allowed: r.allowed } };
    return { cycles: r.value };
  };

  const showHint = (): void => {
    const slot = host.selected();
    const n = lengthOf(slot);
    clear(el.cyclesHint);
    if (!("cycles" in n)) return;
    const tc = slot?.evaluation?.cycle_time_s ?? 0;
    appendNumber(el.cyclesHint, n.cycles, 4);
    el.cyclesHint.append(" cycles");
    if (tc > 0) {
      el.cyclesHint.append(" ≈ ");
      appendDuration(el.cyclesHint, n.cycles * tc);
      el.cyclesHint.append(" of clock operation");
    }
  };

  const setProgress = (fraction: number | null): void => {
    el.bar.hidden = fraction === null;
    const pct = Math.round((fraction ?? 0) * 100);
    el.bar.setAttribute("aria-valuenow", String(pct));
    el.bar.setAttribute("aria-valuetext", `${pct} % simulated`);
    el.fill.style.width = `${pct}%`;
  };

  const fieldProblem = (input: HTMLInputElement, out: HTMLElement, p: Problem | null): void => {
    clear(out);
    if (p) {
      input.setAttribute("aria-invalid", "true");
      out.append(h("span", { class: "problem", text: problemText(p) }));
    } else input.removeAttribute("aria-invalid");
  };

  const start = async (): Promise<void> => {
    const slot = host.selected();
    if (!slot) return;
    const n = lengthOf(slot);
    const seedText = el.seed.value.trim();
    const seed = parseNumber(seedText === "" ? "1" : seedText, true);
    fieldProblem(el.cycles, el.cyclesError, "problem" in n ? n.problem : null);
    fieldProblem(el.seed, el.seedError, seed.ok ? null : { path: "seed", value: JSON.stringify(seedText), allowed: seed.allowed });
    if (!("cycles" in n) || !seed.ok) return;
    const options: Partial<SimOptions> = { cycles: n.cycles, seed: seed.value, second_integrator: el.second.checked, laser_noise: el.noise.checked };
    const design = structuredClone(slot.design);
    el.run.disabled = true;
    el.cancel.disabled = false;
    el.status.textContent = `Simulating “${design.name}”…`;
    setProgress(0);
    const t0 = performance.now();
    try {
      const result = (await jobs().run("simulate", { design, options }, CHUNK_CYCLES, (f) => setProgress(f))) as SimResult;
      const seconds = (performance.now() - t0) / 1000;
      run = { uid: slot.uid, key: keyOf(design), name: design.name, colour: slot.colour, result };
      const rate = (result.cycles + result.settle_cycles) / seconds;
      clear(el.status);
      el.status.append(`Simulated ${result.cycles} cycles of “${design.name}” (seed ${result.seed}) in ${seconds.toFixed(1)} s: `);
      appendNumber(el.status, rate, 2);
      el.status.append(" cycles per second.");
      el.root.dataset.rate = String(rate);
    } catch (err) {
      if (err instanceof Cancelled) el.status.textContent = "Cancelled; the last result stays on screen.";
      else {
        const ps = problemsOf(err);
        clear(el.status);
        el.status.append(h("span", { text: "The simulation did not run:" }), h("ul", {}, ...ps.slice(0, 20).map((p) => h("li", { class: "problem", text: problemText(p) }))));
      }
    } finally {
      el.run.disabled = false;
      el.cancel.disabled = true;
      setProgress(null);
      draw();
    }
  };

  const importFile = async (f: File): Promise<void> => {
    if (f.size > MAX_CSV_BYTES) {
      el.fileStatus.textContent = `${f.name} holds ${f.size} bytes; a measured-data file may hold at most ${MAX_CSV_BYTES} bytes. The last result stays on screen.`;
      return;
    }
    if (jobs().busy) {
      el.fileStatus.textContent = "A simulation is running; import the file when it has finished or after Cancel.";
      return;
    }
    el.fileStatus.textContent = `Reading ${f.name}…`;
    try {
      const text = await f.text();
      const result = (await jobs().run("measured", { text, options: null }, 1)) as MeasuredResult;
      measured = { file: f.name, result };
      const gaps = result.gap_count > 0 ? `; ${result.gap_count} gap(s), ${result.gap_samples} missing sample(s) left out` : "";
      el.fileStatus.textContent = `${f.name}: ${result.samples} samples of ${result.quantity} (${result.unit}) every ${numberText(result.tau0_s, 4)} s${gaps}.`;
      el.clearMeasured.hidden = false;
    } catch (err) {
      if (err instanceof Cancelled) {
        el.fileStatus.textContent = "Cancelled.";
        return;
      }
      const ps = problemsOf(err);
      clear(el.fileStatus);
      el.fileStatus.append(
        h("span", { text: `${f.name} was not imported; the last result stays on screen. Problems:` }),
        h("ul", {}, ...ps.slice(0, 20).map((p) => h("li", { class: "problem", text: problemText(p) }))),
      );
    }
    draw();
  };

  /** Whether the run's design still is what the run simulated, and under which name. */
  const runState = (): { stale: string | null } => {
    if (!run) return { stale: null };
    const slot = host.slots().find((s) => s.uid === run!.uid);
    if (!slot) return { stale: `“${run.name}” has been removed since this run` };
    if (keyOf(slot.design) !== run.key) return { stale: `“${run.name}” has been edited since this run` };
    return { stale: null };
  };

  const draw = (): void => {
    const st = runState();
    const series: LogSeries[] = [];
    if (run) {
      const r = run.result;
      series.push({ x: r.analytic.tau_s, y: r.analytic.total, style: "total", colour: run.colour, name: `${run.name}: analytic` });
      series.push(estimateSeries(r.locked, "measured", run.colour, `${run.name}: simulated`, true));
    }
    if (measured) series.push(estimateSeries(measured.result.adev, "measured", 7, `${measured.file}: measured`, false));
    drawLogPlot(el.plot, {
      label: "Allan deviation of the simulated locked laser (points with confidence band) over the analytic curve, and of imported measured data",
      xTitle: "averaging time τ (s)",
      yTitle: "Allan deviation σ_y(τ)",
      series,
      empty: "Press Simulate, or drop a measured CSV here",
    });
    drawFindings(el, run, st.stale, measured);
    root.closest(".card")?.classList.toggle("stale", st.stale !== null);
  };

  el.run.addEventListener("click", () => void start());
  el.cancel.addEventListener("click", () => jobs().cancel());
  el.cycles.addEventListener("input", showHint);
  el.fileButton.addEventListener("click", () => el.file.click());
  el.file.addEventListener("change", () => {
    const f = el.file.files?.[0];
    el.file.value = "";
    if (f) void importFile(f);
  });
  el.clearMeasured.addEventListener("click", () => {
    measured = null;
    el.clearMeasured.hidden = true;
    el.fileStatus.textContent = "The measured curve was removed.";
    draw();
  });
  el.drop.addEventListener("dragover", (ev) => {
    ev.preventDefault();
    el.drop.classList.add("dragging");
  });
  el.drop.addEventListener("dragleave", () => el.drop.classList.remove("dragging"));
  el.drop.addEventListener("drop", (ev) => {
    ev.preventDefault();
    el.drop.classList.remove("dragging");
    const f = ev.dataTransfer?.files?.[0];
    if (f) void importFile(f);
  });
  watchWidth(el.plot, draw);
  draw();

  const view = {
    refresh() {
      showHint();
      const sel = host.selected();
      el.run.textContent = sel ? `Simulate “${sel.design.name || "(unnamed)"}”` : "Simulate";
      el.run.disabled = !sel || jobs_busy();
      const k = run ? `${runState().stale}` : "";
      if (k !== shownKey) {
        shownKey = k;
        draw();
      }
    },
  };
  // The run button follows the worker: free again when another view's job ends.
  try {
    jobs().watch(() => view.refresh());
  } catch {
    // No worker in this page: the button stays as refresh() sets it.
  }
  return view;
}

function jobs_busy(): boolean {
  try {
    return jobs().busy;
  } catch {
    return false;
  }
}

function estimateSeries(e: Estimate, style: string, colour: number, name: string, points: boolean): LogSeries {
  return {
    x: e.points.map((p) => p.tau_s),
    y: e.points.map((p) => p.deviation),
    lo: e.points.map((p) => p.ci_low),
    hi: e.points.map((p) => p.ci_high),
    style,
    colour,
    name,
    points,
  };
}

/** A table cell showing `v` with a superscript exponent, or "—" with the reason. */
function numCell(v: number | undefined, digits = 3, cls = "", mark = ""): HTMLTableCellElement {
  const td = h("td", { class: cls });
  if (v === undefined) td.append("— (outside the analytic grid)");
  else if (Number.isFinite(v)) appendNumber(td, v, digits);
  else td.append("— (no value)");
  if (mark) td.append(mark);
  return td;
}

function drawFindings(el: Els, run: SimRun | null, stale: string | null, measured: Measured | null): void {
  const f = el.findings;
  clear(f);
  clear(el.table);
  clear(el.measuredTable);
  if (run) {
    const r = run.result;
    if (stale) f.append(h("p", { class: "stale-note", text: `Stale: ${stale}; the curves below are of the design as it was simulated. Simulate again to compare.` }));
    f.append(h("p", { text: `“${run.name}”: ${r.cycles} cycles of ${numberText(r.cycle_time_s, 4)} s after ${r.settle_cycles} settling cycles, seed ${r.seed}; intervals at ${Math.round(r.locked.confidence * 1000) / 10} % confidence.` }));
    if (r.departures.length === 0) {
      f.append(h("p", { class: "agree", text: "Where the two agree: the analytic curve lies within the simulation's confidence interval (widened for the model's tolerance) at every averaging time." }));
    } else {
      f.append(h("p", { text: "Where the two disagree, and why (the analytic value lies outside the simulation's 99.9 % interval widened by the model's 10 % tolerance):" }));
      f.append(
        h(
          "ul",
          { class: "departures" },
          ...r.departures.map((d) => {
            const li = h("li", { text: "τ = " });
            const num = (v: number): void => {
              if (Number.isFinite(v)) appendNumber(li, v, 3);
              else li.append("— (no value)");
            };
            num(d.tau_s);
            li.append(" s: simulated ");
            num(d.simulated);
            li.append(" (99.9 % interval ");
            num(d.ci_low);
            li.append(" to ");
            num(d.ci_high);
            li.append(") against analytic ");
            num(d.analytic);
            li.append(`: ${d.reason.replace(/\.$/, "")}.`);
            return li;
          }),
        ),
      );
    }
    if (r.notes.length > 0) f.append(h("ul", { class: "notes" }, ...r.notes.map((n) => h("li", { text: n }))));
    const head = h("tr", {}, ...["τ (s)", "simulated σ_y", "interval low", "interval high", "analytic σ_y"].map((t) => h("th", { text: t, attrs: { scope: "col" } })));
    const rows = r.locked.points.map((p) => {
      const j = Math.floor(Math.log2(p.m));
      const a = r.analytic.total[j];
      const flagged = r.departures.some((d) => d.tau_s === p.tau_s);
      return h(
        "tr",
        { class: flagged ? "flagged" : "", attrs: { "data-tau": String(p.tau_s) } },
        numCell(p.tau_s, 4),
        numCell(p.deviation, 3, "sim", flagged ? " ⚑" : ""),
        numCell(p.ci_low),
        numCell(p.ci_high),
        numCell(a),
      );
    });
    el.table.append(h("caption", { text: "Simulated against analytic Allan deviation (⚑ flagged departure)" }), h("thead", {}, head), h("tbody", {}, ...rows));
  }
  if (measured) {
    const m = measured.result;
    if (m.notes.length > 0) f.append(h("ul", { class: "notes" }, ...m.notes.map((n) => h("li", { text: `${measured.file}: ${n}` }))));
    const head = h("tr", {}, ...["τ (s)", "measured σ_y", "interval low", "interval high", "terms"].map((t) => h("th", { text: t, attrs: { scope: "col" } })));
    const rows = m.adev.points.map((p) =>
      h("tr", { attrs: { "data-tau": String(p.tau_s) } }, numCell(p.tau_s, 4), numCell(p.deviation, 3, "sim"), numCell(p.ci_low), numCell(p.ci_high), h("td", { text: String(p.terms) })),
    );
    el.measuredTable.append(h("caption", { text: `Overlapping Allan deviation of ${measured.file}` }), h("thead", {}, head), h("tbody", {}, ...rows));
  }
}

function build(root: HTMLElement): Els & { root: HTMLElement } {
  clear(root);
  const cycles = h("input", { attrs: { id: "sim-cycles", type: "text", inputmode: "numeric", autocomplete: "off", placeholder: "one day", "aria-describedby": "sim-cycles-hint sim-cycles-error" } });
  const seed = h("input", { attrs: { id: "sim-seed", type: "text", inputmode: "numeric", autocomplete: "off", value: "1", "aria-describedby": "sim-seed-error" } });
  const second = h("input", { attrs: { id: "sim-second", type: "checkbox" } });
  const noise = h("input", { attrs: { id: "sim-noise", type: "checkbox" } });
  noise.checked = true;
  const run = h("button", { class: "primary", text: "Simulate", attrs: { type: "button", id: "sim-run" } });
  const cancel = h("button", { text: "Cancel", attrs: { type: "button", id: "sim-cancel", disabled: "" } });
  const fill = h("div", { class: "sim-fill" });
  const bar = h("div", { class: "sim-bar", attrs: { id: "sim-progress", role: "progressbar", "aria-label": "Simulation progress", "aria-valuemin": "0", "aria-valuemax": "100", "aria-valuenow": "0" } }, fill);
  bar.hidden = true;
  const status = h("div", { class: "sim-status", attrs: { id: "sim-status", role: "status", "aria-live": "polite" } });
  const cyclesHint = h("span", { class: "unit", attrs: { id: "sim-cycles-hint" } });
  const cyclesError = h("span", { class: "field-error", attrs: { id: "sim-cycles-error", "aria-live": "polite" } });
  const seedError = h("span", { class: "field-error", attrs: { id: "sim-seed-error", "aria-live": "polite" } });
  const plot = h("div", { class: "plot", attrs: { id: "sim-plot" } });
  const key = h("p", { class: "sim-key", text: "Solid line: the analytic curve of the simulated design. Points with a shaded band: the simulated Allan deviation with its confidence interval. Dashed line with a band: imported measured data. Drop a CSV file on the plot to add it." });
  const drop = h("div", { class: "sim-drop", attrs: { id: "sim-drop" } }, plot, key);
  const file = h("input", { attrs: { id: "sim-file", type: "file", accept: ".csv,.txt,text/csv,text/plain", hidden: "" } });
  const fileButton = h("button", { text: "Open measured CSV…", attrs: { type: "button", id: "sim-file-button" } });
  const clearMeasured = h("button", { class: "small", text: "Remove measured curve", attrs: { type: "button", id: "sim-clear-measured" } });
  clearMeasured.hidden = true;
  const fileStatus = h("div", { class: "sim-status", attrs: { id: "sim-file-status", role: "status", "aria-live": "polite" } });
  const findings = h("div", { class: "sim-findings", attrs: { id: "sim-findings" } });
  const table = h("table", { class: "sim-table", attrs: { id: "sim-table" } });
  const measuredTable = h("table", { class: "sim-table", attrs: { id: "sim-measured-table" } });
  const help = h(
    "details",
    { class: "sim-help" },
    h("summary", { text: "Measured-data CSV format (docs/measured-data.md)" }),
    h("p", { text: "Optional directives first: “# tau0_s: 1” (the sample interval) and “# nominal_hz: …” (for df_hz). Then a header of one value column, or a time column (t_s or t_mjd) and a value column: y (fractional frequency), df_hz, or phase x_s, x_ns, x_ps. Cells separated by commas, semicolons or tabs; an empty cell or nan is a missing sample, and holes in the time stamps are gaps." }),
    h("p", { text: `The file is read in this page only; nothing is uploaded. At most ${MAX_CSV_BYTES / 1024 / 1024} MiB.` }),
  );
  root.append(
    h(
      "div",
      { class: "sim-controls" },
      h("div", { class: "field" }, h("label", { text: "Run length (cycles)", attrs: { for: "sim-cycles" } }), h("div", { class: "control" }, cycles, cyclesHint), cyclesError),
      h("div", { class: "field" }, h("label", { text: "Seed", attrs: { for: "sim-seed" } }), h("div", { class: "control" }, seed), seedError),
      h("div", { class: "sim-checks" }, second, h("label", { text: "Second integrator (drift)", attrs: { for: "sim-second" } }), noise, h("label", { text: "Laser noise on", attrs: { for: "sim-noise" } })),
      h("div", { class: "row-buttons" }, run, cancel, fileButton, file, clearMeasured),
      bar,
      status,
      fileStatus,
    ),
    drop,
    help,
    findings,
    h("div", { class: "table-wrap" }, table),
    h("div", { class: "table-wrap" }, measuredTable),
  );
  return { root, cycles, cyclesHint, cyclesError, seed, seedError, second, noise, run, cancel, bar, fill, status, plot, drop, file, fileButton, clearMeasured, fileStatus, findings, table, measuredTable };
}
