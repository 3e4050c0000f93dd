"""Independent check of core/src/estimate.rs: the engine's overlapping Allan, modified Allan
and overlapping Hadamard deviations against allantools (oadev, mdev, ohdev with
taus='octave'), and its chi-square quantiles against scipy.stats.chi2.ppf.

    python3 tests/reference/estimators.py           # the checks; last line "N passed, M failed"
    python3 tests/reference/estimators.py --bench   # times ADEV of 1e7 points, octave taus

Data are generated with a seeded numpy generator, written to a temporary one-column file
and run through the engine's example `adev` (core/examples/adev.rs), which prints JSON.
The chi-square quantiles come from the same example with an options file that asks for
explicit confidence levels: for each point, EDF / (ci / deviation)^2 recovers the quantile.
Tolerances: deviations 1e-10 relative (both sides compute the same sums in double
precision; the engine's are compensated, allantools' plain, so the difference is rounding);
quantiles 1e-9 relative (both are accurate to ~1e-13; the recovery through sqrt and
squares adds a few ulps, and the printed JSON round-trips exactly).
Needs numpy, scipy and allantools (pip install allantools); installs nothing.
"""

import json
import os
import subprocess
import sys
import tempfile
import time

import numpy as np

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
EXAMPLE = os.path.join(os.environ.get("CARGO_TARGET_DIR", os.path.join(ROOT, "target")), "release", "examples", "adev")


def build():
    subprocess.run(["cargo", "build", "-q", "--release", "-p", "clockwright-core", "--example", "adev"], cwd=ROOT, check=True)


def run_engine(y, tau0, options=None, only_allan=False):
    with tempfile.TemporaryDirectory() as d:
        path = os.path.join(d, "y.txt")
        np.savetxt(path, y, fmt="%.17g")
        args = [EXAMPLE, path, repr(float(tau0))]
        if options is not None:
            opath = os.path.join(d, "options.json")
            with open(opath, "w") as f:
                json.dump(options, f)
            args.append(opath)
        if only_allan:
            args.append("--only-allan")
        out = subprocess.run(args, capture_output=True, text=True)
        if out.returncode != 0:
            raise RuntimeError(out.stderr.strip())
        return json.loads(out.stdout)


class Tally:
    def __init__(self):
        self.passed = 0
        self.failed = 0

    def check(self, name, measured, tol, source):
        ok = np.isfinite(measured) and measured <= tol
        if ok:
            self.passed += 1
        else:
            self.failed += 1
        print(f"{'PASS' if ok else 'FAIL'} {name}: rel diff {measured:.2e} <= tol {tol:.0e} | source: {source}")


def data_sets():
    """Seeded data: white FM, random-walk FM with an offset, flicker-like (summed octave
    random walks), white PM as frequency, and a mix; lengths not powers of two."""
    rng = np.random.default_rng(20240601)
    n = 50_001
    white = rng.standard_normal(n) * 1e-12
    walk = 3e-9 + np.cumsum(rng.standard_normal(n)) * 1e-14
    flick = sum(np.repeat(rng.standard_normal(n // 2**k + 1), 2**k)[:n] for k in range(12)) * 1e-13
    x = rng.standard_normal(n + 1) * 1e-9
    wpm = np.diff(x) / 0.25
    mix = white + walk + flick + wpm * 1e-3
    return [("white FM", white, 1.0), ("random-walk FM", walk, 0.5), ("flicker-like FM", flick, 2.0), ("white PM", wpm, 0.25), ("mixture", mix, 1.0)]


def check_deviations(t):
    import allantools

    for name, y, tau0 in data_sets():
        res = run_engine(y, tau0)
        for key, fn, label in [("allan", allantools.oadev, "oadev"), ("modified_allan", allantools.mdev, "mdev"), ("hadamard", allantools.ohdev, "ohdev")]:
            taus, devs, _errs, ns = fn(y, rate=1.0 / tau0, data_type="freq", taus="octave")
            ours = {p["m"]: p for p in res[key]["points"]}
            worst, missing, term_mismatch = 0.0, 0, 0
            for tau, dev, nterms in zip(taus, devs, ns):
                m = int(round(tau / tau0))
                p = ours.get(m)
                if p is None:
                    missing += 1
                    continue
                worst = max(worst, abs(p["deviation"] - dev) / dev)
                term_mismatch += int(p["terms"] != nterms)
            measured = worst if missing == 0 and term_mismatch == 0 else float("inf")
            t.check(f"{name} {key} vs allantools.{label} ({len(taus)} octave taus, terms equal: {term_mismatch == 0})", measured, 1e-10,
                    "Special Publication 1065 (2008) 5.2.4/5.2.5/5.2.9 via allantools")


def check_chi2(t):
    from scipy.stats import chi2

    rng = np.random.default_rng(7)
    y = rng.standard_normal(4001)
    worst = {}
    for conf in [0.5, 0.683, 0.9, 0.95, 0.99, 0.999999]:
        res = run_engine(y, 1.0, {"taus": "all", "confidence": conf, "alpha": 0}, only_allan=True)
        for p in res["allan"]["points"]:
            edf, s = p["edf"], p["deviation"]
            if s == 0.0:
                continue
            q_hi = edf / (p["ci_low"] / s) ** 2
            q_lo = edf / (p["ci_high"] / s) ** 2
            for q, prob in [(q_hi, (1 + conf) / 2), (q_lo, (1 - conf) / 2)]:
                ref = chi2.ppf(prob, edf)
                key = "dof < 10" if edf < 10 else ("dof < 1000" if edf < 1000 else "dof >= 1000")
                worst[key] = max(worst.get(key, 0.0), abs(q - ref) / ref)
    for key, w in sorted(worst.items()):
        t.check(f"chi-square quantiles, {key} (6 confidence levels, 2000 taus)", w, 1e-9, "scipy.stats.chi2.ppf")


def bench():
    import allantools

    n = 10_000_000
    y = np.random.default_rng(1).standard_normal(n)
    t0 = time.perf_counter()
    taus, devs, _, _ = allantools.oadev(y, rate=1.0, data_type="freq", taus="octave")
    t_ref = time.perf_counter() - t0
    res = run_engine(y, 1.0, only_allan=True)
    t_ours = res["seconds"]["allan"]
    ours = {p["m"]: p["deviation"] for p in res["allan"]["points"]}
    worst = max(abs(ours[int(round(tau))] - d) / d for tau, d in zip(taus, devs))
    print(f"ADEV of {n} points at {len(taus)} octave taus: allantools {t_ref:.3f} s, engine {t_ours:.3f} s "
          f"(computation only, with EDF, intervals and noise identification); ratio {t_ref / t_ours:.1f}; max rel diff {worst:.1e}")


def main():
    build()
    if "--bench" in sys.argv[1:]:
        bench()
        return 0
    t = Tally()
    try:
        check_deviations(t)
    except ImportError as e:
        t.check(f"allantools import ({e})", float("inf"), 0, "pip install allantools")
    check_chi2(t)
    print(f"{t.passed} passed, {t.failed} failed")
    return 1 if t.failed else 0


if __name__ == "__main__":
    sys.exit(main())
