#!/usr/bin/env python3
"""Speed side by side: the engine (native and wasm) against the vectorised NumPy/SciPy
reference (`speed_numpy.py`), in one run on the same inputs, with a check that the numbers
agree.

    python3 tests/reference/speed.py           # ./dev speed: figures, agreement, ratios
    python3 tests/reference/speed.py --quick   # agreement only (part of ./dev test)

Inputs: the four demo designs in core/designs/ (pair-* skipped), and for the simulation the
single-ion Ramsey design of the simulation bench (made by the engine's timing example from
core/designs/ion-single.json, so both sides read the very same JSON).

Timed: one full evaluation per design (native: core/examples/timing.rs; wasm: the ES module
package www/dist/pkg under Node, tests/reference/speed_wasm.mjs; NumPy: speed_numpy.evaluate),
medians over repetitions, one thread each (NumPy with one BLAS thread); the simulation's
cycles per second (native and wasm: one run of the engine's Simulation; NumPy: one run, a
Python loop over cycles with the work inside vectorised, and 16 independent runs vectorised
together). Speed targets are printed as met or not and never fail the run; a disagreement
of the numbers does (exit code 1).

Needs numpy and scipy; Node 20 and the built package for the wasm column (./dev speed builds
it; without it the wasm column is left out with a note).
"""

import os

# One BLAS thread: the engine runs on one thread too, and the machine has two cores.
for _v in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_v, "1")

import json  # noqa: E402
import math  # noqa: E402
import shutil  # noqa: E402
import subprocess  # noqa: E402
import sys  # noqa: E402
import tempfile  # noqa: E402
import time  # noqa: E402
from pathlib import Path  # noqa: E402

import numpy as np  # noqa: E402

HERE = Path(__file__).resolve().parent
ROOT = HERE.parents[1]
sys.path.insert(0, str(HERE))

import speed_numpy as ref  # noqa: E402
from model import Design  # noqa: E402

TARGET_NATIVE_EVAL = 50.0
TARGET_WASM_EVAL = 20.0
TARGET_NATIVE_SIM = 20.0
Z999 = 3.29  # two-sided 99.9 % point of the standard normal law (scipy.stats.norm.ppf(0.9995))

SRC_AVAR = "IEEE Trans. Instrum. Meas. IM-20, 105 (1971)"
SRC_G = "IEEE Trans. UFFC 45, 887 (1998)"
SRC_QPN = "Phys. Rev. A 47, 3554 (1993)"
SRC_IEEE = "IEEE Std 1139-2008"
SRC_SP1065 = "Handbook of Frequency Stability Analysis, Special Publication 1065 (2008)"

WHY_CURVE = "the engine's transfer-function quadrature aims at 1e-5 (tests/reference/README.md); the NumPy node set holds a few 1e-7 (self-check against QUADPACK)"

# (path in the evaluation, tolerance, kind, why, source)
EVAL_CHECKS = [
    ("checkpoints[].total", 1e-5, "rel", WHY_CURVE, SRC_AVAR),
    ("checkpoints[].laser", 1e-5, "rel", WHY_CURVE, SRC_AVAR),
    ("checkpoints[].projection", 1e-5, "rel", WHY_CURVE, SRC_AVAR),
    ("checkpoints[].dick", 1e-5, "rel", WHY_CURVE, SRC_AVAR),
    ("curve.total", 1e-5, "rel", WHY_CURVE, SRC_AVAR),
    ("curve.laser", 1e-5, "rel", WHY_CURVE, SRC_AVAR),
    ("curve.projection", 1e-5, "rel", WHY_CURVE, SRC_AVAR),
    ("curve.dick", 1e-5, "rel", WHY_CURVE, SRC_AVAR),
    ("curve.mod_total", 1e-5, "rel", WHY_CURVE, SRC_AVAR + "; modified kernel from memory"),
    ("curve.free_laser", 1e-12, "rel", "both use the closed forms; rounding only", SRC_IEEE),
    ("projection.sigma_1s", 1e-6, "rel", "the merit is stationary at the operating point, so its placement hardly matters; both slopes are central differences (truncation ~1e-9)", SRC_QPN),
    ("dick.sigma_1s", 1e-6, "rel", "the engine's stated Dick truncation tolerance (1e-6); the FFT sum holds ~1e-7", SRC_G),
    ("operating_point.detuning_hz", 1e-4, "rel", "the merit is quadratic at its maximum: both refine it to ~1e-9 of its value, which places the point to ~1e-4.5", SRC_QPN),
    ("sensitivity.g", 1e-6, "abs", "max|g| = 1; both exact to rounding, the NumPy maximum refined around the best of 2^14 samples", SRC_G),
    ("dick.weights", 1e-6, "absmax", "difference relative to the largest weight; the FFT's h^2 error", SRC_G),
]


def get(e, path):
    """Values at a dotted path; `a[].b` collects b over the list a."""
    head, _, rest = path.partition(".")
    if head.endswith("[]"):
        return np.array([get(x, rest) for x in e[head[:-2]]], dtype=float)
    v = e[head]
    return get(v, rest) if rest else np.asarray(v, dtype=float)


def diff(kind, a, b):
    a, b = np.atleast_1d(a), np.atleast_1d(b)
    n = min(len(a), len(b))
    a, b = a[:n], b[:n]
    if kind == "rel":
        return float(np.max(np.abs(a / b - 1.0)))
    if kind == "abs":
        return float(np.max(np.abs(a - b)))
    return float(np.max(np.abs(a - b)) / np.max(np.abs(b)))


class Tally:
    def __init__(self):
        self.passed = 0
        self.failed = []

    def check(self, where, name, measured, tol):
        ok = math.isfinite(measured) and measured <= tol
        self.passed += ok
        if not ok:
            self.failed.append(f"{where} {name}")
        print(f"{'PASS' if ok else 'FAIL'} [{where}] {name}: {measured:.2e} <= {tol:.3g}")


def legend(rows):
    """Prints what each check compares, its tolerance, why, and the formula's source."""
    for name, tol, kind, why, src in rows:
        print(f"  {name} ({kind} difference <= {tol:.3g}): {why}. Source: {src}")


def run(args, **kw):
    r = subprocess.run(args, cwd=ROOT, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, **kw)
    if r.returncode != 0:
        raise RuntimeError(f"{' '.join(map(str, args))} failed ({r.returncode}):\n{r.stderr}")
    return r.stdout


def timing_binary():
    target = Path(os.environ.get("CARGO_TARGET_DIR", ROOT / "target"))
    if not target.is_absolute():
        target = ROOT / target
    run(["cargo", "build", "--release", "-q", "-p", "clockwright-core", "--example", "timing"])
    return str(target / "release" / "examples" / "timing")


def wasm_available():
    return shutil.which("node") is not None and (ROOT / "www/dist/pkg/clockwright.js").exists()


def median_time(fn, reps, min_s=0.0):
    """Median wall time of fn() over `reps` calls after one warm-up call."""
    fn()
    ts = []
    t_all = time.perf_counter()
    while len(ts) < reps or time.perf_counter() - t_all < min_s:
        t = time.perf_counter()
        fn()
        ts.append(time.perf_counter() - t)
    return float(np.median(ts)), float(np.percentile(ts, 10)), float(np.percentile(ts, 90))


def load():
    return subprocess.run(["uptime"], stdout=subprocess.PIPE, text=True).stdout.strip()


def pool(points_by_run):
    """Allan variance pooled over equally long runs (mean of the variances) and the summed
    EDF, per averaging factor m."""
    out = {}
    for pts in points_by_run:
        for p in pts:
            v = out.setdefault(p["m"], [0.0, 0.0, 0])
            v[0] += p["deviation"] ** 2
            v[1] += p["edf"]
            v[2] += 1
    return {m: (v[0] / v[2], v[1]) for m, v in out.items() if v[2] == len(points_by_run)}


def self_checks(tally, designs):
    """The NumPy reference's own fast pieces against slow, obvious twins, on random cases."""
    from scipy.linalg import expm

    import allan
    import bloch

    rng = np.random.default_rng(11)
    print("Self-checks of the NumPy reference (fast piece against its slow twin):")
    A = np.stack([bloch.generator(rng.uniform(0, 300), rng.uniform(0, 2 * math.pi), np.array(rng.uniform(-300, 300)), rng.choice([0.0, rng.uniform(0, 5)])) * rng.uniform(1e-4, 0.3) for _ in range(24)])
    d_expm = float(np.max(np.abs(ref.expm_batched(A) - np.stack([expm(a) for a in A]))))
    tally.check("expm", "scaling-and-squaring Taylor vs scipy.linalg.expm, 24 random Bloch generators, max abs", d_expm, 1e-11)
    for path in designs:
        d = Design(path)
        nu = ref.operating_point(d)["detuning_hz"]
        t = d.t_start + d.probe * rng.uniform(0, 1, 12)
        fast, slow = ref.g_raw(d, nu, t), bloch.g_bruteforce(d, nu, t)
        tally.check("g(t)", f"{d.name}: state/costate vs brute-force phase steps, 12 random times, rel. to max", float(np.max(np.abs(fast - slow)) / np.max(np.abs(slow))), 1e-9)
    coeffs = np.array([ref.ou_coeffs(rng.uniform(0.1, 2), tau, L) for tau, L in zip(rng.uniform(0.01, 1, 6), rng.uniform(1e-3, 0.2, 6))])
    x0, g1, g2 = rng.standard_normal(3), rng.standard_normal((3, 50, 6)), rng.standard_normal((3, 50, 6))
    (fj, fx), (sj, sx) = ref.ou_integrals(coeffs, x0, g1, g2), ref.ou_integrals_loop(coeffs, x0, g1, g2)
    tally.check("laser noise", "Ornstein-Uhlenbeck integrals, cycle recursion by lfilter vs interval-by-interval loop, random case, max abs", float(max(np.max(np.abs(fj - sj)), np.max(np.abs(fx - sx)))), 1e-12)
    d = Design(designs[0])
    ts = d.attack
    hp = lambda f: (2 * math.pi * f * ts) ** 2 / (1 + (2 * math.pi * f * ts) ** 2)  # noqa: E731
    for kind, tau in (("allan", 1.0), ("allan", 1000.0), ("mod", 3.0)):
        fast = ref.variance(lambda f: d.spectrum(f) * hp(f), [tau], kind)[0]
        slow = allan.variance(lambda f: d.spectrum.scalar(f) * hp(f), tau, kind, d.spectrum.features() + [1 / (2 * math.pi * ts)])
        tally.check("transfer integral", f"{d.name}, {kind} at {tau:g} s: Gauss-Legendre node set vs QUADPACK", abs(fast / slow - 1), 1e-6)
    try:
        import allantools
    except ImportError:
        print("note: allantools missing: the overlapping ADEV is not checked against it")
        return
    y = rng.standard_normal((1, 5000)) + 0.01 * np.cumsum(rng.standard_normal((1, 5000)))
    ms = [1, 2, 4, 16, 64]
    fast = np.sqrt(ref.oadev(y, 0.5, ms))
    _, slow, _, _ = allantools.oadev(y[0], rate=2.0, data_type="freq", taus=np.array(ms) * 0.5)
    tally.check("overlapping ADEV", "cumulative-sum form vs allantools.oadev, 5000 random points", float(np.max(np.abs(fast / slow - 1))), 1e-10)


def fmt_t(s):
    return f"{s * 1e3:.1f} ms" if s >= 1e-3 else f"{s * 1e6:.0f} us"


def main():
    quick = "--quick" in sys.argv[1:]
    bad = [a for a in sys.argv[1:] if a != "--quick"]
    if bad:
        print(__doc__)
        print(f"unknown option: {bad[0]}")
        return 2
    tally = Tally()
    print(f"machine: {os.cpu_count()} cores; load at start: {load()}")
    exe = timing_binary()
    designs = sorted(p for p in (ROOT / "core/designs").glob("*.json") if not p.name.startswith("pair-"))
    files = [str(p) for p in designs]

    self_checks(tally, designs)

    # ---- evaluation ------------------------------------------------------------------
    print("Checks of the evaluation (engine against NumPy, same design files):")
    legend(EVAL_CHECKS)
    reps = 0 if quick else 41
    native = json.loads(run([exe, "eval", str(reps)] + files))
    # The quick mode leaves wasm out: tests/browser/native-agreement.test.mjs checks that it
    # gives the native numbers bit for bit.
    wasm = None
    if not quick:
        if wasm_available():
            wasm = json.loads(run(["node", str(HERE / "speed_wasm.mjs"), "eval", str(reps)] + files))
        else:
            print("note: node or www/dist/pkg missing (./dev page --no-serve builds it): no wasm column")
    rows = []
    for k, path in enumerate(designs):
        d = Design(path)
        mine = ref.evaluate(d)
        t_np = median_time(lambda: ref.evaluate(d), 5, min_s=2.0) if not quick else None
        name = native[k]["name"]
        for label, other in [("native", native[k]["evaluation"])] + ([("wasm", wasm[k]["evaluation"])] if wasm else []):
            for path_, tol, kind, why, src in EVAL_CHECKS:
                tally.check(f"{name}, {label} vs NumPy", path_, diff(kind, get(other, path_), get(mine, path_)), tol)
        rows.append((name, t_np, native[k]["median_s"], wasm[k]["median_s"] if wasm else None))

    # ---- simulation ------------------------------------------------------------------
    ramsey_json = json.loads(run([exe, "ramsey", str(ROOT / "core/designs/ion-single.json")]))
    with tempfile.TemporaryDirectory() as tmp:
        rpath = os.path.join(tmp, "ramsey.json")
        with open(rpath, "w") as f:
            json.dump(ramsey_json, f)
        d = Design(rpath)
        runs, cycles, substeps = (8, 2048, 4) if quick else (16, 8192, 4)
        seeds = ",".join(str(s) for s in range(1, runs + 1))
        nat = json.loads(run([exe, "sim", rpath, str(cycles), str(substeps), seeds]))
        t = time.perf_counter()
        y_lock, _ = ref.simulate(d, cycles, runs=runs, seed=2024, substeps=substeps)
        t_batch = time.perf_counter() - t
        settle = nat["runs"][0]["settle_cycles"]
        ms = [m for m in (1, 2, 4, 8, 16, 32) if m <= cycles // 8]
        pooled = pool([r["locked"] for r in nat["runs"]])
        print(f"Checks of the simulation ({nat['name']}; independent runs, different generators):")
        legend([("ADEV |z|", Z999, "z", "difference of the log deviations in units of its standard deviation, sqrt(1/(2 EDF) + 1/(2 EDF)) with the engine's EDF for both (same run lengths); 3.29 is the two-sided 99.9 % point of the normal law", SRC_SP1065)])
        mine = ref.oadev(y_lock, d.cycle, ms)
        for m, v in zip(ms, mine):
            v_nat, edf = pooled[m]
            # ln of a deviation estimate has variance ~ 1 / (2 EDF) (chi-square law); the two
            # sides are independent runs of the same length, so they share the EDF.
            sd = math.sqrt(1.0 / (2 * edf) + 1.0 / (2 * edf))
            z = abs(0.5 * math.log(v / v_nat)) / sd
            tally.check(f"simulated, {runs} runs of {cycles} cycles", f"ADEV at {m} cycles ({m * d.cycle:.3g} s): NumPy {math.sqrt(v):.4e}, native {math.sqrt(v_nat):.4e}, |z|", z, Z999)
        sim = None
        if not quick:
            big = json.loads(run([exe, "sim", rpath, "1000000", str(substeps), "1"]))["runs"][0]
            big1 = json.loads(run([exe, "sim", rpath, "1000000", "1", "1"]))["runs"][0]
            w = json.loads(run(["node", str(HERE / "speed_wasm.mjs"), "sim", rpath, "200000", str(substeps), "1"])) if wasm else None
            n1 = 4000
            t = time.perf_counter()
            ref.simulate(d, n1, runs=1, seed=7, substeps=substeps)
            t_one = time.perf_counter() - t
            t = time.perf_counter()
            ref.simulate(d, n1, runs=1, seed=8, substeps=1)
            t_one1 = time.perf_counter() - t
            sim = {
                "native": big["cycles_per_s"],
                "native1": big1["cycles_per_s"],
                "wasm": w["cycles_per_s"] if w else None,
                "numpy_one": (n1 + settle) / t_one,
                "numpy_one1": (n1 + settle) / t_one1,
                "numpy_batch": runs * (cycles + settle) / t_batch,
            }

    print(f"\n{tally.passed} passed, {len(tally.failed)} failed")
    if quick:
        return 1 if tally.failed else 0

    print(f"\nFull evaluation of each demo design (native and NumPy: one thread; medians). Load at end: {load()}")
    print(f"{'design':<34} {'NumPy':>10} {'native':>10} {'wasm':>10} {'NumPy/native':>13} {'NumPy/wasm':>11}")
    for name, t_np, t_nat, t_w in rows:
        rn = t_np[0] / t_nat
        rw = t_np[0] / t_w if t_w else float("nan")
        print(f"{name:<34} {fmt_t(t_np[0]):>10} {fmt_t(t_nat):>10} {fmt_t(t_w) if t_w else '-':>10} {rn:>12.0f}x {rw:>10.0f}x")
    worst_n = min(r[1][0] / r[2] for r in rows)
    print(f"target: native >= {TARGET_NATIVE_EVAL:.0f}x: {'met' if worst_n >= TARGET_NATIVE_EVAL else 'NOT met'} (worst {worst_n:.0f}x)")
    if wasm:
        worst_w = min(r[1][0] / r[3] for r in rows)
        print(f"target: wasm >= {TARGET_WASM_EVAL:.0f}x: {'met' if worst_w >= TARGET_WASM_EVAL else 'NOT met'} (worst {worst_w:.0f}x)")
    print(f"\nSimulation, {ramsey_json['name']}, {substeps} sub-steps per pulse unless stated (cycles per second, one thread)")
    print(f"  native, one run of 1e6 cycles:                       {sim['native']:.3g}")
    print(f"  native, one run of 1e6 cycles, 1 sub-step:            {sim['native1']:.3g}")
    if sim["wasm"]:
        print(f"  wasm under Node, one run of 2e5 cycles:               {sim['wasm']:.3g}")
    print(f"  NumPy, one run (loop over cycles, vectorised inside): {sim['numpy_one']:.3g}   native/NumPy {sim['native'] / sim['numpy_one']:.0f}x")
    print(f"  NumPy, one run, 1 sub-step:                           {sim['numpy_one1']:.3g}   native/NumPy {sim['native1'] / sim['numpy_one1']:.0f}x")
    print(f"  NumPy, {runs} runs vectorised together (run-cycles/s):  {sim['numpy_batch']:.3g}   native/NumPy {sim['native'] / sim['numpy_batch']:.0f}x")
    ratio = sim["native"] / sim["numpy_one"]
    print(f"target: native >= {TARGET_NATIVE_SIM:.0f}x the NumPy run: {'met' if ratio >= TARGET_NATIVE_SIM else 'NOT met'} ({ratio:.0f}x; against {runs} runs vectorised together {sim['native'] / sim['numpy_batch']:.0f}x)")
    return 1 if tally.failed else 0


if __name__ == "__main__":
    sys.exit(main())
