// Long computations in a background worker, with progress and cancel. The worker's code sits
// in the page as a data block (id `cw-worker`, compressed, base 85) and runs from a blob: URL; the engine
// module the page compiled is handed to it, so nothing is fetched.

import type { Problem } from "../dist/pkg/clockwright_wasm.js";

/** Messages to the worker. */
export type JobRequest =
  | { type: "init"; module: WebAssembly.Module }
  | { type: "run"; id: number; kind: string; input: Record<string, unknown>; chunk: number };

/** Messages from the worker. */
export type WorkerReply =
  | { type: "ready" }
  | { type: "progress"; id: number; fraction: number }
  | { type: "done"; id: number; result: unknown }
  | { type: "failed"; id: number; problems: Problem[] };

/** Thrown (as the rejection) when a job is cancelled. */
export class Cancelled extends Error {
  constructor() {
    super("cancelled");
  }
}

/** Thrown when a job fails: the engine's problems. */
export class JobFailed extends Error {
  constructor(readonly problems: Problem[]) {
    super(problems.map((p) => `${p.path}: ${p.allowed}`).join("; "));
  }
}

interface Current {
  id: number;
  resolve: (v: unknown) => void;
  reject: (e: Error) => void;
  progress: (fraction: number) => void;
}

/** Runs one job at a time in a worker; `cancel` stops it at once (the worker is replaced). */
export class Jobs {
  private worker: Worker | null = null;
  private ready: Promise<void> | null = null;
  private current: Current | null = null;
  private nextId = 1;
  private url: string;

  constructor(
    workerSource: string,
    private module: WebAssembly.Module,
  ) {
    this.url = URL.createObjectURL(new Blob([workerSource], { type: "text/javascript" }));
  }

  /** Whether a job is running. */
  get busy(): boolean {
    return this.current !== null;
  }

  private watchers = new Set<() => void>();

  /** Calls `f` whenever a job starts or ends (views enable their run buttons again). */
  watch(f: () => void): void {
    this.watchers.add(f);
  }

  private changed(): void {
    for (const f of this.watchers) f();
  }

  /** Runs `kind` on `input` in chunks of `chunk` units; rejects with Cancelled or JobFailed. */
  async run(kind: string, input: Record<string, unknown>, chunk: number, progress: (fraction: number) => void = () => {}): Promise<unknown> {
    if (this.current) throw new Error("a job is already running; cancel it first");
    const id = this.nextId++;
    let settle: Pick<Current, "resolve" | "reject"> = { resolve: () => {}, reject: () => {} };
    const done = new Promise<unknown>((resolve, reject) => {
      settle = { resolve, reject };
    });
    const current: Current = { id, progress, ...settle };
    this.current = current;
    this.changed();
    try {
      await this.start();
      // Cancelled while the worker started: the promise has already been rejected.
      if (this.current === current) this.worker?.postMessage({ type: "run", id, kind, input, chunk } satisfies JobRequest);
    } catch (err) {
      this.finish(id, (c) => c.reject(err instanceof Error ? err : new Error(String(err))));
    }
    return done;
  }

  /** Stops the running job (if any); its promise rejects with Cancelled. */
  cancel(): void {
    this.worker?.terminate();
    this.worker = null;
    this.ready = null;
    const c = this.current;
    this.current = null;
    c?.reject(new Cancelled());
    if (c) this.changed();
  }

  private start(): Promise<void> {
    if (this.ready) return this.ready;
    const w = new Worker(this.url);
    this.worker = w;
    this.ready = new Promise<void>((resolve, reject) => {
      w.onmessage = (ev: MessageEvent) => {
        const m = ev.data as WorkerReply;
        if (m.type === "ready") resolve();
        else if (m.type === "failed" && m.id === 0) reject(new JobFailed(m.problems));
        else this.reply(m);
      };
      w.onerror = (ev: ErrorEvent) => {
        ev.preventDefault();
        const err = new Error(`the worker stopped: ${ev.message || "unknown error"}`);
        reject(err);
        this.worker = null;
        this.ready = null;
        const c = this.current;
        this.current = null;
        c?.reject(err);
        if (c) this.changed();
      };
    });
    w.postMessage({ type: "init", module: this.module } satisfies JobRequest);
    return this.ready;
  }

  private reply(m: WorkerReply): void {
    if (m.type === "progress") {
      if (this.current?.id === m.id) this.current.progress(m.fraction);
    } else if (m.type === "done") {
      this.finish(m.id, (c) => c.resolve(m.result));
    } else if (m.type === "failed") {
      this.finish(m.id, (c) => c.reject(new JobFailed(m.problems)));
    }
  }

  private finish(id: number, f: (c: Current) => void): void {
    const c = this.current;
    if (!c || c.id !== id) return;
    this.current = null;
    f(c);
    this.changed();
  }
}
