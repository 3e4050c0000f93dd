// The page: loads the engine, keeps the workspace, recomputes on every edit (at once, or in
// the next animation frame when edits come faster than frames) and redraws what changed.

import { clear, h } from "./dom";
import { Editor } from "./editor";
import { engine, loadEngine, problemsOf, problemText, type Design, type PresetInfo, type Problem } from "./engine";
import { inputText, parseNumber } from "./format";
import { mountPairView, type PairView } from "./pairview";
import { drawLegend, drawLineShape, drawSensitivity, drawSigma, watchWidth } from "./plots";
import { drawDetails, drawTable } from "./results";
import { mountEmbed } from "./embed";
import { linkKind, readLink } from "./share";
import { mountShareCard } from "./sharecard";
import { mountSimulation } from "./simview";
import { mountStudy } from "./studyview";
import {
  MAX_DESIGNS,
  MAX_FILE_BYTES,
  freeColour,
  isValid,
  localStore,
  newSlot,
  readDoc,
  restore,
  stateFromDesigns,
  store,
  toDoc,
  type Slot,
  type State,
} from "./workspace";

const THEME_KEY = "clockwright.theme";
const DEFAULT_TARGET = 1e-18;

function byId<T extends HTMLElement>(id: string): T {
  const el = document.getElementById(id);
  if (!el) throw new Error(`the page has no element #${id}`);
  return el as T;
}

function isOptionsProblem(p: Problem): boolean {
  return p.path.startsWith("options") || p.path.includes("target_instability");
}

class App {
  private state: State;
  private storage = localStore(window);
  private editor: Editor;
  private pairView: PairView;
  private demos: Design[];
  private pending = false;
  /** An update ran since the last animation frame: further edits wait for the next one. */
  private frameUsed = false;
  private dirty = new Set<Slot>();
  private sim: { refresh(): void } | null = null;
  private share: { refresh(): void } | null = null;
  /**
   * A workspace opened from a share link is not autosaved until the reader keeps it, so a link
   * never replaces the reader's own autosaved work without being asked (see the link banner).
   */
  private holdAutosave = false;
  private all = false;
  /** What the design list was last drawn from. */
  private listKey = "";
  private els = {
    list: byId<HTMLUListElement>("design-list"),
    dup: byId<HTMLButtonElement>("dup-design"),
    remove: byId<HTMLButtonElement>("remove-design"),
    template: byId<HTMLSelectElement>("add-template"),
    add: byId<HTMLButtonElement>("add-design"),
    target: byId<HTMLInputElement>("target-input"),
    targetField: byId<HTMLElement>("target-field"),
    targetError: byId<HTMLElement>("target-error"),
    save: byId<HTMLButtonElement>("save-ws"),
    load: byId<HTMLButtonElement>("load-ws"),
    loadFile: byId<HTMLInputElement>("load-ws-file"),
    reset: byId<HTMLButtonElement>("reset-ws"),
    message: byId<HTMLElement>("ws-message"),
    editor: byId<HTMLFormElement>("editor"),
    sigma: byId<HTMLElement>("sigma-plot"),
    legend: byId<HTMLElement>("sigma-legend"),
    table: byId<HTMLTableElement>("comparison"),
    g: byId<HTMLElement>("g-plot"),
    line: byId<HTMLElement>("line-plot"),
    details: byId<HTMLElement>("details"),
    selectedName: byId<HTMLElement>("selected-name"),
    theme: byId<HTMLSelectElement>("theme"),
    breakdown: byId<HTMLInputElement>("breakdown-all"),
    banner: byId<HTMLElement>("link-banner"),
  };

  /** `linked`: what the share link in the address held, if there is one. */
  constructor(presets: PresetInfo[], linked: Awaited<ReturnType<typeof readLink>> | null) {
    this.demos = engine.demoDesigns();
    const restored = restore(this.storage);
    if (linked && "state" in linked) {
      this.state = linked.state;
      this.holdAutosave = true;
    } else if (restored && "state" in restored) {
      this.state = restored.state;
    } else {
      this.state = stateFromDesigns(engine.demoDesigns(), DEFAULT_TARGET);
      if (restored) this.message("The stored workspace could not be read, so the demo designs were loaded:", restored.problems);
    }
    if (linked) this.linkBanner(linked);
    this.editor = new Editor(this.els.editor, { changed: (s) => this.request(s), restructured: (s, f) => this.restructured(s, f) }, presets);
    this.pairView = mountPairView(byId("pair-view"), { changed: () => this.persist() });
  }

  start(): void {
    const e = this.els;
    for (const d of this.demos) {
      const o = h("option", { text: d.name });
      e.template.append(o);
    }
    e.editor.addEventListener("submit", (ev) => ev.preventDefault());
    e.target.value = inputText(this.state.target);
    e.target.addEventListener("input", () => this.targetInput());
    e.add.addEventListener("click", () => this.addDesign(structuredClone(this.demos[e.template.selectedIndex] ?? this.demos[0]), "New design"));
    e.dup.addEventListener("click", () => {
      const s = this.selected();
      if (s) this.addDesign(structuredClone(s.design), `${s.design.name} (copy)`);
    });
    e.remove.addEventListener("click", () => this.removeSelected());
    e.save.addEventListener("click", () => this.saveFile());
    e.load.addEventListener("click", () => e.loadFile.click());
    e.loadFile.addEventListener("change", () => this.loadFile());
    e.reset.addEventListener("click", () => (this.endLinkHold(), this.replaceState(stateFromDesigns(engine.demoDesigns(), this.state.target), "The demo designs were loaded.")));
    this.setupTheme();
    e.breakdown.addEventListener("change", () => this.drawPlots());
    for (const el of [e.sigma, e.g, e.line]) watchWidth(el, () => this.requestRedraw());
    this.sim = mountSimulation(byId("sim-view"), { selected: () => this.selected(), slots: () => this.state.slots });
    this.editor.render(this.selected());
    this.requestAll();
    mountStudy(byId("study"), { slots: () => this.state.slots, selected: () => this.selected(), apply: (s, d) => ((s.design = d), s.drafts.clear(), this.restructured(s)) });
    this.share = mountShareCard(byId("share"), byId("report"), { state: () => this.state, selected: () => this.selected(), breakdownAll: () => this.els.breakdown.checked });
    this.share.refresh();
    // A link pasted into the address bar of the open page changes only the fragment.
    window.addEventListener("hashchange", () => void this.followLink());
  }

  // ----- share links ---------------------------------------------------------------------------

  /** Hides the link banner and takes the link out of the address (a reload then opens the autosaved workspace). */
  private closeBanner(): void {
    const el = this.els.banner;
    el.hidden = true;
    clear(el);
    if (linkKind(location.hash) === null) return;
    try {
      history.replaceState(null, "", location.href.split("#")[0]);
    } catch {
      location.hash = "";
    }
  }

  /** A workspace the reader chose (a file, the demos) ends the hold of a link's workspace. */
  private endLinkHold(): void {
    if (!this.holdAutosave) return;
    this.holdAutosave = false;
    this.closeBanner();
  }

  private async followLink(): Promise<void> {
    const kind = linkKind(location.hash);
    if (kind === null) return;
    if (kind === "embed") {
      location.reload();
      return;
    }
    const linked = await readLink(location.hash);
    if ("state" in linked) {
      this.holdAutosave = true;
      this.replaceState(linked.state, "Opened the workspace of the link.");
    }
    this.linkBanner(linked);
  }

  /**
   * The banner about a link: a bad one names its problems (the workspace on screen, and the
   * autosaved one, are unchanged); a good one says that the reader's own workspace is kept
   * until they choose to keep the link's one instead.
   */
  private linkBanner(linked: Awaited<ReturnType<typeof readLink>>): void {
    const el = this.els.banner;
    clear(el);
    el.hidden = false;
    const close = () => this.closeBanner();
    if (!("state" in linked)) {
      el.className = "link-banner bad";
      el.setAttribute("role", "alert");
      el.append(
        h("p", { text: "The link in the address could not be opened, so nothing was loaded from it; your workspace is unchanged. Problems:" }),
        h("ul", {}, ...linked.problems.slice(0, 12).map((p) => h("li", { text: problemText(p) }))),
      );
      if (linked.problems.length > 12) el.append(h("p", { text: `… and ${linked.problems.length - 12} more.` }));
      const b = h("button", { class: "small", text: "Dismiss", attrs: { type: "button" } });
      b.addEventListener("click", close);
      el.append(b);
      return;
    }
    el.className = "link-banner";
    el.setAttribute("role", "status");
    const keep = h("button", { id: "link-keep", class: "small", text: "Keep this workspace", attrs: { type: "button" } });
    const back = h("button", { id: "link-back", class: "small", text: "Back to my workspace", attrs: { type: "button" } });
    keep.addEventListener("click", () => {
      this.holdAutosave = false;
      this.persist();
      close();
      this.message("Kept the workspace of the link; it is autosaved from now on.");
    });
    back.addEventListener("click", () => {
      this.holdAutosave = false;
      const own = restore(this.storage);
      close();
      this.replaceState(own && "state" in own ? own.state : stateFromDesigns(engine.demoDesigns(), DEFAULT_TARGET), own && "state" in own ? "Your own workspace is back." : "You had no saved workspace, so the demo designs were loaded.");
    });
    el.append(
      h("p", {
        text: "This workspace was opened from a link. Your own autosaved workspace is kept and is not overwritten: changes here are not autosaved unless you keep this workspace (it then replaces your autosaved one).",
      }),
      h("div", { class: "row-buttons" }, keep, back),
    );
  }

  // ----- state ---------------------------------------------------------------------------

  private selected(): Slot | null {
    return this.state.slots.find((s) => s.uid === this.state.selectedUid) ?? this.state.slots[0] ?? null;
  }

  private select(uid: number): void {
    this.state.selectedUid = uid;
    this.editor.render(this.selected());
    this.redraw();
    this.persist();
  }

  private addDesign(design: Design, name: string): void {
    if (this.state.slots.length >= MAX_DESIGNS) {
      this.message(`At most ${MAX_DESIGNS} designs fit in one workspace (one colour each); remove one first.`);
      return;
    }
    design.name = name;
    const slot = newSlot(design, freeColour(this.state.slots));
    this.state.slots.push(slot);
    this.state.selectedUid = slot.uid;
    this.editor.render(slot);
    this.request(slot);
    this.message(`Added “${name}”.`);
  }

  private removeSelected(): void {
    const s = this.selected();
    if (!s) return;
    const i = this.state.slots.indexOf(s);
    this.state.slots.splice(i, 1);
    const next = this.state.slots[Math.min(i, this.state.slots.length - 1)];
    this.state.selectedUid = next?.uid ?? 0;
    this.editor.render(this.selected());
    this.requestAll();
    this.message(`Removed “${s.design.name}”.`, [], {
      label: "Undo",
      run: () => {
        if (this.state.slots.length >= MAX_DESIGNS) return;
        if (this.state.slots.some((x) => x.colour === s.colour)) s.colour = freeColour(this.state.slots);
        this.state.slots.splice(Math.min(i, this.state.slots.length), 0, s);
        this.select(s.uid);
        this.requestAll();
        this.message(`Restored “${s.design.name}”.`);
      },
    });
  }

  private replaceState(state: State, note: string): void {
    this.state = state;
    this.els.target.value = inputText(state.target);
    this.editor.render(this.selected());
    this.requestAll();
    this.message(note);
  }

  private restructured(slot: Slot, focusKey?: string): void {
    this.editor.render(slot, focusKey);
    this.request(slot);
  }

  private targetInput(): void {
    const text = this.els.target.value;
    const r = parseNumber(text);
    if (r.ok) {
      this.state.target = r.value;
      this.state.targetDraft = null;
      this.state.targetProblem = null;
    } else {
      this.state.targetDraft = { text, problem: { path: "target_instability", value: JSON.stringify(text), allowed: r.allowed } };
    }
    this.requestAll();
  }

  // ----- updates ---------------------------------------------------------------------------

  /** Recomputes `slot` now, or in the next animation frame if an update ran in this one. */
  private request(slot: Slot): void {
    this.dirty.add(slot);
    this.schedule();
  }

  private requestAll(): void {
    this.all = true;
    this.schedule();
  }

  /**
   * Updates at once, in the event handler of the edit; edits that come faster than frames are
   * gathered and updated together in the next animation frame, so there is at most one update
   * per frame. `cw-edit` marks the (first) edit.
   */
  private schedule(): void {
    if (this.pending) return;
    performance.mark("cw-edit");
    if (this.frameUsed) {
      this.pending = true;
      requestAnimationFrame(() => this.update());
    } else {
      this.update();
    }
  }

  private redrawPending = false;
  private requestRedraw(): void {
    if (this.redrawPending) return;
    this.redrawPending = true;
    requestAnimationFrame(() => {
      this.redrawPending = false;
      this.drawPlots();
    });
  }

  private update(): void {
    this.pending = false;
    if (!this.frameUsed) {
      this.frameUsed = true;
      requestAnimationFrame(() => {
        this.frameUsed = false;
      });
    }
    performance.mark("cw-frame");
    const slots = this.all ? [...this.state.slots] : [...this.dirty].filter((s) => this.state.slots.includes(s));
    this.all = false;
    this.dirty.clear();
    let asked = false;
    const optionProblems: Problem[] = [];
    for (const slot of slots) {
      const opts = this.evaluate(slot);
      if (opts === null) continue;
      asked = true;
      optionProblems.push(...opts);
    }
    if (asked) this.state.targetProblem = optionProblems[0] ?? null;
    performance.mark("cw-evaluated");
    this.redraw();
    performance.mark("cw-drawn");
    try {
      // Edit to redraw; within it, the engine's share and the drawing's share.
      performance.measure("cw-update", "cw-edit", "cw-drawn");
      performance.measure("cw-engine", "cw-frame", "cw-evaluated");
      performance.measure("cw-draw", "cw-evaluated", "cw-drawn");
    } catch {
      // A missing start mark only loses one measurement.
    }
    this.persist();
  }

  /**
   * Evaluates one design; keeps its last good result when it is invalid. Returns the problems
   * the engine found with the options (the target), or null when the engine was not asked.
   */
  private evaluate(slot: Slot): Problem[] | null {
    if (slot.drafts.size > 0) {
      // Unreadable fields keep their last value in the design; check the rest of it anyway.
      slot.problems = engine.validate(slot.design).filter((p) => !slot.drafts.has(p.path));
      return null;
    }
    const key = `${this.state.target}|${JSON.stringify(slot.design)}`;
    if (key === slot.evaluatedKey && slot.evaluation) {
      slot.problems = [];
      return null;
    }
    try {
      slot.evaluation = engine.evaluate(slot.design, { target_instability: this.state.target });
      slot.evaluatedKey = key;
      slot.problems = [];
      return [];
    } catch (err) {
      const all = problemsOf(err);
      slot.problems = all.filter((p) => !isOptionsProblem(p));
      return all.filter(isOptionsProblem);
    }
  }

  private persist(): void {
    if (!this.holdAutosave && isValid(this.state)) store(this.storage, this.state);
  }

  private redraw(): void {
    const sel = this.selected();
    this.drawList();
    drawTable(this.els.table, this.state.slots, sel?.uid ?? 0);
    this.drawPlots();
    drawDetails(this.els.details, sel);
    const selName = sel ? sel.design.name || "(unnamed)" : "none";
    if (this.els.selectedName.textContent !== selName) this.els.selectedName.textContent = selName;
    if (sel) {
      this.editor.showProblems(sel);
      this.editor.showSummary(sel);
    }
    this.showTargetProblem();
    this.pairView.update(this.state);
    this.sim?.refresh();
    this.share?.refresh();
  }

  private drawPlots(): void {
    const sel = this.selected();
    const withResult = this.state.slots.filter((s) => s.evaluation);
    drawSigma(
      this.els.sigma,
      withResult.map((s) => ({ uid: s.uid, colour: s.colour, name: s.design.name, selected: s === sel, evaluation: s.evaluation! })),
      this.state.targetDraft || this.state.targetProblem ? null : this.state.target,
      this.els.breakdown.checked,
    );
    drawLegend(
      this.els.legend,
      this.state.slots.map((s) => ({ colour: s.colour, name: s.design.name || "(unnamed)", stale: s.problems.length > 0 || s.drafts.size > 0 })),
    );
    drawSensitivity(this.els.g, sel?.evaluation ?? null, sel?.colour ?? 0);
    drawLineShape(this.els.line, sel?.evaluation ?? null, sel?.colour ?? 0);
  }

  private drawList(): void {
    const list = this.els.list;
    const key = JSON.stringify([this.state.selectedUid, this.state.slots.map((s) => [s.uid, s.colour, s.design.name, s.problems.length + s.drafts.size])]);
    if (key === this.listKey) return;
    this.listKey = key;
    const hadFocus = list.contains(document.activeElement);
    clear(list);
    let focusTarget: HTMLButtonElement | null = null;
    for (const slot of this.state.slots) {
      const isSel = slot.uid === this.state.selectedUid;
      const bad = slot.problems.length + slot.drafts.size;
      const b = h(
        "button",
        { class: `design-button cw-c${slot.colour}`, attrs: { type: "button", "aria-pressed": String(isSel) } },
        h("span", { class: "swatch", attrs: { "aria-hidden": "true" } }),
        h("span", { class: "design-name", text: slot.design.name || "(unnamed)" }),
        bad > 0 ? h("span", { class: "badge", text: bad === 1 ? "1 problem" : `${bad} problems` }) : null,
      );
      b.addEventListener("click", () => this.select(slot.uid));
      if (isSel) focusTarget = b;
      list.append(h("li", {}, b));
    }
    if (hadFocus && focusTarget) focusTarget.focus();
    this.els.dup.disabled = this.state.slots.length === 0 || this.state.slots.length >= MAX_DESIGNS;
    this.els.remove.disabled = this.state.slots.length === 0;
    this.els.add.disabled = this.state.slots.length >= MAX_DESIGNS;
  }

  private showTargetProblem(): void {
    const p = this.state.targetDraft?.problem ?? this.state.targetProblem;
    clear(this.els.targetError);
    this.els.targetField.classList.toggle("invalid", p !== null);
    if (p) {
      this.els.target.setAttribute("aria-invalid", "true");
      this.els.targetError.append(h("span", { class: "problem", text: problemText(p) }));
    } else {
      this.els.target.removeAttribute("aria-invalid");
    }
  }

  // ----- files ------------------------------------------------------------------------------

  private message(text: string, problems: Problem[] = [], action?: { label: string; run: () => void }): void {
    const m = this.els.message;
    clear(m);
    const p = h("p", { text });
    if (action) {
      const b = h("button", { class: "small", text: action.label, attrs: { type: "button" } });
      b.addEventListener("click", action.run, { once: true });
      p.append(" ", b);
    }
    m.append(p);
    if (problems.length > 0) m.append(h("ul", {}, ...problems.slice(0, 20).map((p) => h("li", { text: problemText(p) }))));
    if (problems.length > 20) m.append(h("p", { text: `… and ${problems.length - 20} more.` }));
  }

  private saveFile(): void {
    if (!isValid(this.state)) {
      this.message("Fix the marked fields first: a saved workspace holds only valid designs.");
      return;
    }
    const blob = new Blob([JSON.stringify(toDoc(this.state), null, 2) + "\n"], { type: "application/json" });
    const url = URL.createObjectURL(blob);
    const a = h("a", { attrs: { href: url, download: "clockwright-workspace.json" } });
    document.body.append(a);
    a.click();
    a.remove();
    setTimeout(() => URL.revokeObjectURL(url), 10_000);
    this.message("Saved the workspace as clockwright-workspace.json.");
  }

  private async loadFile(): Promise<void> {
    const input = this.els.loadFile;
    const f = input.files?.[0];
    input.value = "";
    if (!f) return;
    if (f.size > MAX_FILE_BYTES) {
      this.message(`${f.name} holds ${f.size} bytes; a workspace file may hold at most ${MAX_FILE_BYTES} bytes.`);
      return;
    }
    let value: unknown;
    try {
      value = JSON.parse(await f.text());
    } catch (err) {
      this.message(`${f.name} is not JSON (${(err as Error).message}); the workspace is unchanged.`);
      return;
    }
    const r = readDoc(value);
    if ("problems" in r) {
      this.message(`${f.name} was not loaded; the workspace is unchanged. Problems:`, r.problems);
      return;
    }
    this.endLinkHold();
    this.replaceState(r.state, `Loaded ${f.name}.`);
  }

  // ----- theme ------------------------------------------------------------------------------

  private setupTheme(): void {
    let saved = "system";
    try {
      saved = this.storage?.getItem(THEME_KEY) ?? "system";
    } catch {
      saved = "system";
    }
    if (!["system", "light", "dark"].includes(saved)) saved = "system";
    document.documentElement.dataset.theme = saved;
    this.els.theme.value = saved;
    this.els.theme.addEventListener("change", () => {
      const v = this.els.theme.value;
      document.documentElement.dataset.theme = v;
      try {
        this.storage?.setItem(THEME_KEY, v);
      } catch {
        // The choice then lasts for this visit only.
      }
    });
  }
}

function fatal(text: string): void {
  const el = document.getElementById("fatal");
  if (!el) return;
  el.hidden = false;
  el.textContent = text;
}

async function main(): Promise<void> {
  try {
    await loadEngine(document);
  } catch (err) {
    fatal(`The engine could not be started: ${(err as Error).message}`);
    return;
  }
  const kind = linkKind(location.hash);
  if (kind === "embed") {
    await mountEmbed(document, location.hash);
    return;
  }
  let presets: PresetInfo[] = [];
  try {
    presets = engine.presets();
    new App(presets, kind === "share" ? await readLink(location.hash) : null).start();
  } catch (err) {
    fatal(`The page could not start: ${problemsOf(err).map(problemText).join("; ")}`);
  }
}

void main();
