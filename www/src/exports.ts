// Exports: the design as JSON, the result as CSV (curve and breakdown), the Allan-deviation
// figure as a standalone SVG (written as text from the same curve data as the page's plot,
// every style inline, every user string escaped) and as PNG at print resolution, and the
// comparison as a Markdown or HTML table: the script-free ways to put a result in a wiki or
// on a slide. Files are handed to the browser as blob: URLs; nothing leaves the page.

import type { Design, Evaluation, Mechanism } from "./engine";
import { numberParts, tauName } from "./format";
import { sigmaRange } from "./plots";

export const MECHANISM_TEXT: Record<Mechanism, string> = { laser: "laser", projection: "quantum projection noise", dick: "Dick effect" };

/** A design with its result, as the exports need it. */
export interface Result {
  name: string;
  colour: number;
  design: Design;
  evaluation: Evaluation;
  /** The selected design: its breakdown is drawn in the figure, as on the page. */
  selected?: boolean;
}

/** Escapes text for XML and HTML content and attribute values. */
export function escapeXml(text: string): string {
  return text.replace(/[&<>"']/g, (c) => ({ "&": "&amp;", "<": "&lt;", ">": "&gt;", '"': "&quot;", "'": "&#39;" })[c]!);
}

/** A file name made from a design name: letters, digits, "-" and "_" only. */
export function fileStem(name: string): string {
  const stem = name
    .normalize("NFKD")
    .replace(/[^A-Za-z0-9_-]+/g, "-")
    .replace(/^-+|-+$/g, "")
    .slice(0, 60);
  return stem === "" ? "design" : stem;
}

/** The design file, as the engine reads it (two-space indentation). */
export function designJson(design: Design): string {
  return `${JSON.stringify(design, null, 2)}\n`;
}

/** A number for a CSV field: the shortest text that reads back to the same double; empty when not finite. */
function csvNumber(x: number | null | undefined): string {
  return typeof x === "number" && Number.isFinite(x) ? String(x) : "";
}

/** The curve of one result: tau and sigma_y of the total, each mechanism, mod sigma_y and the free laser. */
export function curveCsv(e: Evaluation): string {
  const c = e.curve;
  const cols = ["tau_s", "total", "laser", "projection", "dick", "mod_total", "free_laser"] as const;
  const lines = [cols.join(",")];
  for (let i = 0; i < c.tau_s.length; i++) lines.push(cols.map((k) => csvNumber(c[k][i])).join(","));
  return `${lines.join("\r\n")}\r\n`;
}

/** The breakdown at the checkpoints (1 s, 1000 s, one day) with the dominant mechanism. */
export function breakdownCsv(e: Evaluation): string {
  const lines = ["tau_s,total,laser,projection,dick,dominant"];
  for (const c of e.checkpoints) lines.push([csvNumber(c.tau_s), csvNumber(c.total), csvNumber(c.laser), csvNumber(c.projection), csvNumber(c.dick), c.dominant].join(","));
  return `${lines.join("\r\n")}\r\n`;
}

// ----- the figure -------------------------------------------------------------------------------

/** The page's light palette (style.css, --p0 to --p7). */
const PALETTE = ["#0b5cad", "#c75a00", "#008a6e", "#a3307f", "#6b6b00", "#5a3fc0", "#9c3a1a", "#3c4650"];
const STYLES: Record<string, string> = {
  total: 'stroke-width="3"',
  laser: 'stroke-width="1.6" stroke-dasharray="9 5" opacity="0.8"',
  projection: 'stroke-width="2.2" stroke-dasharray="0.5 5.5" stroke-linecap="round" opacity="0.8"',
  dick: 'stroke-width="1.6" stroke-dasharray="11 4 2 4" opacity="0.8"',
  free_laser: 'stroke-width="1.5" opacity="0.35"',
};
const FONT = 'font-family="DejaVu Sans, Helvetica, Arial, sans-serif"';
const MINUS = "\u2212";

/** "10" with a superscript exponent, as SVG text content. */
function powerSvg(value: number): string {
  const e = Math.round(Math.log10(value));
  return `10<tspan dy="-0.55em" font-size="10">${String(e).replace("-", MINUS)}</tspan>`;
}

function fmt(x: number): string {
  return (Math.round(x * 100) / 100).toString();
}

/**
 * The Allan-deviation figure of `results` as a standalone SVG document: decade grid, log axes,
 * each design's total curve (with its breakdown for the selected design, or for every design
 * when `breakdownAll`), the target line, a legend and the model-estimate note. Sizes in CSS pixels.
 */
export function sigmaSvg(results: Result[], target: number | null, breakdownAll: boolean, width = 960, height = 600): string {
  const breakdown = breakdownAll || results.some((r) => r.selected);
  const range = sigmaRange(
    results.map((r) => r.evaluation),
    target,
  );
  const legendRows = Math.ceil(results.length / 2) + (breakdown ? 1 : 0);
  const left = 90;
  const right = 24;
  const top = 20;
  const bottom = 70 + legendRows * 20 + 22;
  const pw = width - left - right;
  const ph = height - top - bottom;
  const out: string[] = [];
  out.push(`<?xml version="1.0" encoding="UTF-8"?>`);
  out.push(`<svg xmlns="http://www.w3.org/2000/svg" width="${width}" height="${height}" viewBox="0 0 ${width} ${height}" ${FONT} font-size="15">`);
  out.push(`<title>Allan deviation of the locked laser: ${escapeXml(results.map((r) => r.name).join(", "))}</title>`);
  out.push(`<rect width="${width}" height="${height}" fill="#ffffff"/>`);
  if (!range) {
    out.push(`<text x="${width / 2}" y="${height / 2}" text-anchor="middle" fill="#4a525c">No finite values to plot</text></svg>`);
    return `${out.join("\n")}\n`;
  }
  const { xMin, xMax, yMin, yMax } = range;
  const lx = (t: number) => left + ((Math.log10(t) - Math.log10(xMin)) / (Math.log10(xMax) - Math.log10(xMin))) * pw;
  const ly = (v: number) => top + ph - ((Math.log10(v) - Math.log10(yMin)) / (Math.log10(yMax) - Math.log10(yMin))) * ph;
  const decadesOf = (lo: number, hi: number) => {
    const d: number[] = [];
    for (let e = Math.round(Math.log10(lo)); e <= Math.round(Math.log10(hi)); e++) d.push(10 ** e);
    return d;
  };
  let xd = decadesOf(xMin, xMax);
  let yd = decadesOf(yMin, yMax);
  out.push(`<g stroke="#dde2e8" stroke-width="1">`);
  for (const t of xd) out.push(`<line x1="${fmt(lx(t))}" x2="${fmt(lx(t))}" y1="${top}" y2="${top + ph}"/>`);
  for (const v of yd) out.push(`<line x1="${left}" x2="${left + pw}" y1="${fmt(ly(v))}" y2="${fmt(ly(v))}"/>`);
  out.push(`</g>`);
  out.push(`<rect x="${left}" y="${top}" width="${pw}" height="${ph}" fill="none" stroke="#14171a" stroke-width="1"/>`);
  if (xd.length > 9) xd = xd.filter((_, i) => i % 2 === 0);
  if (yd.length > 9) yd = yd.filter((_, i) => i % 2 === 0);
  out.push(`<g fill="#14171a" font-size="14">`);
  for (const t of xd) out.push(`<line x1="${fmt(lx(t))}" x2="${fmt(lx(t))}" y1="${top + ph}" y2="${top + ph + 7}" stroke="#14171a"/><text x="${fmt(lx(t))}" y="${top + ph + 26}" text-anchor="middle">${powerSvg(t)}</text>`);
  for (const v of yd) out.push(`<line x1="${left - 7}" x2="${left}" y1="${fmt(ly(v))}" y2="${fmt(ly(v))}" stroke="#14171a"/><text x="${left - 10}" y="${fmt(ly(v) + 5)}" text-anchor="end">${powerSvg(v)}</text>`);
  out.push(`</g>`);
  out.push(`<text x="${left + pw / 2}" y="${top + ph + 52}" text-anchor="middle" fill="#14171a">averaging time τ (s)</text>`);
  out.push(`<text transform="translate(22 ${top + ph / 2}) rotate(-90)" text-anchor="middle" fill="#14171a">Allan deviation σ<tspan dy="0.3em" font-size="11">y</tspan><tspan dy="-0.3em">(τ)</tspan></text>`);
  out.push(`<defs><clipPath id="plot-area"><rect x="${left}" y="${top}" width="${pw}" height="${ph}"/></clipPath></defs>`);
  out.push(`<g clip-path="url(#plot-area)" fill="none" stroke-linejoin="round">`);
  if (target !== null && Number.isFinite(target) && target >= yMin && target <= yMax) {
    out.push(`<line x1="${left}" x2="${left + pw}" y1="${fmt(ly(target))}" y2="${fmt(ly(target))}" stroke="#4a525c" stroke-width="1.2"/>`);
  }
  const path = (tau: number[], v: number[]): string => {
    let d = "";
    let pen = false;
    for (let i = 0; i < tau.length; i++) {
      const ok = Number.isFinite(tau[i]) && tau[i] > 0 && Number.isFinite(v[i]) && v[i] > 0;
      if (!ok) {
        pen = false;
        continue;
      }
      d += `${pen ? "L" : "M"}${fmt(lx(tau[i]))},${fmt(ly(Math.max(v[i], yMin / 10)))}`;
      pen = true;
    }
    return d;
  };
  for (const r of results) {
    const colour = PALETTE[r.colour % PALETTE.length];
    const c = r.evaluation.curve;
    out.push(`<g stroke="${colour}">`);
    if (breakdownAll || r.selected) {
      for (const k of ["free_laser", "laser", "projection", "dick"] as const) {
        const d = path(c.tau_s, c[k]);
        if (d) out.push(`<path class="${k}" d="${d}" ${STYLES[k]}/>`);
      }
    }
    const d = path(c.tau_s, c.total);
    if (d) out.push(`<path class="total" d="${d}" ${STYLES.total}/>`);
    out.push(`</g>`);
  }
  out.push(`</g>`);
  if (target !== null && Number.isFinite(target) && target >= yMin && target <= yMax) {
    out.push(`<text x="${left + 8}" y="${fmt(ly(target) - 6)}" fill="#14171a" font-size="13">target ${escapeXml(plainNumber(target, 2))}</text>`);
  }
  // Legend: designs in two columns, then the line styles.
  let y = top + ph + 78;
  results.forEach((r, i) => {
    const x = left + (i % 2) * (pw / 2);
    const yy = y + Math.floor(i / 2) * 20;
    const colour = PALETTE[r.colour % PALETTE.length];
    out.push(`<line x1="${x}" x2="${x + 30}" y1="${yy - 5}" y2="${yy - 5}" stroke="${colour}" ${STYLES.total}/><text x="${x + 38}" y="${yy}" fill="#14171a" font-size="14">${escapeXml(truncate(r.name, 48))}</text>`);
  });
  y += Math.ceil(results.length / 2) * 20;
  if (breakdown) {
    const keys: [string, string][] = [["laser", "laser"], ["projection", "projection noise"], ["dick", "Dick effect"], ["free_laser", "free laser"]];
    keys.forEach(([k, label], i) => {
      const x = left + i * (pw / 4);
      out.push(`<line x1="${x}" x2="${x + 30}" y1="${y - 5}" y2="${y - 5}" stroke="#14171a" ${STYLES[k]}/><text x="${x + 38}" y="${y}" fill="#14171a" font-size="13">${label}</text>`);
    });
    y += 20;
  }
  out.push(`<text x="${left}" y="${y + 2}" fill="#4a525c" font-size="12">Clockwright model estimate; measured performance decides.</text>`);
  out.push(`</svg>`);
  return `${out.join("\n")}\n`;
}

function truncate(s: string, n: number): string {
  return s.length > n ? `${s.slice(0, n - 1)}…` : s;
}

/**
 * The SVG drawn on a canvas `scale` times its size and encoded as PNG (scale 3 makes a 960-px
 * figure 2880 px wide: 300 dpi across 9.6 inches). The SVG is loaded from a blob: URL, which
 * the page's Content-Security-Policy allows for images.
 */
export async function svgToPng(svg: string, width: number, height: number, scale = 3): Promise<Blob> {
  const url = URL.createObjectURL(new Blob([svg], { type: "image/svg+xml" }));
  try {
    const img = new Image();
    img.decoding = "sync";
    await new Promise<void>((resolve, reject) => {
      img.onload = () => resolve();
      img.onerror = () => reject(new Error("the figure could not be drawn as an image"));
      img.src = url;
    });
    const canvas = document.createElement("canvas");
    canvas.width = Math.round(width * scale);
    canvas.height = Math.round(height * scale);
    const ctx = canvas.getContext("2d");
    if (!ctx) throw new Error("this browser gives no 2D canvas");
    ctx.fillStyle = "#ffffff";
    ctx.fillRect(0, 0, canvas.width, canvas.height);
    ctx.drawImage(img, 0, 0, canvas.width, canvas.height);
    return await new Promise<Blob>((resolve, reject) => canvas.toBlob((b) => (b ? resolve(b) : reject(new Error("the PNG could not be encoded"))), "image/png"));
  } finally {
    URL.revokeObjectURL(url);
  }
}

const SUPERSCRIPT: Record<string, string> = { "0": "⁰", "1": "¹", "2": "²", "3": "³", "4": "⁴", "5": "⁵", "6": "⁶", "7": "⁷", "8": "⁸", "9": "⁹", "\u2212": "⁻", "-": "⁻" };

/** "2.35×10⁻¹⁶" (Unicode superscripts): a number for plain text that reads well when pasted. */
export function plainNumber(x: number, digits = 3): string {
  const p = numberParts(x, digits);
  if (!p) return "no finite value";
  if (p.exponent === null) return p.mantissa;
  return `${p.mantissa}×10${[...String(p.exponent)].map((c) => SUPERSCRIPT[c] ?? c).join("")}`;
}

// ----- tables -----------------------------------------------------------------------------------

/** The comparison as rows of plain text: a header and one row per design. */
export function tableRows(results: Result[]): string[][] {
  const taus = results[0]?.evaluation.checkpoints.map((c) => c.tau_s) ?? [];
  const target = results[0]?.evaluation.target.target;
  const head = ["Design", ...taus.map((t) => `σ_y(${tauName(t)})`), "1-s-equivalent level", `Time to ${target !== undefined ? plainNumber(target, 3) : "the target"}`, `Dominant at ${taus.length ? tauName(taus[taus.length - 1]) : "1 day"}`];
  const rows = results.map((r) => {
    const e = r.evaluation;
    const time = e.target.time_s === null ? "not reached" : `${plainNumber(e.target.time_s, 3)} s`;
    const last = e.checkpoints[e.checkpoints.length - 1];
    return [r.name || "(unnamed)", ...e.checkpoints.map((c) => plainNumber(c.total, 3)), plainNumber(e.sigma_1s_equivalent, 3), time, last ? MECHANISM_TEXT[last.dominant] : "—"];
  });
  return [head, ...rows];
}

/**
 * A Markdown table. Cell text is escaped for Markdown and for the HTML that Markdown passes
 * through ("<", ">", "&" as entities, "|" and "\" with a backslash), so a name cannot inject markup.
 */
export function markdownTable(results: Result[]): string {
  const cell = (t: string) => t.replace(/[\\|`*_[\]]/g, (c) => `\\${c}`).replace(/[&<>]/g, (c) => ({ "&": "&amp;", "<": "&lt;", ">": "&gt;" })[c]!).replace(/[\r\n]+/g, " ");
  const [head, ...rows] = tableRows(results);
  const line = (r: string[]) => `| ${r.map(cell).join(" | ")} |`;
  return [line(head), `|${head.map(() => " --- ").join("|")}|`, ...rows.map(line), "", "Model estimates (Clockwright); measured performance decides.", ""].join("\n");
}

/** An HTML table (every cell escaped), to paste into a page that takes HTML. */
export function htmlTable(results: Result[]): string {
  const [head, ...rows] = tableRows(results);
  const tr = (r: string[], tag: string) => `  <tr>${r.map((c) => `<${tag}>${escapeXml(c)}</${tag}>`).join("")}</tr>`;
  return [
    "<table>",
    "  <caption>Allan deviation of the designs (Clockwright model estimates; measured performance decides)</caption>",
    tr(head, "th"),
    ...rows.map((r) => tr(r, "td")),
    "</table>",
    "",
  ].join("\n");
}

// ----- downloads --------------------------------------------------------------------------------

/** Hands `data` to the browser as a download named `name` (a blob: URL, revoked after a while). */
export function download(name: string, data: Blob | string, type: string): void {
  const blob = typeof data === "string" ? new Blob([data], { type }) : data;
  const url = URL.createObjectURL(blob);
  const a = document.createElement("a");
  a.href = url;
  a.download = name;
  a.rel = "noopener";
  document.body.append(a);
  a.click();
  a.remove();
  setTimeout(() => URL.revokeObjectURL(url), 30_000);
}
