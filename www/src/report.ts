// The printable design-review report (inputs, assumptions, breakdown, dominant limits, methods
// and references) and the plain-text paragraph for a proposal. Both are written from the
// engine's evaluations; every user string goes in as text.

import { clear, h, rich } from "./dom";
import type { Design } from "./engine";
import { MECHANISM_TEXT, plainNumber, type Result } from "./exports";
import { appendDuration, appendNumber, inputText, tauName } from "./format";

/**
 * The methods the model uses and their references (as in README.md, "Methods and
 * references"; titles from memory). `when` picks those a design uses.
 */
export const METHODS: { method: string; refs: string[]; when?: (d: Design) => boolean }[] = [
  {
    method: "Sensitivity function g(t) of the pulse sequence and the Dick effect (laser noise aliased by the interrogation cycle)",
    refs: [
      "IEEE Trans. UFFC 45, 887 (1998), “Frequency stability degradation of an oscillator slaved to a periodically interrogated atomic resonator”",
      "Proc. 19th PTTI (1987) 133, “Local oscillator induced instabilities in trapped ion frequency standards”",
      "J. Opt. B 5, S150 (2003), “The Dick effect for an optical frequency standard”",
    ],
  },
  {
    method: "Quantum projection noise of the atom number, with detection errors",
    refs: ["Phys. Rev. A 47, 3554 (1993), “Quantum projection noise: population fluctuations in two-level systems”", "Rev. Mod. Phys. 87, 637 (2015), “Optical atomic clocks”"],
  },
  {
    method: "Entangled (squeezed or GHZ) atomic states",
    refs: ["Phys. Rev. A 50, 67 (1994), “Squeezed atomic states and projection noise in spectroscopy”"],
    when: (d) => d.atoms?.entanglement?.kind !== "none",
  },
  {
    method: "Allan and modified Allan variance of the locked laser from the noise spectra, power-law noise types",
    refs: [
      "IEEE Std 1139-2008, “Standard definitions of physical quantities for fundamental frequency and time metrology: random instabilities”",
      "IEEE Trans. Instrum. Meas. IM-20, 105 (1971), “Characterization of frequency stability”",
    ],
  },
  {
    method: "Composite (hyper-Ramsey-type) probe sequence",
    refs: ["Phys. Rev. A 82, 011804 (2010), “Hyper-Ramsey spectroscopy of optical clock transitions”"],
    when: (d) => (d.sequence?.segments ?? []).filter((s) => s.kind === "pulse").length >= 3,
  },
];

/** The model's assumptions, stated beside its numbers (README.md). */
export const ASSUMPTIONS = [
  "Linear response: the lock keeps the laser near its operating point on the line.",
  "A first-order integrating servo with the design's attack time.",
  "Independent noise sources: the servo-filtered laser noise, quantum projection noise and the Dick effect add in variance.",
  "The laser noise is the spectrum entered (power laws and table), cut off at the design's high-frequency cutoff.",
  "Projection noise uses the entered atom number, detection rounds and misassignment probabilities, and the entered entanglement.",
];

/** The references of the methods a set of designs uses, numbered in order of first use. */
export function referencesFor(designs: Design[]): { methods: { method: string; numbers: number[] }[]; refs: string[] } {
  const refs: string[] = [];
  const methods: { method: string; numbers: number[] }[] = [];
  for (const m of METHODS) {
    if (m.when && !designs.some((d) => m.when!(d))) continue;
    const numbers = m.refs.map((r) => {
      let i = refs.indexOf(r);
      if (i < 0) i = refs.push(r) - 1;
      return i + 1;
    });
    methods.push({ method: m.method, numbers });
  }
  return { methods, refs };
}

// ----- plain text numbers ------------------------------------------------------------------------

/** A duration as "4.40×10⁴ s (12.2 h)". */
export function plainDuration(seconds: number): string {
  const units: [number, string][] = [
    [365.25 * 86400, "years"],
    [86400, "days"],
    [3600, "h"],
    [60, "min"],
  ];
  const big = units.find(([size]) => seconds >= size);
  return `${plainNumber(seconds)} s${big ? ` (${(seconds / big[0]).toPrecision(3)} ${big[1]})` : ""}`;
}

/**
 * The proposal paragraph for one design: the projected instability at 1 s equivalent and at
 * the checkpoints, the time to reach the target, what limits it, the model's caveat and the
 * references of the methods used.
 */
export function proposalText(r: Result): string {
  const e = r.evaluation;
  const name = r.name.trim() === "" ? "the design" : `the design “${r.name.replace(/\s+/g, " ").trim()}”`;
  const first = e.checkpoints[0];
  const lastCp = e.checkpoints[e.checkpoints.length - 1];
  const s: string[] = [];
  s.push(
    `For ${name} (${r.design.transition.label}, ${r.design.atoms.count} ${r.design.atoms.count === 1 ? "atom" : "atoms"}, a cycle of ${plainNumber(e.cycle_time_s)} s with ${plainNumber(e.probe_time_s)} s of probing), ` +
      `the model projects a fractional frequency instability of ${plainNumber(e.sigma_1s_equivalent)} at 1 s equivalent (σ_y(τ) ≈ ${plainNumber(e.sigma_1s_equivalent)} (τ/1 s)^(−1/2) while white frequency noise dominates)` +
      (e.checkpoints.length > 0 ? `, and σ_y = ${e.checkpoints.map((c) => `${plainNumber(c.total)} at ${tauName(c.tau_s)}`).join(", ")} of averaging.` : "."),
  );
  const t = e.target;
  if (t.time_s !== null) {
    const lim = t.dominant;
    s.push(`It reaches the target instability of ${plainNumber(t.target)} after ${plainDuration(t.time_s)} of averaging${lim ? `, where ${MECHANISM_TEXT[lim]} limits it` : ""}.`);
  } else {
    s.push(`It does not reach the target instability of ${plainNumber(t.target)} within the averaging times computed${t.note ? ` (${t.note.replace(/\.$/, "")})` : ""}.`);
  }
  if (first && lastCp) {
    s.push(
      first.dominant === lastCp.dominant
        ? `From ${tauName(first.tau_s)} to ${tauName(lastCp.tau_s)} the instability is limited by ${MECHANISM_TEXT[first.dominant]}.`
        : `At ${tauName(first.tau_s)} the instability is limited by ${MECHANISM_TEXT[first.dominant]}, at ${tauName(lastCp.tau_s)} by ${MECHANISM_TEXT[lastCp.dominant]}.`,
    );
  }
  s.push(`Quantum projection noise alone would give ${plainNumber(e.projection.sigma_1s)} at 1 s, the Dick effect ${plainNumber(e.dick.sigma_1s)}.`);
  if (e.limits.coherence_probe_limit_s !== null) s.push(`The laser's coherence limits the probe time to about ${plainNumber(e.limits.coherence_probe_limit_s)} s.`);
  const { methods, refs } = referencesFor([r.design]);
  s.push(
    `These are model estimates (linear response, a first-order integrating servo, independent noise sources); measured performance decides. ` +
      `Methods: ${methods.map((m) => `${m.method} [${m.numbers.join(", ")}]`).join("; ")}.`,
  );
  return `${s.join(" ")}\n\nReferences\n${refs.map((ref, i) => `[${i + 1}] ${ref}`).join("\n")}\n`;
}

// ----- the report -----------------------------------------------------------------------------

/** Every input of a design as (path, value) rows; a spectrum table is summarised. */
export function inputRows(design: Design): [string, string][] {
  const rows: [string, string][] = [];
  const walk = (v: unknown, path: string): void => {
    if (path === "laser.table.points" && Array.isArray(v)) {
      const fs = v.map((p) => (Array.isArray(p) ? Number(p[0]) : NaN)).filter(Number.isFinite);
      rows.push([path, fs.length > 0 ? `${v.length} points from ${plainNumber(Math.min(...fs))} Hz to ${plainNumber(Math.max(...fs))} Hz` : `${v.length} points`]);
      return;
    }
    if (Array.isArray(v)) {
      if (v.length === 0) rows.push([path, "none"]);
      v.forEach((x, i) => walk(x, `${path}[${i}]`));
    } else if (v !== null && typeof v === "object") {
      for (const [k, x] of Object.entries(v)) walk(x, path === "" ? k : `${path}.${k}`);
    } else {
      // Numbers exactly as the design file holds them.
      rows.push([path, v === null ? "none" : typeof v === "number" ? inputText(v) : String(v)]);
    }
  };
  walk(design, "");
  return rows;
}

/** Writes the report of `results` (with the target `target`) into `el`. */
export function drawReport(el: HTMLElement, results: Result[], target: number): void {
  clear(el);
  el.append(h("h2", { text: "Design-review report" }));
  const p = h("p", { class: "report-meta" }, `${results.length} ${results.length === 1 ? "design" : "designs"}; target instability `);
  appendNumber(p, target, 3);
  p.append(`; written ${new Date().toISOString().slice(0, 10)} by Clockwright from the workspace shown above.`);
  el.append(p);
  el.append(h("p", { class: "report-note", text: "Projections are model estimates; they rest on the assumptions below and on the numbers entered. Measured performance decides." }));

  el.append(h("h3", { text: "Assumptions" }), h("ul", {}, ...ASSUMPTIONS.map((a) => h("li", { text: a }))));

  for (const r of results) {
    const e = r.evaluation;
    const sec = h("section", { class: `report-design cw-c${r.colour}` });
    sec.append(h("h3", {}, h("span", { class: "swatch", attrs: { "aria-hidden": "true" } }), " ", h("span", { class: "design-name", text: r.name || "(unnamed)" })));

    const sum = h("dl", { class: "details" });
    const item = (label: string, fill: (dd: HTMLElement) => void) => {
      const dd = h("dd");
      fill(dd);
      sum.append(h("dt", { text: label }), dd);
    };
    item("1-s-equivalent level", (dd) => appendNumber(dd, e.sigma_1s_equivalent, 3));
    item("Time to the target", (dd) => (e.target.time_s === null ? dd.append(`not reached${e.target.note ? ` (${e.target.note})` : ""}`) : appendDuration(dd, e.target.time_s)));
    item("Cycle, probe and dead time", (dd) => {
      appendNumber(dd, e.cycle_time_s, 3, "s");
      dd.append(", ");
      appendNumber(dd, e.probe_time_s, 3, "s");
      dd.append(", ");
      appendNumber(dd, e.dead_time_s, 3, "s");
    });
    item("Projection noise and Dick effect at 1 s", (dd) => {
      appendNumber(dd, e.projection.sigma_1s, 3);
      dd.append(" and ");
      appendNumber(dd, e.dick.sigma_1s, 3);
      dd.append(` (Dick sum of ${e.dick.harmonics_summed} harmonics, truncation bound `);
      appendNumber(dd, e.dick.truncation_bound_relative, 2);
      dd.append(" relative)");
    });
    sec.append(sum);

    const table = h("table", { class: "comparison report-breakdown" }, rich(h("caption"), "Breakdown of σ_y(τ) by mechanism"));
    const head = h("tr", {}, ...["τ", "total", "laser (servo-filtered)", "projection noise", "Dick effect", "dominant"].map((t) => h("th", { attrs: { scope: "col" }, text: t })));
    table.append(h("thead", {}, head));
    const body = h("tbody");
    for (const c of e.checkpoints) {
      const tr = h("tr", {}, h("th", { attrs: { scope: "row" }, text: tauName(c.tau_s) }));
      for (const v of [c.total, c.laser, c.projection, c.dick]) {
        const td = h("td");
        appendNumber(td, v, 3);
        tr.append(td);
      }
      tr.append(h("td", { text: MECHANISM_TEXT[c.dominant] }));
      body.append(tr);
    }
    table.append(body);
    sec.append(table);

    const limits = h("ul", { class: "notes" });
    if (e.target.time_s !== null) {
      const lim = e.target.dominant;
      if (lim) limits.append(h("li", { text: `At the time to the target, ${MECHANISM_TEXT[lim]} dominates.` }));
    }
    const coh = h("li", {}, "Laser phase excursion over the probe ");
    appendNumber(coh, e.limits.probe_phase_rms_rad, 3, "rad rms");
    coh.append("; probe limit from laser coherence ");
    if (e.limits.coherence_probe_limit_s === null) coh.append("above 10⁵ s");
    else appendNumber(coh, e.limits.coherence_probe_limit_s, 3, "s");
    coh.append(".");
    limits.append(coh);
    for (const n of e.limits.notes) limits.append(h("li", { text: n }));
    sec.append(h("h4", { text: "Dominant limits" }), limits);

    const inputs = h("table", { class: "report-inputs" }, h("caption", { text: "Inputs (as in the design file)" }));
    const ib = h("tbody");
    for (const [path, value] of inputRows(r.design)) ib.append(h("tr", {}, h("th", { attrs: { scope: "row" }, text: path }), h("td", { text: value })));
    inputs.append(ib);
    sec.append(inputs);
    el.append(sec);
  }

  const { methods, refs } = referencesFor(results.map((r) => r.design));
  el.append(h("h3", { text: "Methods and references" }));
  el.append(h("ul", {}, ...methods.map((m) => h("li", {}, `${m.method} [${m.numbers.join(", ")}]`))));
  const ol = h("ol", { class: "report-refs" });
  for (const ref of refs) ol.append(h("li", { text: ref }));
  el.append(ol);
}
