// The engine: the WebAssembly binding, loaded from the base64 data block inlined in the page.

import init, * as cw from "../dist/pkg/clockwright_wasm.js";
import type { Problem } from "../dist/pkg/clockwright_wasm.js";
import { Jobs } from "./jobs";

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
 * Reads the engine module from the data block with id `cw-wasm` (zlib-compressed, base64),
 * inflates it with the browser's DecompressionStream and instantiates it. Nothing is fetched.
 */
export async function loadEngine(doc: Document): Promise<void> {
  const block = doc.getElementById("cw-wasm");
  const text = block?.textContent?.trim() ?? "";
  if (text === "") throw new Error("the page holds no engine module (the cw-wasm block is empty)");
  if (typeof DecompressionStream === "undefined") {
    throw new Error("this browser lacks DecompressionStream; use a current Chromium, Firefox or Safari");
  }
  const stream = new Blob([decodeBase64(text)]).stream().pipeThrough(new DecompressionStream("deflate"));
  const bytes = await new Response(stream).arrayBuffer();
  compiled = await WebAssembly.compile(bytes);
  await init({ module_or_path: compiled });
  const worker = doc.getElementById("cw-worker")?.textContent?.trim() ?? "";
  workerSource = worker === "" ? "" : new TextDecoder().decode(decodeBase64(worker));
}

let compiled: WebAssembly.Module | null = null;
let workerSource = "";
let background: Jobs | null = null;

function decodeBase64(text: string): Uint8Array<ArrayBuffer> {
  const raw = atob(text);
  const out = new Uint8Array(raw.length);
  for (let i = 0; i < raw.length; i++) out[i] = raw.charCodeAt(i);
  return out;
}

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
