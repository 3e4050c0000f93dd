#!/usr/bin/env python3
"""Independent reference checks of the Clockwright engine.

Recomputes, by different and obvious methods (scipy.linalg.expm propagation, brute-force
phase steps for g(t), Gauss-Legendre Fourier quadrature with a Parseval tail, adaptive
QUADPACK transfer-function integrals, mpmath), the numbers the engine prints for every
design in core/designs/ (default options) and tests/reference/cases/ (with
cases/options.json), and compares them. One line per check with the measured difference,
the tolerance, why the tolerance is what it is and the source of the formula; the last
line is "N passed, M failed"; the exit code is 1 if any check failed.

Needs numpy, scipy and mpmath; builds the engine's `evaluate` example with cargo.
"""

import os

# One BLAS thread per worker process: the work is many small matrices, and two workers
# share two cores.
for _v in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_v, "1")

import subprocess  # noqa: E402
import sys  # noqa: E402
import time  # noqa: E402
import traceback  # noqa: E402
from concurrent.futures import ProcessPoolExecutor
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))

import engine  # noqa: E402
from report import Check  # noqa: E402

ROOT = HERE.parents[1]
OPTIONS = HERE / "cases" / "options.json"


def jobs():
    out = []
    for p in sorted(q for q in (ROOT / "core" / "designs").glob("*.json") if not q.name.startswith("pair-")):  # pair documents are checked by reach.py
        out.append((p.stem, str(p), None))
    for p in sorted((HERE / "cases").glob("*.json")):
        if p.name != OPTIONS.name:
            out.append(("cases/" + p.stem, str(p), str(OPTIONS)))
    return out


def run_design(args):
    label, path, opts, exe = args
    import design_checks

    t0 = time.time()
    try:
        checks, info = design_checks.check_design(label, path, opts, exe)
    except Exception:
        checks = [Check(label, "reference run completed", 1.0, 0.0, "-", "the reference raised:\n" + traceback.format_exc())]
        info = []
    return label, checks, info, time.time() - t0


def run_global(_):
    import mpcheck

    t0 = time.time()
    try:
        checks, info = mpcheck.checks()
    except Exception:
        checks = [Check("global", "mpmath checks completed", 1.0, 0.0, "-", "raised:\n" + traceback.format_exc())]
        info = []
    return "global", checks, info, time.time() - t0


def engine_revision():
    try:
        rev = subprocess.run(["git", "rev-parse", "--short", "HEAD"], cwd=ROOT, capture_output=True, text=True).stdout.strip()
        dirty = subprocess.run(["git", "status", "--porcelain", "--untracked-files=no", "--", "core"], cwd=ROOT, capture_output=True, text=True).stdout.strip()
        return rev + (" with uncommitted changes in core/" if dirty else " (core/ clean)")
    except OSError:
        return "unknown (git not available)"


def main():
    t0 = time.time()
    exe = engine.ensure_built()
    t_build = time.time() - t0
    print(f"engine: {exe} built from commit {engine_revision()} (cargo step {t_build:.1f} s)")
    work = [(label, path, opts, str(exe)) for label, path, opts in jobs()]
    workers = max(1, min(2, os.cpu_count() or 1))
    results = {}
    with ProcessPoolExecutor(max_workers=workers) as pool:
        futs = [pool.submit(run_global, None)] + [pool.submit(run_design, w) for w in work]
        for f in futs:
            label, checks, info, dt = f.result()
            results[label] = (checks, info, dt)
    n_pass = n_fail = 0
    for label in ["global"] + [w[0] for w in work]:
        checks, info, dt = results[label]
        print(f"--- {label} ({len(checks)} checks, {dt:.1f} s)")
        for line in info:
            print("info: " + line)
        for c in checks:
            print(c.line())
            if c.passed:
                n_pass += 1
            else:
                n_fail += 1
    failed = [c for label in results for c in results[label][0] if not c.passed]
    if failed:
        print("--- failed checks")
        for c in failed:
            print(c.line())
    print(f"checks took {time.time() - t0 - t_build:.1f} s after the cargo step")
    print(f"{n_pass} passed, {n_fail} failed")
    return 1 if n_fail else 0


if __name__ == "__main__":
    sys.exit(main())
