// The workspace: designs with their colours, the target, the selection and the clock pair; its
// file format ({"workspace_version": 2, ...}; version 1 files, without the pair, are migrated),
// its checks and its storage.

import { engine, problemsOf, type Campaign, type Comparison, type Design, type Evaluation, type Link, type PairDocument, type Problem } from "./engine";

export const WORKSPACE_VERSION = 2;
/** Versions readDoc reads (older ones are migrated). */
export const READABLE_VERSIONS = [1, 2];
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

/** The clock pair: two of the workspace's designs, how they are compared, the campaign. */
export interface PairSettings {
  /** Designs compared, by slot uid (by index in the saved file); 0 when there is none. */
  aUid: number;
  bUid: number;
  comparison: Comparison;
  link: Link | null;
  campaign: Campaign;
  /** Local dark-matter density for the reach, GeV/cm^3. */
  rho_dm_gev_per_cm3: number;
  /** Pair fields whose text does not read as a value yet, by path ("pair.campaign.uptime"). */
  drafts: Map<string, Draft>;
  /** Problems the engine found with the pair fields (not those of the designs themselves). */
  problems: Problem[];
}

/** The saved form of the pair. */
export interface PairDoc {
  a: number;
  b: number;
  comparison: Comparison;
  link: Link | null;
  campaign: Campaign;
  reach: { rho_dm_gev_per_cm3: number };
}

export interface State {
  slots: Slot[];
  selectedUid: number;
  target: number;
  /** Target text that does not read as a number. */
  targetDraft: Draft | null;
  /** A problem the engine found with the target. */
  targetProblem: Problem | null;
  pair: PairSettings;
}

/** The saved form of a workspace. */
export interface WorkspaceDoc {
  workspace_version: number;
  target_instability: number;
  selected: number;
  designs: { colour: number; design: Design }[];
  pair: PairDoc;
}

/** Default local dark-matter density, GeV/cm^3 (the engine's default). */
export const DEFAULT_RHO_DM = 0.4;

/**
 * The pair settings of the first demo pair, comparing the designs of `slots` that carry the
 * demo pair's design names (else the first two designs, or the first one twice).
 */
export function defaultPair(slots: Slot[]): PairSettings {
  const demo = engine.demoPairs()[0];
  const find = (name: string, fallback: number): number => (slots.find((s) => s.design.name === name) ?? slots[Math.min(fallback, slots.length - 1)])?.uid ?? 0;
  return {
    aUid: find(demo.a.name, 0),
    bUid: find(demo.b.name, 1),
    comparison: structuredClone(demo.comparison),
    link: demo.link ? structuredClone(demo.link) : null,
    campaign: structuredClone(demo.campaign),
    rho_dm_gev_per_cm3: DEFAULT_RHO_DM,
    drafts: new Map(),
    problems: [],
  };
}

/** The slot of a pair member (null when the design is gone). */
export function pairSlot(state: State, which: "a" | "b"): Slot | null {
  const uid = which === "a" ? state.pair.aUid : state.pair.bUid;
  return state.slots.find((s) => s.uid === uid) ?? null;
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
  return { slots, selectedUid: slots[0]?.uid ?? 0, target, targetDraft: null, targetProblem: null, pair: defaultPair(slots) };
}

export function toDoc(state: State): WorkspaceDoc {
  const selected = Math.max(0, state.slots.findIndex((s) => s.uid === state.selectedUid));
  return {
    workspace_version: WORKSPACE_VERSION,
    target_instability: state.target,
    selected,
    designs: state.slots.map((s) => ({ colour: s.colour, design: s.design })),
    pair: pairDoc(state),
  };
}

/** The pair as saved: designs by index (0 when a member's design is gone). */
export function pairDoc(state: State): PairDoc {
  const index = (uid: number) => Math.max(0, state.slots.findIndex((s) => s.uid === uid));
  const p = state.pair;
  return {
    a: index(p.aUid),
    b: index(p.bUid),
    comparison: p.comparison,
    link: p.link,
    campaign: p.campaign,
    reach: { rho_dm_gev_per_cm3: p.rho_dm_gev_per_cm3 },
  };
}

/** True when every design and the target read and validate. */
export function isValid(state: State): boolean {
  const pairOk = state.pair.drafts.size === 0 && state.pair.problems.length === 0 && (state.slots.length === 0 || (pairSlot(state, "a") !== null && pairSlot(state, "b") !== null));
  return pairOk && state.targetDraft === null && state.targetProblem === null && state.slots.every((s) => s.drafts.size === 0 && s.problems.length === 0);
}

function isObject(v: unknown): v is Record<string, unknown> {
  return v !== null && typeof v === "object" && !Array.isArray(v);
}

/**
 * Reads a workspace document (version 2, or version 1 migrated: the pair then takes the demo
 * pair's settings); every design and the pair must validate. Returns the state, or the
 * problems with paths such as "designs[1].atoms.count" or "pair.campaign.uptime".
 */
export function readDoc(value: unknown): { state: State } | { problems: Problem[] } {
  const problems: Problem[] = [];
  if (!isObject(value)) {
    return { problems: [{ path: "(workspace)", value: typeof value, allowed: "must be an object with workspace_version, target_instability, selected, designs, pair" }] };
  }
  const version = value.workspace_version;
  if (typeof version !== "number" || !READABLE_VERSIONS.includes(version)) {
    problems.push({ path: "workspace_version", value: JSON.stringify(version) ?? "missing", allowed: `this page reads workspace versions ${READABLE_VERSIONS.join(" and ")} (an unknown version may come from a newer page)` });
    return { problems };
  }
  const known = version === 1 ? ["workspace_version", "target_instability", "selected", "designs"] : ["workspace_version", "target_instability", "selected", "designs", "pair"];
  for (const k of Object.keys(value)) {
    if (!known.includes(k)) problems.push({ path: k, value: "present", allowed: `not a field of workspace version ${version} (allowed: ${known.join(", ")})` });
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
  const pair = version === 1 ? defaultPair(slots) : readPair(value.pair, slots, problems);
  if (problems.length > 0 || !pair) return { problems };
  return { state: { slots, selectedUid: slots[sel as number]?.uid ?? 0, target: target as number, targetDraft: null, targetProblem: null, pair } };
}

/** Reads the saved pair of a version-2 workspace; adds its problems to `problems`. */
function readPair(value: unknown, slots: Slot[], problems: Problem[]): PairSettings | null {
  const fields = ["a", "b", "comparison", "link", "campaign", "reach"];
  if (!isObject(value)) {
    problems.push({ path: "pair", value: JSON.stringify(value) ?? "missing", allowed: `must be an object with ${fields.join(", ")}` });
    return null;
  }
  for (const k of Object.keys(value)) {
    if (!fields.includes(k)) problems.push({ path: `pair.${k}`, value: "present", allowed: `not a pair field (allowed: ${fields.join(", ")})` });
  }
  const uid = (k: "a" | "b"): number => {
    const i = value[k];
    if (typeof i === "number" && Number.isInteger(i) && i >= 0 && (i < slots.length || (i === 0 && slots.length === 0))) return slots[i]?.uid ?? 0;
    problems.push({ path: `pair.${k}`, value: JSON.stringify(i) ?? "missing", allowed: `must be the index of a design (0 to ${Math.max(0, slots.length - 1)})` });
    return 0;
  };
  const aUid = uid("a");
  const bUid = uid("b");
  const reach = value.reach;
  const rho = isObject(reach) ? reach.rho_dm_gev_per_cm3 : undefined;
  if (!isObject(reach) || Object.keys(reach).some((k) => k !== "rho_dm_gev_per_cm3") || typeof rho !== "number" || !Number.isFinite(rho)) {
    problems.push({ path: "pair.reach", value: JSON.stringify(reach) ?? "missing", allowed: "must be {\"rho_dm_gev_per_cm3\": a number}" });
  }
  if (problems.length > 0) return null;
  const pair: PairSettings = {
    aUid,
    bUid,
    comparison: value.comparison as Comparison,
    link: (value.link ?? null) as Link | null,
    campaign: value.campaign as Campaign,
    rho_dm_gev_per_cm3: rho as number,
    drafts: new Map(),
    problems: [],
  };
  const a = slots.find((s) => s.uid === aUid);
  const b = slots.find((s) => s.uid === bUid);
  if (!a || !b) return pair;
  // The engine checks the comparison, link and campaign (the designs were checked above) and
  // the reach options.
  const doc = pairDocument(pair, a.design, b.design);
  for (const p of engine.validatePair(doc)) if (!p.path.startsWith("pair.a.") && !p.path.startsWith("pair.b.")) problems.push(p);
  if (problems.length === 0) {
    try {
      engine.reach(doc, { rho_dm_gev_per_cm3: pair.rho_dm_gev_per_cm3, mass_points: 2, tau_points: 2 });
    } catch (err) {
      for (const p of problemsOf(err)) problems.push(p.path === "options.rho_dm_gev_per_cm3" ? { ...p, path: "pair.reach.rho_dm_gev_per_cm3" } : p);
    }
  }
  return problems.length > 0 ? null : pair;
}

/** The engine's pair document for the settings and the two designs. */
export function pairDocument(p: PairSettings, a: Design, b: Design): PairDocument {
  // The engine allows names of up to 200 characters; two long design names must not make the pair invalid.
  const name = [...`${a.name} / ${b.name}`].slice(0, 200).join("");
  const doc: PairDocument = { schema_version: 1, name, a, b, comparison: p.comparison, campaign: p.campaign };
  if (p.link) doc.link = p.link;
  return doc;
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
