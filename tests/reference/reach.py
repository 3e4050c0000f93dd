#!/usr/bin/env python3
"""Independent reference checks of the reach of a clock pair.

Recomputes, with its own code (mpmath for the constants' arithmetic, numpy.polyfit for the
weighted least-squares fit), the numbers that `core/examples/reach_cases.rs` prints: the
conversion from d_e to the amplitude of delta alpha/alpha at several masses and densities
(by the SI route and by the natural-units route through the Planck mass), the bound on the
drift of alpha for several campaigns of the demo pair, the chronometric-levelling curve and
its time to 1 cm, and the assembly of the dark-matter reach from the ratio's noise. One line
per check; the last line is "N passed, M failed"; the exit code is 1 if any check failed.

    python3 tests/reference/reach.py            # builds and runs the example with cargo
    python3 tests/reference/reach.py cases.json # reads the example's output from a file
"""

import json
import math
import subprocess
import sys
from pathlib import Path

import numpy as np
from mpmath import mp, mpf, pi as mpi, sqrt as msqrt

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))
ROOT = HERE.parents[1]

from report import Check, rel  # noqa: E402

mp.dps = 40

# CODATA 2018 (Rev. Mod. Phys. 93, 025010 (2021), "CODATA recommended values of the
# fundamental physical constants: 2018"), written out here because scipy.constants may carry
# a newer adjustment. c, h and e are exact in the SI.
C = mpf("299792458")
H = mpf("6.62607015e-34")
E = mpf("1.602176634e-19")
G = mpf("6.67430e-11")
HBAR = H / (2 * mpi)
# Conventional standard gravity, 3rd CGPM (1901).
G_STANDARD = mpf("9.80665")
YEAR = mpf("365.25") * 86400
SRC_DM = "Phys. Rev. D 91, 015015 (2015); CODATA 2018, Rev. Mod. Phys. 93, 025010 (2021)"


def amplitude_si(mass_ev, rho_gev_cm3):
    """delta alpha/alpha per unit d_e: sqrt(8 pi G rho_E / c^2) / omega, omega = m c^2 / hbar."""
    rho_e = mpf(rho_gev_cm3) * mpf(10) ** 9 * E * mpf(10) ** 6  # J/m^3
    omega = mpf(mass_ev) * E / HBAR
    return msqrt(8 * mpi * G * rho_e / C**2) / omega


def amplitude_natural(mass_ev, rho_gev_cm3):
    """The same in natural units: sqrt(4 pi) sqrt(2 rho) / (m M_Pl), GeV, M_Pl = sqrt(hbar c / G)."""
    hbar_c_gev_cm = HBAR * C / (E * mpf(10) ** 9) * 100  # GeV cm
    rho = mpf(rho_gev_cm3) * hbar_c_gev_cm**3  # GeV^4
    m_pl_gev = msqrt(HBAR * C / G) * C**2 / (E * mpf(10) ** 9)
    return msqrt(4 * mpi) * msqrt(2 * rho) / (mpf(mass_ev) * mpf(10) ** -9 * m_pl_gev)


def load():
    if len(sys.argv) > 1:
        return json.loads(Path(sys.argv[1]).read_text())
    r = subprocess.run(
        ["cargo", "run", "--release", "-q", "-p", "clockwright-core", "--example", "reach_cases"],
        cwd=ROOT,
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
    )
    if r.returncode != 0:
        raise RuntimeError("reach_cases failed:\n" + r.stderr)
    return json.loads(r.stdout)


def main():
    data = load()
    checks = []

    for c in data["conversion"]:
        where = f"m={c['mass_ev']:.3g} eV rho={c['rho_gev_per_cm3']}"
        si = amplitude_si(c["mass_ev"], c["rho_gev_per_cm3"])
        nat = amplitude_natural(c["mass_ev"], c["rho_gev_per_cm3"])
        got = c["alpha_amplitude_per_d_e"]
        checks.append(Check(where, "A_alpha/d_e, SI route", rel(got, si), 1e-13, SRC_DM, "double-precision rounding of a product of a few factors", got, float(si)))
        checks.append(Check(where, "A_alpha/d_e, natural units through the Planck mass (dimensional check)", rel(got, nat), 1e-13, SRC_DM, "same", got, float(nat)))
        f = mpf(c["mass_ev"]) * E / H
        checks.append(Check(where, "f = m c^2 / h", rel(c["frequency_hz"], f), 1e-14, "CODATA 2018", "rounding", c["frequency_hz"], float(f)))

    for i, k in enumerate(data["campaigns"]):
        where = f"campaign {i}"
        t = np.array(k["times_s"], dtype=float)
        per_session = math.sqrt(k["session_statistical"] ** 2 + k["systematic_per_session"] ** 2)
        if len(t) >= 2:
            # numpy.polyfit with weights 1/sigma and the unscaled covariance: the weighted
            # least-squares slope uncertainty for y = c + s t.
            y = np.zeros_like(t)
            _, cov = np.polyfit(t, y, 1, w=np.full_like(t, 1.0 / per_session), cov="unscaled")
            slope_year = math.sqrt(cov[0, 0]) * float(YEAR)
            checks.append(Check(where, "ratio drift per year (weighted least squares)", rel(k["ratio_drift_per_year"], slope_year), 1e-8, "weighted least squares, numpy.polyfit", "conditioning of the normal equations with times up to 3e7 s", k["ratio_drift_per_year"], slope_year))
            if k["delta_k"] is not None and abs(k["delta_k"]) > 0:
                bound = slope_year / abs(k["delta_k"])
                checks.append(Check(where, "(1/alpha) d alpha/dt bound per year = slope / |K_a - K_b|", rel(k["alpha_drift_per_year"], bound), 1e-8, "d ln(nu_a/nu_b)/dt = (K_a - K_b) (1/alpha) d alpha/dt", "as above", k["alpha_drift_per_year"], bound))
        live = len(t) * k["session_length_s"] * k["uptime"]
        checks.append(Check(where, "live time", rel(k["live_time_s"], live), 1e-14, "definition", "rounding", k["live_time_s"], live))

        # Levelling: c^2 sigma / g on the engine's curve, and the time to 1 cm by log-log
        # interpolation of that curve.
        lv = k["levelling"]
        sig = np.array(data["pair_curve"]["total"])
        hh = np.array([float(C**2 / G_STANDARD) * s for s in sig])
        worst = max(rel(a, b) for a, b in zip(lv["height_m"], hh))
        checks.append(Check(where, "levelling height c^2 sigma/g", worst, 1e-13, "c^2 sigma_y / g; CODATA 2018 c, standard gravity (3rd CGPM 1901)", "rounding", lv["height_m"][0], hh[0]))
        if lv["time_to_target_s"] is not None:
            tau = np.array(lv["tau_s"])
            j = int(np.where(hh > lv["target_m"])[0][-1])
            if j + 1 < len(tau):
                x = np.interp(math.log(lv["target_m"]), [math.log(hh[j + 1]), math.log(hh[j])], [math.log(tau[j + 1]), math.log(tau[j])])
                t1 = math.exp(x)
                checks.append(Check(where, "time to 1 cm (log-log interpolation of the curve)", rel(lv["time_to_target_s"], t1), 3e-3, "c^2 sigma_y / g", "linear interpolation in log-log between grid points a factor 1.26 apart", lv["time_to_target_s"], t1))

        # Dark-matter reach assembled from the ratio's noise density at f.
        dm = k["dark_matter"]
        span, live_t = k["span_s"], k["live_time_s"]
        z = 1.0 / math.sqrt(-math.log(k["stochastic_confidence"]))
        worst_de, worst_amp, worst_coh = 0.0, 0.0, 0.0
        for j, m in enumerate(dm["mass_ev"]):
            f = dm["frequency_hz"][j]
            tcoh = k["coherence_periods"] / f
            n = span / tcoh
            sa = math.sqrt(dm["ratio_psd_per_hz"][j] / live_t) * (n**0.25 if n > 1 else 1.0) * math.sqrt(1.0 + 12.0 / (2 * math.pi * f * span) ** 2)
            worst_amp = max(worst_amp, rel(dm["ratio_amplitude"][j], sa))
            worst_coh = max(worst_coh, rel(dm["coherence_time_s"][j], tcoh))
            a1 = float(amplitude_si(m, k["rho_gev_per_cm3"]))
            if dm["d_e"][j] is not None:
                de = (z if n < 1 else 1.0) * sa / (dm["k_effective"][j] * a1)
                worst_de = max(worst_de, rel(dm["d_e"][j], de))
        checks.append(Check(where, "ratio amplitude sensitivity sqrt(S/T_live) N^(1/4) L", worst_amp, 1e-12, SRC_DM + "; Nat. Commun. 12, 7321 (2021)", "rounding", dm["ratio_amplitude"][0], None))
        checks.append(Check(where, "coherence time 1e6 / f", worst_coh, 1e-14, "virial velocity spread ~1e-3 c (common practice)", "rounding"))
        checks.append(Check(where, "d_e reach = z sigma_A / (K_eff A_alpha)", worst_de, 1e-12, SRC_DM, "rounding"))
        if k["delta_k"] is not None:
            keff0 = dm["k_effective"][0]
            checks.append(Check(where, "K_eff at the lowest mass equals |K_a - K_b|", rel(keff0, abs(k["delta_k"])), 1e-9, "R(f) -> 1 for f T_c -> 0", "f T_c below 1e-9", keff0, abs(k["delta_k"])))

    for c in checks:
        print(c.line())
    failed = sum(1 for c in checks if not c.passed)
    print(f"{len(checks) - failed} passed, {failed} failed")
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main())
