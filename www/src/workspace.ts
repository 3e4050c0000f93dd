// The workspace: designs with their colours, the target and the selection; its file format
// ({"workspace_version": 1, ...}), its checks and its storage.

import { engine, type Design, type Evaluation, type Problem } from "./engine";

export const WORKSPACE_VERSION = 1;
/** One colour per design; the palette has this many. */
export const MAX_DESIGNS = 8;
export const STORAGE_KEY = "clockwright.workspace";
/** Largest workspace or spectrum file read, bytes. */
export const MAX_FILE_BYTES = 5 * 1024 * 1024;

/** A field whose text does not read as a value yet: the text and what is wrong. */
export interface Draft {
  text: string;
  problem: Problem;
}

/** One design in the workspace, with its last good evaluation. */
export interface Slot {
  uid: number;
  colour: number;
  /** The design as edited; may be invalid. */
  design: Design;
  /** Last good evaluation; stays while the design is invalid. */
  evaluation: Evaluation | null;
  /** Design JSON and target of `evaluation`, to skip evaluating the same input twice. */
  evaluatedKey: string;
  /** Problems of the design as edited (engine and unreadable fields). */
  problems: Problem[];
  /** Fields whose text does not read as a number, by path. */
  drafts: Map<string, Draft>;
}

export interface State {
  slots: Slot[];
  selectedUid: number;
  target: number;
  /** Target text that does not read as a number. */
  targetDraft: Draft | null;
  /** A problem the engine found with the target. */
  targetProblem: Problem | null;
}

/** The saved form of a workspace. */
export interface WorkspaceDoc {
  workspace_version: number;
  target_instability: number;
  selected: number;
  designs: { colour: number; design: Design }[];
}

let nextUid = 1;

export function newSlot(design: Design, colour: number): Slot {
  return { uid: nextUid++, colour, design, evaluation: null, evaluatedKey: "", problems: [], drafts: new Map() };
}

/** The lowest palette colour not used by `slots`. */
export function freeColour(slots: Slot[]): number {
  for (let c = 0; c < MAX_DESIGNS; c++) if (!slots.some((s) => s.colour === c)) return c;
  return slots.length % MAX_DESIGNS;
}

export function stateFromDesigns(designs: Design[], target: number): State {
  const slots: Slot[] = [];
  for (const d of designs.slice(0, MAX_DESIGNS)) slots.push(newSlot(d, freeColour(slots)));
  return { slots, selectedUid: slots[0]?.uid ?? 0, target, targetDraft: null, targetProblem: null };
}

export function toDoc(state: State): WorkspaceDoc {
  const selected = Math.max(0, state.slots.findIndex((s) => s.uid === state.selectedUid));
  return {
    workspace_version: WORKSPACE_VERSION,
    target_instability: state.target,
    selected,
    designs: state.slots.map((s) => ({ colour: s.colour, design: s.design })),
  };
}

/** True when every design and the target read and validate. */
export function isValid(state: State): boolean {
  return state.targetDraft === null && state.targetProblem === null && state.slots.every((s) => s.drafts.size === 0 && s.problems.length === 0);
}

function isObject(v: unknown): v is Record<string, unknown> {
  return v !== null && typeof v === "object" && !Array.isArray(v);
}

/**
 * Reads a workspace document; every design must validate. Returns the state, or the
 * problems with paths such as "designs[1].atoms.count".
 */
export function readDoc(value: unknown): { state: State } | { problems: Problem[] } {
  const problems: Problem[] = [];
  if (!isObject(value)) {
    return { problems: [{ path: "(workspace)", value: typeof value, allowed: "must be an object with workspace_version, target_instability, selected, designs" }] };
  }
  if (value.workspace_version !== WORKSPACE_VERSION) {
    problems.push({ path: "workspace_version", value: JSON.stringify(value.workspace_version) ?? "missing", allowed: `this page reads workspace version ${WORKSPACE_VERSION}` });
    return { problems };
  }
  const known = new Set(["workspace_version", "target_instability", "selected", "designs"]);
  for (const k of Object.keys(value)) {
    if (!known.has(k)) problems.push({ path: k, value: "present", allowed: "not a workspace field (allowed: workspace_version, target_instability, selected, designs)" });
  }
  const target = value.target_instability;
  if (typeof target !== "number" || !Number.isFinite(target)) {
    problems.push({ path: "target_instability", value: JSON.stringify(target) ?? "missing", allowed: "must be a finite number" });
  }
  const designs = value.designs;
  if (!Array.isArray(designs) || designs.length > MAX_DESIGNS) {
    problems.push({ path: "designs", value: Array.isArray(designs) ? `${designs.length} designs` : "missing", allowed: `must be a list of 0 to ${MAX_DESIGNS} designs` });
    return { problems };
  }
  const used = new Set<number>();
  const entries: { colour: number; design: Design }[] = [];
  designs.forEach((entry: unknown, i: number) => {
    if (!isObject(entry) || !isObject(entry.design)) {
      problems.push({ path: `designs[${i}]`, value: typeof entry, allowed: "must be {colour, design}" });
      return;
    }
    const c = entry.colour;
    if (typeof c !== "number" || !Number.isInteger(c) || c < 0 || c >= MAX_DESIGNS || used.has(c)) {
      problems.push({ path: `designs[${i}].colour`, value: JSON.stringify(c) ?? "missing", allowed: `must be a whole number from 0 to ${MAX_DESIGNS - 1}, different for each design` });
      return;
    }
    used.add(c);
    const design = entry.design as unknown as Design;
    for (const p of engine.validate(design)) problems.push({ ...p, path: `designs[${i}].${p.path}` });
    entries.push({ colour: c, design });
  });
  const sel = value.selected;
  if (typeof sel !== "number" || !Number.isInteger(sel) || sel < 0 || (sel >= designs.length && designs.length > 0)) {
    problems.push({ path: "selected", value: JSON.stringify(sel) ?? "missing", allowed: `must be the index of a design (0 to ${Math.max(0, designs.length - 1)})` });
  }
  if (problems.length > 0) return { problems };
  const slots = entries.map((e) => newSlot(e.design, e.colour));
  return { state: { slots, selectedUid: slots[sel as number]?.uid ?? 0, target: target as number, targetDraft: null, targetProblem: null } };
}

/** Writes the workspace to local storage; only call when `isValid(state)`. */
export function store(storage: Storage | null, state: State): void {
  if (!storage) return;
  try {
    storage.setItem(STORAGE_KEY, JSON.stringify(toDoc(state)));
  } catch {
    // Storage full or disabled: the workspace still lives in the page and can be saved to a file.
  }
}

/** The stored workspace, if any: the state, or the problems that made it unreadable. */
export function restore(storage: Storage | null): { state: State } | { problems: Problem[] } | null {
  if (!storage) return null;
  let text: string | null = null;
  try {
    text = storage.getItem(STORAGE_KEY);
  } catch {
    return null;
  }
  if (text === null) return null;
  try {
    return readDoc(JSON.parse(text));
  } catch (e) {
    return { problems: [{ path: "(stored workspace)", value: "", allowed: `must be JSON: ${(e as Error).message}` }] };
  }
}

/** Local storage when the browser allows it. */
export function localStore(win: Window): Storage | null {
  try {
    return win.localStorage;
  } catch {
    return null;
  }
}
