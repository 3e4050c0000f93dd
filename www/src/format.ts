// Reading numbers from inputs and writing numbers for people: m×10^n where large or small.

const MINUS = "\u2212";

/** Parts of a number as shown: mantissa text and power of ten (null when shown plainly). */
export interface NumberParts {
  mantissa: string;
  exponent: number | null;
}

/**
 * Splits `x` for display with `digits` significant digits. Values from 1e-3 up to 1e4 are
 * shown plainly, others as m×10^n. Non-finite values have no parts.
 */
export function numberParts(x: number, digits = 3): NumberParts | null {
  if (!Number.isFinite(x)) return null;
  if (x === 0) return { mantissa: "0", exponent: null };
  const ax = Math.abs(x);
  if (ax >= 1e-3 && ax < 1e4) {
    return { mantissa: trimPlain(x.toPrecision(digits)).replace("-", MINUS), exponent: null };
  }
  const [m, e] = x.toExponential(digits - 1).split("e");
  return { mantissa: m.replace("-", MINUS), exponent: Number(e) };
}

function trimPlain(s: string): string {
  // toPrecision may itself switch to exponent form for some inputs; keep it plain.
  if (s.includes("e")) return String(Number(s));
  return s;
}

/** The number as plain text, e.g. "2.35×10−17" (the minus sign is U+2212). */
export function numberText(x: number, digits = 3): string {
  const p = numberParts(x, digits);
  if (!p) return "—";
  return p.exponent === null ? p.mantissa : `${p.mantissa}×10${String(p.exponent).replace("-", MINUS)}`;
}

/**
 * Appends the number to `el` as text nodes and a <sup> exponent, never as HTML.
 * Non-finite values appear as an em dash with an explanation for assistive technology.
 */
export function appendNumber(el: Element, x: number, digits = 3, unit = ""): void {
  const doc = el.ownerDocument;
  const p = numberParts(x, digits);
  if (!p) {
    const s = doc.createElement("span");
    s.textContent = "—";
    s.title = "no finite value";
    el.append(s);
    return;
  }
  if (p.exponent === null) {
    el.append(doc.createTextNode(p.mantissa));
  } else {
    el.append(doc.createTextNode(`${p.mantissa}×10`));
    const sup = doc.createElement("sup");
    sup.textContent = String(p.exponent).replace("-", MINUS);
    el.append(sup);
  }
  if (unit) el.append(doc.createTextNode(`\u00a0${unit}`));
}

/** A duration in seconds with a readable larger unit where that helps ("3.6×10^4 s (10.0 h)"). */
export function appendDuration(el: Element, seconds: number): void {
  appendNumber(el, seconds, 3, "s");
  if (!Number.isFinite(seconds)) return;
  const units: [number, string][] = [
    [365.25 * 86400, "years"],
    [86400, "days"],
    [3600, "h"],
    [60, "min"],
  ];
  for (const [size, name] of units) {
    if (seconds >= size) {
      el.append(el.ownerDocument.createTextNode(` (${(seconds / size).toPrecision(3)} ${name})`));
      return;
    }
  }
}

/** An averaging time as a short name: "1 s", "1000 s", "1 day". */
export function tauName(tau: number): string {
  if (tau === 86400) return "1 day";
  if (Number.isInteger(tau) && tau < 1e6) return `${tau} s`;
  return `${numberText(tau)} s`;
}

/**
 * Text for an input field that reads back exactly: plain for ordinary magnitudes,
 * "1.121e15" style where large or small.
 */
export function inputText(x: number): string {
  if (!Number.isFinite(x)) return "";
  const ax = Math.abs(x);
  if (x === 0 || (ax >= 1e-3 && ax < 1e5)) return String(x);
  return x.toExponential().replace("e+", "e");
}

const NUMBER_RE = /^[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?$/;

/** Result of reading a number typed by a person. */
export type Parsed = { ok: true; value: number } | { ok: false; allowed: string };

/**
 * Reads "1e-16", "-0.5", "4.29E14", also with a Unicode minus or spaces around.
 * `integer` demands a whole number.
 */
export function parseNumber(text: string, integer = false): Parsed {
  const t = text.trim().replace(/\u2212/g, "-");
  if (t === "") return { ok: false, allowed: integer ? "must be a whole number" : "must be a number, e.g. 1e-16" };
  if (!NUMBER_RE.test(t)) {
    return { ok: false, allowed: integer ? "must be a whole number" : "must be a number such as 0.25, 429e12 or 1e-16" };
  }
  const v = Number(t);
  if (!Number.isFinite(v)) return { ok: false, allowed: "must be a finite number" };
  if (integer && (!Number.isInteger(v) || !Number.isSafeInteger(v))) return { ok: false, allowed: "must be a whole number" };
  return { ok: true, value: v };
}

/** Picks a display unit for a span of time in seconds. */
export function timeUnit(spanSeconds: number): { factor: number; unit: string } {
  if (spanSeconds < 1e-3) return { factor: 1e6, unit: "µs" };
  if (spanSeconds < 1) return { factor: 1e3, unit: "ms" };
  return { factor: 1, unit: "s" };
}

/** Picks a display unit for a span of frequency in hertz. */
export function frequencyUnit(spanHz: number): { factor: number; unit: string } {
  if (spanHz >= 1e6) return { factor: 1e-6, unit: "MHz" };
  if (spanHz >= 1e3) return { factor: 1e-3, unit: "kHz" };
  if (spanHz < 1) return { factor: 1e3, unit: "mHz" };
  return { factor: 1, unit: "Hz" };
}
