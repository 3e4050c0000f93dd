// Field paths as the engine writes them in problems: "sequence.segments[2].duration_s".

export type Key = string | number;

/** Splits a path into keys: "a.b[2].c" -> ["a", "b", 2, "c"]. */
export function splitPath(path: string): Key[] {
  const keys: Key[] = [];
  const re = /([^.[\]]+)|\[(\d+)\]/g;
  let m: RegExpExecArray | null;
  while ((m = re.exec(path)) !== null) {
    if (m[1] !== undefined) keys.push(m[1]);
    else keys.push(Number(m[2]));
  }
  return keys;
}

/** Joins keys back into a path. */
export function joinPath(keys: Key[]): string {
  let out = "";
  for (const k of keys) {
    if (typeof k === "number") out += `[${k}]`;
    else out += out === "" ? k : `.${k}`;
  }
  return out;
}

/** The path one level up ("a.b[2].c" -> "a.b[2]", "a.b[2]" -> "a.b", "a" -> ""). */
export function parentPath(path: string): string {
  const keys = splitPath(path);
  keys.pop();
  return joinPath(keys);
}

type Container = Record<string, unknown> | unknown[];

/** Reads the value at `path` (undefined when absent). */
export function getAt(root: unknown, path: string): unknown {
  let cur: unknown = root;
  for (const k of splitPath(path)) {
    if (cur === null || typeof cur !== "object") return undefined;
    cur = (cur as Record<string | number, unknown>)[k];
  }
  return cur;
}

/** Writes `value` at `path`; the containers on the way must exist. Returns false if not. */
export function setAt(root: unknown, path: string, value: unknown): boolean {
  const keys = splitPath(path);
  const last = keys.pop();
  if (last === undefined) return false;
  let cur: unknown = root;
  for (const k of keys) {
    if (cur === null || typeof cur !== "object") return false;
    cur = (cur as Record<string | number, unknown>)[k];
  }
  if (cur === null || typeof cur !== "object") return false;
  (cur as Container as Record<string | number, unknown>)[last] = value;
  return true;
}
