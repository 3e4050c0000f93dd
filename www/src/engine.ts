// The engine: the WebAssembly binding, loaded from the compressed data block inlined in the page.

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
 * Reads the engine module from the data block with id `cw-wasm` (zlib-compressed, base 85),
 * inflates it with the browser's DecompressionStream and instantiates it. Nothing is fetched.
 */
export async function loadEngine(doc: Document): Promise<void> {
  const block = doc.getElementById("cw-wasm");
  const text = block?.textContent?.trim() ?? "";
  if (text === "") throw new Error("the page holds no engine module (the cw-wasm block is empty)");
  if (typeof DecompressionStream === "undefined") {
    throw new Error("this browser lacks DecompressionStream; use a current Chromium, Firefox or Safari");
  }
  compiled = await WebAssembly.compile(await inflate(text));
  await init({ module_or_path: compiled });
  const worker = doc.getElementById("cw-worker")?.textContent?.trim() ?? "";
  workerSource = worker === "" ? "" : new TextDecoder().decode(await inflate(worker));
}

/** A data block of the page: zlib-compressed, in base 85 (tools/pagebuild). */
async function inflate(text: string): Promise<ArrayBuffer> {
  const stream = new Blob([decodeBase85(text)]).stream().pipeThrough(new DecompressionStream("deflate"));
  return new Response(stream).arrayBuffer();
}

let compiled: WebAssembly.Module | null = null;
let workerSource = "";
let background: Jobs | null = null;

const BASE85 = "!#()*+,-./0123456789:;=?@ABCDEFGHIJKLMNOPQRSTUVWXYZ[]^_abcdefghijklmnopqrstuvwxyz{|}~";

/** Decodes the module block: "<byte count>:" then five base-85 characters per four bytes (tools/pagebuild). */
export function decodeBase85(text: string): Uint8Array<ArrayBuffer> {
  const colon = text.indexOf(":");
  const n = Number(text.slice(0, colon));
  const body = text.slice(colon + 1);
  if (colon < 1 || !Number.isInteger(n) || n < 0 || body.length % 5 !== 0 || Math.ceil(n / 4) * 5 !== body.length) {
    throw new Error("the engine module block is damaged (its length does not match)");
  }
  const index = new Int16Array(128).fill(-1);
  for (let i = 0; i < BASE85.length; i++) index[BASE85.charCodeAt(i)] = i;
  const out = new Uint8Array((body.length / 5) * 4);
  for (let g = 0, j = 0; g < body.length; g += 5, j += 4) {
    let v = 0;
    for (let k = 0; k < 5; k++) {
      const c = body.charCodeAt(g + k);
      const d = c < 128 ? index[c] : -1;
      if (d < 0) throw new Error("the engine module block is damaged (a character outside its alphabet)");
      v = v * 85 + d;
    }
    out[j] = (v >>> 24) & 255;
    out[j + 1] = (v >>> 16) & 255;
    out[j + 2] = (v >>> 8) & 255;
    out[j + 3] = v & 255;
  }
  return out.slice(0, n);
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
