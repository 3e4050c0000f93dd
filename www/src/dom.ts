// Small DOM helpers. Text is always inserted as text nodes, never parsed as HTML.

type Child = Node | string | null | undefined | false;

export interface Props {
  class?: string;
  id?: string;
  text?: string;
  title?: string;
  attrs?: Record<string, string>;
  data?: Record<string, string>;
  on?: Partial<Record<keyof HTMLElementEventMap, (ev: Event) => void>>;
}

/** Creates an element with properties and children (strings become text nodes). */
export function h<K extends keyof HTMLElementTagNameMap>(tag: K, props: Props = {}, ...children: Child[]): HTMLElementTagNameMap[K] {
  const el = document.createElement(tag);
  if (props.class) el.className = props.class;
  if (props.id) el.id = props.id;
  if (props.title) el.title = props.title;
  if (props.text !== undefined) el.textContent = props.text;
  for (const [k, v] of Object.entries(props.attrs ?? {})) el.setAttribute(k, v);
  for (const [k, v] of Object.entries(props.data ?? {})) el.dataset[k] = v;
  for (const [ev, fn] of Object.entries(props.on ?? {})) if (fn) el.addEventListener(ev, fn);
  for (const c of children) if (c !== null && c !== undefined && c !== false) el.append(c);
  return el;
}

const SVG_NS = "http://www.w3.org/2000/svg";

/** Creates an SVG element with attributes. */
export function s<K extends keyof SVGElementTagNameMap>(tag: K, attrs: Record<string, string | number> = {}, ...children: (Node | string)[]): SVGElementTagNameMap[K] {
  const el = document.createElementNS(SVG_NS, tag);
  for (const [k, v] of Object.entries(attrs)) el.setAttribute(k, String(v));
  for (const c of children) el.append(c);
  return el;
}

/** Removes every child of `el`. */
export function clear(el: Element): void {
  while (el.firstChild) el.removeChild(el.firstChild);
}

/** A sequence of ids unique within the page. */
let counter = 0;
export function uniqueId(prefix: string): string {
  counter += 1;
  return `${prefix}-${counter}`;
}

/** Text only visible to assistive technology. */
export function srOnly(text: string): HTMLSpanElement {
  return h("span", { class: "sr-only", text });
}

/** Splits "σ_y(τ)" or "h_{-1}" into runs: plain text, "_" subscripts and "^" superscripts. */
export function richRuns(text: string): { text: string; kind: "plain" | "sub" | "sup" }[] {
  const runs: { text: string; kind: "plain" | "sub" | "sup" }[] = [];
  const re = /([_^])(\{([^}]*)\}|(.))/gu;
  let last = 0;
  let m: RegExpExecArray | null;
  while ((m = re.exec(text)) !== null) {
    if (m.index > last) runs.push({ text: text.slice(last, m.index), kind: "plain" });
    runs.push({ text: m[3] ?? m[4], kind: m[1] === "_" ? "sub" : "sup" });
    last = re.lastIndex;
  }
  if (last < text.length) runs.push({ text: text.slice(last), kind: "plain" });
  return runs;
}

/** Appends text to an HTML element with "_x" as <sub> and "^x" as <sup> (as text nodes). */
export function rich(el: HTMLElement, text: string): HTMLElement {
  for (const r of richRuns(text)) {
    if (r.kind === "plain") el.append(r.text);
    else el.append(h(r.kind, { text: r.text }));
  }
  return el;
}

/** The same for SVG text: sub- and superscripts as shifted tspans. */
export function richSvg(el: SVGTextElement, text: string): SVGTextElement {
  let shift = 0;
  for (const r of richRuns(text)) {
    const want = r.kind === "sub" ? 0.3 : r.kind === "sup" ? -0.5 : 0;
    const t = s("tspan", want !== shift ? { dy: `${(want - shift).toFixed(2)}em` } : {}, r.text);
    if (r.kind !== "plain") t.setAttribute("class", "small-script");
    el.append(t);
    shift = want;
  }
  if (shift !== 0) el.append(s("tspan", { dy: `${(-shift).toFixed(2)}em` }, "\u200b"));
  return el;
}
