// The background worker: runs long computations (simulations, maps) off the page's thread in
// chunks, posting progress between them. It holds its own instance of the engine, made from
// the module the page compiled (nothing is fetched). Cancelling terminates the worker; the
// page starts a fresh one for the next job.

import init, * as cw from "../dist/pkg/clockwright_wasm.js";
import type { JobRequest, WorkerReply } from "./jobs";

interface Scope {
  postMessage(message: WorkerReply): void;
  onmessage: ((ev: MessageEvent) => void) | null;
}
const scope = self as unknown as Scope;

/** A job in steps: `advance` does at most `chunk` units of work and returns the fraction done. */
interface Runner {
  advance(chunk: number): number;
  finish(): unknown;
}

/** A job that is one engine call. */
function oneCall(f: () => unknown): Runner {
  let result: unknown;
  let done = false;
  return {
    advance() {
      if (!done) {
        result = f();
        done = true;
      }
      return 1;
    },
    finish: () => result,
  };
}

/** A cycle-by-cycle simulation (input: design, options), `chunk` cycles at a time. */
function simulation(input: Record<string, unknown>): Runner {
  const sim = new cw.Simulation(input.design as cw.Design, (input.options ?? null) as Partial<cw.SimOptions> | null);
  return {
    advance(chunk) {
      const p = sim.advance(chunk);
      return p.finished ? 1 : Math.min(p.fraction, 0.999);
    },
    finish: () => sim.finish(),
  };
}

/** A chunked engine run (MapRun, BandRun): fraction = done / total; freed when finished. */
function chunked(run: { advance(n: number): cw.Progress; result(): unknown; free(): void }): Runner {
  return {
    advance(chunk) {
      const p = run.advance(chunk);
      return p.finished ? 1 : p.done / Math.max(p.total, 1);
    },
    finish() {
      try {
        return run.result();
      } finally {
        run.free();
      }
    },
  };
}

/** The job kinds the worker knows. */
const kinds: Record<string, (input: Record<string, unknown>) => Runner> = {
  evaluate: (input) => oneCall(() => cw.evaluate(input.design as cw.Design, (input.options ?? {}) as cw.EvalOptions)),
  reach: (input) => oneCall(() => cw.reach(input.pair as cw.PairDocument, (input.options ?? {}) as Partial<cw.ReachOptions>)),
  simulate: (input) => simulation(input),
  measured: (input) => oneCall(() => cw.importMeasured(String(input.text ?? ""), (input.options ?? null) as Partial<cw.EstimateOptions> | null)),
  optimum: (input) => oneCall(() => cw.optimum(input.design as cw.Design, input.request as cw.OptimumRequest)),
  map: (input) => chunked(new cw.MapRun(input.designs as cw.Design[], input.request as cw.GridRequest)),
  bands: (input) => chunked(new cw.BandRun(input.design as cw.Design, input.request as cw.BandRequest)),
};

/** Problems from an engine error, or one describing any other error. */
function problemsOf(err: unknown): cw.Problem[] {
  if (err && typeof err === "object" && Array.isArray((err as { problems?: unknown }).problems)) {
    return (err as { problems: cw.Problem[] }).problems;
  }
  return [{ path: "(worker)", value: "", allowed: err instanceof Error ? err.message : String(err) }];
}

/** Least time between two progress messages, ms. */
const PROGRESS_EVERY_MS = 50;

function run(req: Extract<JobRequest, { type: "run" }>): void {
  const make = kinds[req.kind];
  if (!make) {
    scope.postMessage({ type: "failed", id: req.id, problems: [{ path: "(worker)", value: req.kind, allowed: `job kinds are ${Object.keys(kinds).join(", ")}` }] });
    return;
  }
  try {
    const runner = make(req.input);
    let last = performance.now();
    for (;;) {
      const fraction = runner.advance(req.chunk);
      if (fraction >= 1) break;
      const now = performance.now();
      if (now - last >= PROGRESS_EVERY_MS) {
        scope.postMessage({ type: "progress", id: req.id, fraction });
        last = now;
      }
    }
    scope.postMessage({ type: "done", id: req.id, result: runner.finish() });
  } catch (err) {
    scope.postMessage({ type: "failed", id: req.id, problems: problemsOf(err) });
  }
}

scope.onmessage = (ev: MessageEvent) => {
  const req = ev.data as JobRequest;
  if (req.type === "init") {
    init({ module_or_path: req.module }).then(
      () => scope.postMessage({ type: "ready" }),
      (err: unknown) => scope.postMessage({ type: "failed", id: 0, problems: problemsOf(err) }),
    );
  } else if (req.type === "run") {
    run(req);
  }
};
