// The engine: the WebAssembly binding, loaded from the compressed data block inlined in the page.

import init, * as cw from "../dist/pkg/clockwright_wasm.js";
import type { Problem } from "../dist/pkg/clockwright_wasm.js";
import { Jobs } from "./jobs";
import { inflateBlock } from "./packed";

export type {
  Design,
  Evaluation,
  EvalOptions,
  Problem,
  Segment,
  NoiseTerm,
  Preset,
  PresetInfo,
  SpectrumTable,
  SpectrumUnit,
  DeadLabel,
  Entanglement,
  Mechanism,
  Species,
  PairDocument,
  PairEvaluation,
  PairOptions,
  Comparison,
  Link,
  Campaign,
  Reach,
  ReachOptions,
} from "../dist/pkg/clockwright_wasm.js";

/**
 * Reads the engine module from the data block with id `cw-wasm` (packed.ts), compiles and
 * instantiates it, and reads the worker's script from the block `cw-worker`. Nothing is fetched.
 */
export async function loadEngine(doc: Document): Promise<void> {
  compiled = await WebAssembly.compile(await inflateBlock(doc, "cw-wasm", "engine module"));
  await init({ module_or_path: compiled });
  workerSource = new TextDecoder().decode(await inflateBlock(doc, "cw-worker", "worker code"));
}

let compiled: WebAssembly.Module | null = null;
let workerSource = "";
let background: Jobs | null = null;

/** The background worker for long jobs (made on first use from the page's cw-worker block). */
export function jobs(): Jobs {
  if (!background) {
    if (!compiled || workerSource === "") throw new Error("the page holds no worker code (the cw-worker block is empty)");
    background = new Jobs(workerSource, compiled);
  }
  return background;
}

export const engine = {
  evaluate: cw.evaluate,
  validate: cw.validate,
  demoDesigns: cw.demoDesigns,
  presets: cw.presets,
  presetSegments: cw.presetSegments,
  parseSpectrumCsv: cw.parseSpectrumCsv,
  schemaVersion: cw.schemaVersion,
  speciesCatalog: cw.speciesCatalog,
  demoPairs: cw.demoPairs,
  validatePair: cw.validatePair,
  evaluatePair: cw.evaluatePair,
  reach: cw.reach,
};

/** The problems carried by an error thrown by the engine (or one describing any other error). */
export function problemsOf(err: unknown): Problem[] {
  if (err && typeof err === "object" && Array.isArray((err as { problems?: unknown }).problems)) {
    return (err as { problems: Problem[] }).problems;
  }
  const message = err instanceof Error ? err.message : String(err);
  return [{ path: "(engine)", value: "", allowed: message }];
}

/** A problem as one line of text: "path: value; allowed". */
export function problemText(p: Problem): string {
  return p.value === "" ? `${p.path}: ${p.allowed}` : `${p.path}: ${p.value}; ${p.allowed}`;
}
