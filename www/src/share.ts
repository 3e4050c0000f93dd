// Share links: the whole workspace in the URL fragment.
//
//   #share=v1.<crc>.<data>   opens the workspace in the editor
//   #embed=v1.<crc>.<data>   shows it in the compact, read-only embed view
//
// <data> is the workspace file (workspace.ts, the same JSON as "Save workspace") compressed
// with the browser's CompressionStream("deflate-raw") and written in base64url without
// padding (RFC 4648, section 5); <crc> is the CRC-32 of the JSON's UTF-8 bytes in eight hex
// digits (the CRC of ISO 3309 / ITU-T V.42, as zlib computes it), so that a link altered or cut
// short is told apart from one that merely holds an invalid workspace. What the link holds is
// then read exactly like a workspace file: readDoc and the engine's validation.
//
// This module has no DOM dependence besides the streams, so the fuzz harness runs it in Node.

import type { Problem } from "./engine";
import { readDoc, toDoc, type State, type WorkspaceDoc } from "./workspace";

/** The link format this page writes; the versions it reads. */
export const LINK_VERSION = 1;
export const READABLE_LINK_VERSIONS = [1];
/** Longest fragment read, characters (about Chromium's limit on a whole URL). */
export const MAX_LINK_CHARS = 2 * 1024 * 1024;
/**
 * Largest workspace a link may inflate to, bytes: 1 MiB, a fifth of a workspace file's cap
 * (a workspace of eight designs with 10 000-point spectrum tables takes about 2.5 MB of JSON
 * and has to travel as a file) so that reading any link stays within 100 ms.
 */
export const MAX_INFLATED_BYTES = 1024 * 1024;

export type LinkKind = "share" | "embed";

/** A problem with a link, in the form of the engine's problems. */
function problem(allowed: string, value = ""): Problem {
  return { path: "(link)", value, allowed };
}

/** Thrown by the decoder: the problem, in words a person can act on. */
export class LinkError extends Error {
  constructor(readonly problems: Problem[]) {
    super(problems.map((p) => `${p.path}: ${p.allowed}`).join("; "));
  }
}

/** Which kind of link `hash` ("#share=…", "share=…") is, or null for any other fragment. */
export function linkKind(hash: string): LinkKind | null {
  const h = hash.startsWith("#") ? hash.slice(1) : hash;
  if (h.startsWith("share=")) return "share";
  if (h.startsWith("embed=")) return "embed";
  return null;
}

// ----- CRC-32 ---------------------------------------------------------------------------------

let crcTable: Uint32Array | null = null;

/** CRC-32 (reflected polynomial 0xEDB88320, initial and final XOR 0xFFFFFFFF), as zlib's crc32. */
export function crc32(bytes: Uint8Array): number {
  if (!crcTable) {
    crcTable = new Uint32Array(256);
    for (let n = 0; n < 256; n++) {
      let c = n;
      for (let k = 0; k < 8; k++) c = c & 1 ? 0xedb88320 ^ (c >>> 1) : c >>> 1;
      crcTable[n] = c >>> 0;
    }
  }
  let c = 0xffffffff;
  for (let i = 0; i < bytes.length; i++) c = crcTable[(c ^ bytes[i]) & 0xff] ^ (c >>> 8);
  return (c ^ 0xffffffff) >>> 0;
}

// ----- base64url (RFC 4648, section 5, no padding) ---------------------------------------------

const B64URL = "ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789-_";

export function toBase64url(bytes: Uint8Array): string {
  let out = "";
  for (let i = 0; i < bytes.length; i += 3) {
    const n = (bytes[i] << 16) | ((bytes[i + 1] ?? 0) << 8) | (bytes[i + 2] ?? 0);
    const chars = Math.min(4, Math.ceil(((bytes.length - i) * 8) / 6));
    for (let k = 0; k < chars; k++) out += B64URL[(n >>> (18 - 6 * k)) & 63];
  }
  return out;
}

/** Decodes base64url without padding; null when a character or the length is not allowed. */
export function fromBase64url(text: string): Uint8Array<ArrayBuffer> | null {
  if (text.length % 4 === 1) return null;
  const index = new Int8Array(128).fill(-1);
  for (let i = 0; i < 64; i++) index[B64URL.charCodeAt(i)] = i;
  const out = new Uint8Array(Math.floor((text.length * 6) / 8));
  let acc = 0;
  let bits = 0;
  let j = 0;
  for (let i = 0; i < text.length; i++) {
    const c = text.charCodeAt(i);
    const d = c < 128 ? index[c] : -1;
    if (d < 0) return null;
    acc = ((acc << 6) | d) & 0xffffff;
    bits += 6;
    if (bits >= 8) {
      bits -= 8;
      out[j++] = (acc >>> bits) & 0xff;
    }
  }
  // The unused low bits of the last character must be zero (RFC 4648, section 3.5).
  if (bits > 0 && (acc & ((1 << bits) - 1)) !== 0) return null;
  return out;
}

// ----- compression ------------------------------------------------------------------------------

async function deflateRaw(bytes: Uint8Array<ArrayBuffer>): Promise<Uint8Array> {
  const stream = new Blob([bytes]).stream().pipeThrough(new CompressionStream("deflate-raw"));
  return new Uint8Array(await new Response(stream).arrayBuffer());
}

/** Inflates; stops with an error once the output passes `cap` bytes (a small link cannot become a huge workspace). */
async function inflateRaw(bytes: Uint8Array<ArrayBuffer>, cap: number): Promise<Uint8Array> {
  const reader = new Blob([bytes]).stream().pipeThrough(new DecompressionStream("deflate-raw")).getReader();
  const parts: Uint8Array[] = [];
  let total = 0;
  for (;;) {
    const { done, value } = await reader.read();
    if (done) break;
    total += value.length;
    if (total > cap) {
      await reader.cancel().catch(() => undefined);
      throw new LinkError([problem(`the link's workspace would exceed ${cap} bytes, the largest workspace read`)]);
    }
    parts.push(value);
  }
  const out = new Uint8Array(total);
  let at = 0;
  for (const p of parts) {
    out.set(p, at);
    at += p.length;
  }
  return out;
}

// ----- links ---------------------------------------------------------------------------------

/** The fragment body (without "#") of a link to `doc`: "share=v1.<crc>.<data>" or "embed=…". */
export async function encodeLink(doc: WorkspaceDoc, kind: LinkKind): Promise<string> {
  const json = new TextEncoder().encode(JSON.stringify(doc));
  if (json.length > MAX_INFLATED_BYTES) {
    throw new LinkError([problem(`the workspace takes ${json.length} bytes, more than the ${MAX_INFLATED_BYTES} a link may carry; send it as a file (Save workspace…)`)]);
  }
  const crc = crc32(json).toString(16).padStart(8, "0");
  return `${kind}=v${LINK_VERSION}.${crc}.${toBase64url(await deflateRaw(json))}`;
}

/** The link to the workspace of `state`. */
export function linkTo(state: State, kind: LinkKind): Promise<string> {
  return encodeLink(toDoc(state), kind);
}

/**
 * Reads a link's fragment ("#share=v1.…" or "#embed=v1.…") back to the JSON value it holds.
 * Throws a LinkError naming what is wrong: not a link, an unknown version, characters or a
 * length that base64url does not allow, data that does not inflate, a checksum that does not
 * match (altered or cut short), text that is not UTF-8 or not JSON. Any other exception is a
 * bug (the fuzz harness tests/fuzz/share_link.mjs looks for them).
 */
export async function decodeLink(hash: string): Promise<{ kind: LinkKind; value: unknown }> {
  const h = hash.startsWith("#") ? hash.slice(1) : hash;
  const kind = linkKind(h);
  if (!kind) throw new LinkError([problem("is not a share link: it must start with share= or embed=")]);
  if (h.length > MAX_LINK_CHARS) throw new LinkError([problem(`a link may hold at most ${MAX_LINK_CHARS} characters`, `${h.length} characters`)]);
  const body = h.slice(kind.length + 1);
  const m = /^v(\d{1,9})\.(.*)$/s.exec(body);
  if (!m) throw new LinkError([problem(`must read ${kind}=v${LINK_VERSION}.<checksum>.<data>; the version is missing (the link was cut or altered)`, quoteStart(body))]);
  const version = Number(m[1]);
  if (!READABLE_LINK_VERSIONS.includes(version)) {
    throw new LinkError([problem(`this page reads link version ${READABLE_LINK_VERSIONS.join(" and ")}; version ${version} may come from a newer page`, `v${m[1]}`)]);
  }
  const parts = /^([0-9a-f]{8})\.([A-Za-z0-9_-]*)$/.exec(m[2]);
  if (!parts) {
    throw new LinkError([problem("must be an eight-digit checksum, a dot and base64url data (A-Z, a-z, 0-9, - and _); the link was cut or altered", quoteStart(m[2]))]);
  }
  const packed = fromBase64url(parts[2]);
  if (!packed || packed.length === 0) throw new LinkError([problem("the data is not whole base64url (the link was cut or altered)", `${parts[2].length} characters`)]);
  let raw: Uint8Array;
  try {
    raw = await inflateRaw(packed, MAX_INFLATED_BYTES);
  } catch (err) {
    if (err instanceof LinkError) throw err;
    throw new LinkError([problem("the data does not decompress: the link was cut short or altered")]);
  }
  if (crc32(raw) !== parseInt(parts[1], 16)) {
    throw new LinkError([problem("the checksum does not match the data: the link was altered or cut short", parts[1])]);
  }
  let text: string;
  try {
    text = new TextDecoder("utf-8", { fatal: true }).decode(raw);
  } catch {
    throw new LinkError([problem("the data is not UTF-8 text")]);
  }
  let value: unknown;
  try {
    value = JSON.parse(text);
  } catch (err) {
    throw new LinkError([problem(`the data is not JSON (${(err as Error).message})`)]);
  }
  if (nestingDepth(value, MAX_DEPTH) > MAX_DEPTH) throw new LinkError([problem(`the data is nested deeper than ${MAX_DEPTH} levels; a workspace needs fewer than 10`)]);
  return { kind, value };
}

/** Deepest nesting of lists and objects read from a link (a workspace has fewer than 10 levels). */
export const MAX_DEPTH = 32;

/** Depth of nesting of `value`, counted without recursion and only up to `limit + 1`. */
function nestingDepth(value: unknown, limit: number): number {
  let deepest = 0;
  const stack: [unknown, number][] = [[value, 0]];
  while (stack.length > 0) {
    const [v, d] = stack.pop()!;
    if (v === null || typeof v !== "object") continue;
    if (d + 1 > deepest) deepest = d + 1;
    if (deepest > limit) return deepest;
    for (const child of Array.isArray(v) ? v : Object.values(v)) stack.push([child, d + 1]);
  }
  return deepest;
}

function quoteStart(s: string): string {
  return JSON.stringify(s.length > 24 ? `${s.slice(0, 24)}…` : s);
}

/**
 * Reads a link to a workspace: decodeLink, then readDoc with the engine's validation, as a
 * workspace file. Returns the state, or the problems (of the link or of the workspace in it).
 */
export async function readLink(hash: string): Promise<{ kind: LinkKind; state: State } | { kind: LinkKind | null; problems: Problem[] }> {
  const kind = linkKind(hash.startsWith("#") ? hash.slice(1) : hash);
  let value: unknown;
  try {
    value = (await decodeLink(hash)).value;
  } catch (err) {
    if (err instanceof LinkError) return { kind, problems: err.problems };
    throw err;
  }
  const r = readDoc(value);
  return "state" in r ? { kind: kind!, state: r.state } : { kind, problems: r.problems };
}
