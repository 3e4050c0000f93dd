// The design editor: every field of the selected design, grouped as a clock physicist reads
// a design. Each input carries the engine's field path (data-path), so problems land on it.

import { clear, h, rich, uniqueId } from "./dom";
import { engine, problemsOf, problemText, type DeadLabel, type Design, type NoiseTerm, type Preset, type PresetInfo, type Problem, type Segment, type SpectrumUnit } from "./engine";
import { appendNumber, inputText, numberParts, parseNumber } from "./format";
import { getAt, parentPath, setAt } from "./paths";
import { MAX_FILE_BYTES, type Slot } from "./workspace";

export interface EditorHost {
  /** A value of the slot's design changed: recompute. */
  changed(slot: Slot): void;
  /** The shape of the design changed (segments, terms, kinds): rebuild the form, recompute. */
  restructured(slot: Slot, focusKey?: string): void;
}

interface NumberSpec {
  path: string;
  label: string;
  unit: string;
  integer?: boolean;
  /** When set, an empty field means null; the text is the placeholder. */
  optional?: string;
  hint?: string;
}

const SUPERSCRIPT: Record<string, string> = { "-": "⁻", "0": "⁰", "1": "¹", "2": "²", "3": "³", "4": "⁴", "5": "⁵", "6": "⁶", "7": "⁷", "8": "⁸", "9": "⁹" };

/** "Hz" to a power, as a unit label: 0 -> "1", -3 -> "Hz⁻³". */
function hzPower(e: number): string {
  if (e === 0) return "1";
  if (e === 1) return "Hz";
  return "Hz" + String(e).replace(/[-0-9]/g, (c) => SUPERSCRIPT[c]);
}

const SEGMENT_KINDS: [Segment["kind"], string][] = [
  ["pulse", "Pulse (light on)"],
  ["free", "Free evolution"],
  ["dead", "Dead time"],
];
const DEAD_LABELS: [DeadLabel, string][] = [
  ["cooling", "Cooling"],
  ["state_preparation", "State preparation"],
  ["detection", "Detection (one round)"],
  ["other", "Other"],
];
const NOISE_KINDS: [NoiseTerm["kind"], string][] = [
  ["white_frequency", "White frequency noise, by σ at 1 s"],
  ["flicker_floor", "Flicker frequency floor, by σ"],
  ["random_walk", "Random-walk frequency noise, by σ at 1 s"],
  ["power_law", "Power law, by coefficient and α"],
  ["power_law_at", "Power law, by level at one frequency"],
];
const UNIT_NAMES: Record<SpectrumUnit, string> = { s_y: "S_y(f), 1/Hz", s_nu: "S_ν(f), Hz²/Hz", l_dbc: "L(f), dBc/Hz" };
const VALUE_UNITS: Record<SpectrumUnit, string> = { s_y: "1/Hz", s_nu: "Hz²/Hz", l_dbc: "dBc/Hz" };
const PRESET_PARAMS: Record<string, string> = { probe_time_s: "Probe time", pulse_s: "π/2 pulse time", free_s: "Free evolution time" };

/** Starting values of a newly added term of each kind; every one is an editable field. */
function newTerm(kind: NoiseTerm["kind"]): NoiseTerm {
  switch (kind) {
    case "white_frequency":
      return { kind, sigma_y_1s: 1e-15 };
    case "flicker_floor":
      return { kind, sigma_y: 1e-16 };
    case "random_walk":
      return { kind, sigma_y_1s: 1e-17 };
    case "power_law":
      return { kind, alpha: 0, coefficient: 2e-30, unit: "s_y" };
    case "power_law_at":
      return { kind, alpha: 2, at_hz: 1000, value: -100, unit: "l_dbc" };
  }
}

/** A segment of another kind that keeps the duration. */
function convertSegment(seg: Segment, kind: Segment["kind"]): Segment {
  const duration_s = seg.duration_s;
  switch (kind) {
    case "pulse":
      return { kind, duration_s, area_pi: 1, phase_deg: 0, detuning_offset_hz: 0 };
    case "free":
      return { kind, duration_s };
    case "dead":
      return { kind, label: "other", duration_s };
  }
}

const isProbe = (s: Segment): boolean => s.kind === "pulse" || s.kind === "free";

export class Editor {
  private root: HTMLElement;
  private host: EditorHost;
  private presets: PresetInfo[];
  private slot: Slot | null = null;
  /** Preset parameters typed by the user, by preset id. */
  private presetText = new Map<string, Record<string, string>>();
  private presetId = "";
  private summary: HTMLElement | null = null;
  private generalError: HTMLElement;

  constructor(root: HTMLElement, host: EditorHost, presets: PresetInfo[]) {
    this.root = root;
    this.host = host;
    this.presets = presets;
    this.presetId = presets[0]?.id ?? "";
    this.generalError = h("div", { class: "general-error", attrs: { role: "alert" } });
  }

  /** Builds the form for `slot` (or an empty note). */
  render(slot: Slot | null, focusKey?: string): void {
    this.slot = slot;
    clear(this.root);
    if (!slot) {
      this.root.append(h("p", { class: "empty", text: "No design selected. Add one in the list above." }));
      return;
    }
    const d = slot.design;
    this.generalError = h("div", { class: "general-error", attrs: { role: "alert" } });
    this.root.append(
      this.generalError,
      this.section("Design", "", this.textField("name", "Name", "shown in the table and the legends")),
      this.section(
        "Transition",
        "transition",
        this.textField("transition.label", "Label", "e.g. the ion and the levels"),
        this.numberField({ path: "transition.frequency_hz", label: "Frequency ν_0", unit: "Hz" }),
        this.numberField({ path: "transition.lifetime_s", label: "Excited-state lifetime", unit: "s", optional: "none (no decay)", hint: "leave empty for a state that does not decay during the probe" }),
        this.speciesField(),
        this.numberField({ path: "transition.k_alpha", label: "Sensitivity to α, K_α", unit: "", optional: "the catalog's value", hint: "overrides the catalog species' K_α in clock comparisons" }),
      ),
      this.atomsSection(d),
      this.sequenceSection(d),
      this.section(
        "Detection",
        "detection",
        this.numberField({ path: "detection.rounds", label: "Detection rounds", unit: "per cycle", integer: true, hint: "majority vote; each round repeats the detection dead time" }),
        this.numberField({ path: "detection.misread_ground", label: "Ground read as excited", unit: "probability per round" }),
        this.numberField({ path: "detection.misread_excited", label: "Excited read as ground", unit: "probability per round" }),
      ),
      this.laserSection(d),
      this.section(
        "Lock",
        "lock",
        this.numberField({ path: "lock.attack_time_s", label: "Servo attack time", unit: "s", hint: "at least one cycle" }),
        this.selectField("lock.operating_point", "Operating point", [
          ["best_slope_to_noise", "Best slope-to-noise"],
          ["half_maximum", "Half maximum"],
        ]),
      ),
    );
    if (focusKey) {
      const el = this.root.querySelector<HTMLElement>(`[data-focus-key="${CSS.escape(focusKey)}"]`);
      el?.focus();
    }
  }

  /** Shows the cycle, probe and dead time of the last good evaluation. */
  showSummary(slot: Slot): void {
    if (!this.summary || slot !== this.slot) return;
    clear(this.summary);
    const ev = slot.evaluation;
    if (!ev) return;
    this.summary.append("Cycle ");
    appendNumber(this.summary, ev.cycle_time_s, 3, "s");
    this.summary.append(" · probe ");
    appendNumber(this.summary, ev.probe_time_s, 3, "s");
    this.summary.append(" · dead time ");
    appendNumber(this.summary, ev.dead_time_s, 3, "s");
    if (slot.problems.length > 0 || slot.drafts.size > 0) this.summary.append(" (last valid design)");
  }

  /** Marks every field that has a problem and writes the problem next to it. */
  showProblems(slot: Slot): void {
    if (slot !== this.slot) return;
    for (const el of this.root.querySelectorAll<HTMLElement>(".invalid")) el.classList.remove("invalid");
    for (const el of this.root.querySelectorAll<HTMLElement>("[aria-invalid]")) el.removeAttribute("aria-invalid");
    for (const el of this.root.querySelectorAll<HTMLElement>(".field-error, .group-error")) clear(el);
    clear(this.generalError);
    const problems: Problem[] = [...slot.drafts.values()].map((dr) => dr.problem);
    for (const p of slot.problems) if (!slot.drafts.has(p.path)) problems.push(p);
    for (const p of problems) {
      const field = this.findField(p.path);
      if (field) {
        field.classList.add("invalid");
        field.querySelector("[data-path]")?.setAttribute("aria-invalid", "true");
        field.querySelector(".field-error")?.append(h("span", { class: "problem", text: problemText(p) }));
        continue;
      }
      const group = this.findGroup(p.path);
      const target = group?.querySelector(":scope > .group-error") ?? this.generalError;
      group?.classList.add("invalid");
      target.append(h("span", { class: "problem", text: problemText(p) }));
    }
  }

  private findField(path: string): HTMLElement | null {
    return this.root.querySelector<HTMLElement>(`.field[data-field="${CSS.escape(path)}"]`);
  }

  private findGroup(path: string): HTMLElement | null {
    let p = path;
    while (p !== "") {
      const g = this.root.querySelector<HTMLElement>(`[data-group="${CSS.escape(p)}"]`);
      if (g) return g;
      p = parentPath(p);
    }
    return null;
  }

  // ----- building blocks ---------------------------------------------------------------

  private section(title: string, group: string, ...children: (Node | null)[]): HTMLFieldSetElement {
    const fs = h("fieldset", { class: "section" }, h("legend", { text: title }));
    if (group) fs.dataset.group = group;
    fs.append(h("div", { class: "group-error", attrs: { role: "alert" } }));
    for (const c of children) if (c) fs.append(c);
    return fs;
  }

  private fieldShell(path: string, label: string, control: HTMLElement, unit: string, hint?: string): HTMLElement {
    const id = uniqueId("f");
    control.id = id;
    control.dataset.path = path;
    control.dataset.focusKey = path;
    const err = h("span", { class: "field-error", id: `${id}-err`, attrs: { "aria-live": "polite" } });
    const describedBy = [err.id];
    const row = h("div", { class: "control" }, control);
    if (unit) {
      const u = h("span", { class: "unit", id: `${id}-unit`, text: unit });
      row.append(u);
      describedBy.unshift(u.id);
    }
    let hintEl: HTMLElement | null = null;
    if (hint) {
      hintEl = h("span", { class: "hint", id: `${id}-hint`, text: hint });
      describedBy.push(hintEl.id);
    }
    control.setAttribute("aria-describedby", describedBy.join(" "));
    return h("div", { class: "field", data: { field: path } }, rich(h("label", { attrs: { for: id } }), label), row, hintEl, err);
  }

  private numberField(spec: NumberSpec): HTMLElement {
    const slot = this.slot!;
    const input = h("input", { attrs: { type: "text", inputmode: "decimal", autocomplete: "off", spellcheck: "false" } });
    if (spec.optional) input.placeholder = spec.optional;
    const draft = slot.drafts.get(spec.path);
    const cur = getAt(slot.design, spec.path);
    input.value = draft ? draft.text : typeof cur === "number" ? inputText(cur) : "";
    // Large and small values are echoed as m×10^n under the field.
    const echo = h("span", { class: "echo", attrs: { "aria-hidden": "true" } });
    const showEcho = (v: unknown) => {
      clear(echo);
      if (typeof v === "number" && numberParts(v, 4)?.exponent != null) {
        echo.append("= ");
        appendNumber(echo, v, 4, spec.unit);
      }
    };
    showEcho(draft ? null : cur);
    input.addEventListener("input", () => {
      const text = input.value;
      if (spec.optional && text.trim() === "") {
        slot.drafts.delete(spec.path);
        setAt(slot.design, spec.path, null);
        showEcho(null);
      } else {
        const r = parseNumber(text, spec.integer);
        if (r.ok) {
          slot.drafts.delete(spec.path);
          setAt(slot.design, spec.path, r.value);
          showEcho(r.value);
        } else {
          slot.drafts.set(spec.path, { text, problem: { path: spec.path, value: JSON.stringify(text), allowed: r.allowed } });
          showEcho(null);
        }
      }
      this.host.changed(slot);
    });
    const field = this.fieldShell(spec.path, spec.label, input, spec.unit, spec.hint);
    field.querySelector(".control")?.after(echo);
    return field;
  }

  private textField(path: string, label: string, hint?: string): HTMLElement {
    const slot = this.slot!;
    const input = h("input", { attrs: { type: "text", autocomplete: "off" } });
    const cur = getAt(slot.design, path);
    input.value = typeof cur === "string" ? cur : "";
    input.addEventListener("input", () => {
      setAt(slot.design, path, input.value);
      this.host.changed(slot);
    });
    return this.fieldShell(path, label, input, "", hint);
  }

  private selectField(path: string, label: string, options: [string, string][], onChange?: (value: string) => void, unit = ""): HTMLElement {
    const slot = this.slot!;
    const sel = h("select");
    const cur = String(getAt(slot.design, path));
    for (const [value, text] of options) {
      const o = h("option", { text });
      o.value = value;
      o.selected = value === cur;
      sel.append(o);
    }
    sel.addEventListener("change", () => {
      if (onChange) onChange(sel.value);
      else {
        setAt(slot.design, path, sel.value);
        this.host.changed(slot);
      }
    });
    return this.fieldShell(path, label, sel, unit);
  }

  /** The catalog species of the transition (it supplies K_α for clock comparisons). */
  private speciesField(): HTMLElement {
    const slot = this.slot!;
    const options: [string, string][] = [["", "none (no catalog species)"], ...engine.speciesCatalog().map((sp): [string, string] => [sp.id, sp.name])];
    return this.selectField("transition.species", "Catalog species", options, (value) => {
      if (value === "") delete slot.design.transition.species;
      else slot.design.transition.species = value;
      this.host.changed(slot);
    });
  }

  private button(text: string, label: string, focusKey: string, onClick: () => void, disabled = false): HTMLButtonElement {
    const b = h("button", { class: "small", text, attrs: { type: "button", "aria-label": label, title: label }, data: { focusKey } });
    b.disabled = disabled;
    b.addEventListener("click", onClick);
    return b;
  }

  // ----- sections -------------------------------------------------------------------------

  private atomsSection(d: Design): HTMLElement {
    const slot = this.slot!;
    const ent = d.atoms.entanglement;
    return this.section(
      "Atoms",
      "atoms",
      this.numberField({ path: "atoms.count", label: "Atoms or ions probed", unit: "per cycle", integer: true }),
      this.selectField(
        "atoms.entanglement.kind",
        "Entanglement",
        [
          ["none", "None (uncorrelated)"],
          ["squeezed", "Spin squeezed"],
          ["ghz", "GHZ state"],
        ],
        (v) => {
          const kind = v as "none" | "squeezed" | "ghz";
          slot.design.atoms.entanglement = kind === "squeezed" ? { kind, gain_db: 6 } : { kind };
          this.host.restructured(slot, "atoms.entanglement.kind");
        },
      ),
      ent.kind === "squeezed" ? this.numberField({ path: "atoms.entanglement.gain_db", label: "Metrological gain", unit: "dB", hint: "10·log10(1/ξ²)" }) : null,
    );
  }

  private sequenceSection(d: Design): HTMLElement {
    const slot = this.slot!;
    const segs = d.sequence.segments;
    const list = h("ol", { class: "segments" });
    segs.forEach((seg, i) => list.append(this.segmentItem(seg, i, segs.length)));
    const add = (kind: Segment["kind"]) => () => {
      const ss = slot.design.sequence.segments;
      const lastPulse = ss.map((x) => x.kind).lastIndexOf("pulse");
      const like = [...ss].reverse().find((x) => x.kind === kind);
      const seg: Segment = like ? structuredClone(like) : convertSegment({ kind: "free", duration_s: 0.01 }, kind);
      // Pulses go after the last pulse, free evolution before it, dead time at the end.
      const at = kind === "pulse" ? lastPulse + 1 : kind === "free" && lastPulse >= 0 ? lastPulse : ss.length;
      ss.splice(at, 0, seg);
      this.clearDrafts(slot, "sequence.segments");
      this.host.restructured(slot, `sequence.segments[${at}].kind`);
    };
    this.summary = h("p", { class: "summary", attrs: { "aria-live": "polite" } });
    const wrap = h(
      "fieldset",
      { class: "section", data: { group: "sequence" } },
      h("legend", { text: "Sequence (one cycle)" }),
      h("div", { class: "group-error", attrs: { role: "alert" } }),
      this.presetRow(),
      h("p", { class: "hint", text: "Segments in time order. Dead time is the sum of the dead segments; detection segments repeat with the detection rounds." }),
      h("div", { class: "list-group", data: { group: "sequence.segments" } }, h("div", { class: "group-error", attrs: { role: "alert" } }), list),
      h(
        "div",
        { class: "row-buttons" },
        this.button("+ pulse", "Add a pulse after the last pulse", "add-pulse", add("pulse")),
        this.button("+ free evolution", "Add free evolution before the last pulse", "add-free", add("free")),
        this.button("+ dead time", "Add dead time at the end of the cycle", "add-dead", add("dead")),
      ),
      this.summary,
    );
    this.showSummary(slot);
    return wrap;
  }

  private segmentItem(seg: Segment, i: number, n: number): HTMLElement {
    const slot = this.slot!;
    const p = `sequence.segments[${i}]`;
    const move = (to: number, key: string) => () => {
      const ss = slot.design.sequence.segments;
      const [x] = ss.splice(i, 1);
      ss.splice(to, 0, x);
      this.clearDrafts(slot, "sequence.segments");
      this.host.restructured(slot, key.replace("#", String(to)));
    };
    const li = h("li", { class: "item", data: { group: p } });
    li.append(
      h(
        "div",
        { class: "item-head" },
        h("span", { class: "item-title", text: `Segment ${i + 1}` }),
        this.button("↑", `Move segment ${i + 1} up`, `${p}.up`, move(i - 1, "sequence.segments[#].up"), i === 0),
        this.button("↓", `Move segment ${i + 1} down`, `${p}.down`, move(i + 1, "sequence.segments[#].down"), i === n - 1),
        this.button("Remove", `Remove segment ${i + 1}`, `${p}.remove`, () => {
          slot.design.sequence.segments.splice(i, 1);
          this.clearDrafts(slot, "sequence.segments");
          this.host.restructured(slot, "add-pulse");
        }),
      ),
      h("div", { class: "group-error", attrs: { role: "alert" } }),
      this.selectField(`${p}.kind`, "Kind", SEGMENT_KINDS, (v) => {
        slot.design.sequence.segments[i] = convertSegment(slot.design.sequence.segments[i], v as Segment["kind"]);
        this.clearDrafts(slot, p);
        this.host.restructured(slot, `${p}.kind`);
      }),
    );
    if (seg.kind === "dead") li.append(this.selectField(`${p}.label`, "Purpose", DEAD_LABELS));
    li.append(this.numberField({ path: `${p}.duration_s`, label: seg.kind === "dead" && seg.label === "detection" ? "Duration per round" : "Duration", unit: "s" }));
    if (seg.kind === "pulse") {
      li.append(
        this.numberField({ path: `${p}.area_pi`, label: "Pulse area", unit: "π rad", hint: "1 for a π pulse, 0.5 for π/2" }),
        this.numberField({ path: `${p}.phase_deg`, label: "Phase", unit: "degrees" }),
        this.numberField({ path: `${p}.detuning_offset_hz`, label: "Detuning offset", unit: "Hz", hint: "frequency step or light shift during this pulse" }),
      );
    }
    return li;
  }

  private presetRow(): HTMLElement {
    const slot = this.slot!;
    const row = h("div", { class: "preset", data: { group: "preset" } });
    const info = this.presets.find((p) => p.id === this.presetId) ?? this.presets[0];
    if (!info) return row;
    const selId = uniqueId("preset");
    const sel = h("select", { id: selId, data: { focusKey: "preset" } });
    for (const p of this.presets) {
      const o = h("option", { text: p.title });
      o.value = p.id;
      o.selected = p.id === info.id;
      sel.append(o);
    }
    sel.addEventListener("change", () => {
      this.presetId = sel.value;
      this.host.restructured(slot, "preset");
    });
    const texts = this.presetText.get(info.id) ?? {};
    this.presetText.set(info.id, texts);
    const params = Object.entries(info.preset).filter(([k]) => k !== "kind") as [string, number][];
    const err = h("div", { class: "group-error", attrs: { role: "alert" } });
    const inputs: [string, HTMLInputElement][] = [];
    const fields = params.map(([k, v]) => {
      const id = uniqueId("pp");
      const input = h("input", { id, attrs: { type: "text", inputmode: "decimal", autocomplete: "off", "aria-describedby": `${id}-unit` } });
      input.value = texts[k] ?? inputText(v);
      input.addEventListener("input", () => {
        texts[k] = input.value;
      });
      inputs.push([k, input]);
      return h("div", { class: "field" }, h("label", { attrs: { for: id }, text: PRESET_PARAMS[k] ?? k }), h("div", { class: "control" }, input, h("span", { class: "unit", id: `${id}-unit`, text: "s" })));
    });
    const apply = () => {
      clear(err);
      const preset: Record<string, unknown> = { kind: info.preset.kind };
      for (const [k, input] of inputs) {
        const r = parseNumber(input.value);
        if (!r.ok) {
          err.append(h("span", { class: "problem", text: `preset.${k}: ${JSON.stringify(input.value)}; ${r.allowed}` }));
          input.setAttribute("aria-invalid", "true");
          continue;
        }
        input.removeAttribute("aria-invalid");
        preset[k] = r.value;
      }
      if (err.childNodes.length > 0) return;
      let probe: Segment[];
      try {
        probe = engine.presetSegments(preset as Preset);
      } catch (e) {
        for (const p of problemsOf(e)) err.append(h("span", { class: "problem", text: problemText(p) }));
        return;
      }
      const ss = slot.design.sequence.segments;
      const first = ss.findIndex(isProbe);
      let last = -1;
      ss.forEach((x, j) => {
        if (isProbe(x)) last = j;
      });
      if (first >= 0) ss.splice(first, last - first + 1, ...probe);
      else {
        const det = ss.findIndex((x) => x.kind === "dead" && x.label === "detection");
        ss.splice(det >= 0 ? det : ss.length, 0, ...probe);
      }
      this.clearDrafts(slot, "sequence.segments");
      this.host.restructured(slot, "preset-apply");
    };
    row.append(
      h("div", { class: "field" }, h("label", { attrs: { for: selId }, text: "Preset" }), h("div", { class: "control" }, sel)),
      ...fields,
      h("div", { class: "row-buttons" }, this.button("Replace probe segments", "Replace the pulses and free evolution with the preset", "preset-apply", apply)),
      err,
    );
    return row;
  }

  private laserSection(d: Design): HTMLElement {
    const slot = this.slot!;
    const list = h("ol", { class: "terms" });
    d.laser.noise.forEach((t, i) => list.append(this.termItem(t, i)));
    const addKind = h("select", { id: uniqueId("addterm"), data: { focusKey: "add-term-kind" } });
    for (const [k, text] of NOISE_KINDS) {
      const o = h("option", { text });
      o.value = k;
      addKind.append(o);
    }
    const addTerm = () => {
      slot.design.laser.noise.push(newTerm(addKind.value as NoiseTerm["kind"]));
      this.host.restructured(slot, `laser.noise[${slot.design.laser.noise.length - 1}].kind`);
    };
    return this.section(
      "Laser",
      "laser",
      this.textField("laser.label", "Label", "e.g. the reference cavity"),
      h("p", { class: "hint", text: "Free-running frequency noise: the terms add up, and so does the table." }),
      h("div", { class: "list-group", data: { group: "laser.noise" } }, h("div", { class: "group-error", attrs: { role: "alert" } }), list),
      h(
        "div",
        { class: "row-buttons" },
        h("label", { attrs: { for: addKind.id }, text: "New term" }),
        addKind,
        this.button("Add term", "Add a noise term of the chosen kind", "add-term", addTerm),
      ),
      this.tableBlock(d),
      this.numberField({ path: "laser.high_cutoff_hz", label: "High cut-off f_h", unit: "Hz", hint: "of the phase-noise terms (α = 1, 2) and the table" }),
      this.numberField({ path: "laser.drift_per_s", label: "Linear drift", unit: "1/s (fractional)" }),
    );
  }

  private termItem(t: NoiseTerm, i: number): HTMLElement {
    const slot = this.slot!;
    const p = `laser.noise[${i}]`;
    const li = h("li", { class: "item", data: { group: p } });
    li.append(
      h(
        "div",
        { class: "item-head" },
        h("span", { class: "item-title", text: `Term ${i + 1}` }),
        this.button("Remove", `Remove noise term ${i + 1}`, `${p}.remove`, () => {
          slot.design.laser.noise.splice(i, 1);
          this.clearDrafts(slot, "laser.noise");
          this.host.restructured(slot, "add-term");
        }),
      ),
      h("div", { class: "group-error", attrs: { role: "alert" } }),
      this.selectField(`${p}.kind`, "Kind", NOISE_KINDS, (v) => {
        slot.design.laser.noise[i] = newTerm(v as NoiseTerm["kind"]);
        this.clearDrafts(slot, p);
        this.host.restructured(slot, `${p}.kind`);
      }),
    );
    const alphaOptions: [string, string][] = [-2, -1, 0, 1, 2].map((a) => [String(a), String(a).replace("-", "\u2212")]);
    const alpha = () =>
      this.selectField(`${p}.alpha`, "Exponent α", alphaOptions, (v) => {
        setAt(slot.design, `${p}.alpha`, Number(v));
        this.host.restructured(slot, `${p}.alpha`);
      });
    const unitSelect = (units: SpectrumUnit[]) =>
      this.selectField(
        `${p}.unit`,
        "Given as",
        units.map((u) => [u, UNIT_NAMES[u]]),
        (v) => {
          setAt(slot.design, `${p}.unit`, v);
          this.host.restructured(slot, `${p}.unit`);
        },
      );
    switch (t.kind) {
      case "white_frequency":
      case "random_walk":
        li.append(this.numberField({ path: `${p}.sigma_y_1s`, label: "σ_y at τ = 1 s", unit: "fractional" }));
        break;
      case "flicker_floor":
        li.append(this.numberField({ path: `${p}.sigma_y`, label: "Flicker floor σ_y", unit: "fractional" }));
        break;
      case "power_law": {
        const e = (t.unit === "s_nu" ? 1 : -1) - t.alpha;
        li.append(alpha(), unitSelect(["s_y", "s_nu"]), this.numberField({ path: `${p}.coefficient`, label: "Coefficient h_α", unit: hzPower(e) }));
        break;
      }
      case "power_law_at":
        li.append(
          alpha(),
          unitSelect(["s_y", "s_nu", "l_dbc"]),
          this.numberField({ path: `${p}.at_hz`, label: "At Fourier frequency", unit: "Hz" }),
          this.numberField({ path: `${p}.value`, label: "Level there", unit: VALUE_UNITS[t.unit] }),
        );
        break;
    }
    return li;
  }

  private tableBlock(d: Design): HTMLElement {
    const slot = this.slot!;
    const block = h("div", { class: "table-block", data: { group: "laser.table" } });
    const err = h("div", { class: "group-error", attrs: { role: "alert" } });
    const id = uniqueId("csv");
    const file = h("input", { id, attrs: { type: "file", accept: ".csv,.txt,text/csv,text/plain" }, data: { focusKey: "laser.table.file" } });
    file.addEventListener("change", async () => {
      clear(err);
      const f = file.files?.[0];
      if (!f) return;
      if (f.size > MAX_FILE_BYTES) {
        err.append(h("span", { class: "problem", text: `${f.name}: ${f.size} bytes; a spectrum file may hold at most ${MAX_FILE_BYTES} bytes` }));
        return;
      }
      const text = await f.text();
      try {
        slot.design.laser.table = engine.parseSpectrumCsv(text);
      } catch (e) {
        for (const p of problemsOf(e)) err.append(h("span", { class: "problem", text: `${f.name}, ${problemText(p)}` }));
        file.value = "";
        return;
      }
      this.host.restructured(slot, "laser.table.file");
    });
    const t = d.laser.table;
    let status: HTMLElement;
    if (t) {
      status = h("p", { class: "table-status" }, `Table: ${t.points.length} rows of ${UNIT_NAMES[t.unit]}`);
      if (t.points.length > 0) {
        status.append(", ");
        appendNumber(status, t.points[0][0], 3, "Hz");
        status.append(" to ");
        appendNumber(status, t.points[t.points.length - 1][0], 3, "Hz");
      }
      status.append(
        " ",
        this.button("Remove table", "Remove the spectrum table", "laser.table.remove", () => {
          slot.design.laser.table = null;
          this.host.restructured(slot, "laser.table.file");
        }),
      );
    } else {
      status = h("p", { class: "table-status", text: "No spectrum table." });
    }
    block.append(
      h("div", { class: "field" }, h("label", { attrs: { for: id }, text: "Spectrum table (CSV)" }), h("div", { class: "control" }, file), h("span", { class: "hint", text: "header f_hz,s_y or f_hz,s_nu or f_hz,l_dbc; one row per Fourier frequency" })),
      status,
      err,
    );
    return block;
  }

  private clearDrafts(slot: Slot, prefix: string): void {
    for (const k of [...slot.drafts.keys()]) if (k.startsWith(prefix)) slot.drafts.delete(k);
  }
}

