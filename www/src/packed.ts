// Data blocks of the single-file page (tools/pagebuild): zlib-compressed bytes written as
// "<byte count>:" and then five base-85 characters for every four bytes. The engine module,
// the background worker's script and the page's own program travel this way; the browser's
// DecompressionStream inflates them. Nothing is fetched.

const BASE85 = "!#()*+,-./0123456789:;=?@ABCDEFGHIJKLMNOPQRSTUVWXYZ[]^_abcdefghijklmnopqrstuvwxyz{|}~";

/** Decodes a block's text: "<byte count>:" then five base-85 characters per four bytes. */
export function decodeBase85(text: string): Uint8Array<ArrayBuffer> {
  const colon = text.indexOf(":");
  const n = Number(text.slice(0, colon));
  const body = text.slice(colon + 1);
  if (colon < 1 || !Number.isInteger(n) || n < 0 || body.length % 5 !== 0 || Math.ceil(n / 4) * 5 !== body.length) {
    throw new Error("a data block of the page is damaged (its length does not match)");
  }
  const index = new Int16Array(128).fill(-1);
  for (let i = 0; i < BASE85.length; i++) index[BASE85.charCodeAt(i)] = i;
  const out = new Uint8Array((body.length / 5) * 4);
  for (let g = 0, j = 0; g < body.length; g += 5, j += 4) {
    let v = 0;
    for (let k = 0; k < 5; k++) {
      const c = body.charCodeAt(g + k);
      const d = c < 128 ? index[c] : -1;
      if (d < 0) throw new Error("a data block of the page is damaged (a character outside its alphabet)");
      v = v * 85 + d;
    }
    out[j] = (v >>> 24) & 255;
    out[j + 1] = (v >>> 16) & 255;
    out[j + 2] = (v >>> 8) & 255;
    out[j + 3] = v & 255;
  }
  return out.slice(0, n);
}

/** The bytes of the data block with this id; `what` names it in errors. */
export async function inflateBlock(doc: Document, id: string, what: string): Promise<ArrayBuffer> {
  const text = doc.getElementById(id)?.textContent?.trim() ?? "";
  if (text === "") throw new Error(`the page holds no ${what} (the ${id} block is empty)`);
  if (typeof DecompressionStream === "undefined") {
    throw new Error("this browser lacks DecompressionStream; use a current Chromium, Firefox or Safari");
  }
  const stream = new Blob([decodeBase85(text)]).stream().pipeThrough(new DecompressionStream("deflate"));
  return new Response(stream).arrayBuffer();
}
