"""A design document read into plain numbers: timing, probe, detection, laser spectrum.

Written from the design schema and the physics, not from the engine's code:

* cycle time: every segment once, detection-labelled dead time once per detection round;
* probe: the segments from the first pulse to the last, a pulse of area A (units of pi)
  and duration T having Rabi frequency Omega = A pi / T;
* detection: majority vote over n rounds of a per-round misread e, ties (even n) by a
  fair coin, measured P' = E_g + (1 - E_g - E_e) P;
* laser: one-sided S_y(f) = sum h_a f^a plus an optional log-log interpolated table
  (IEEE Std 1139-2008 unit conversions: S_y = S_nu / nu0^2, S_phi = 2 * 10^(L/10),
  S_y = (f / nu0)^2 S_phi).
"""

import bisect
import json
import math
from math import comb

import numpy as np

LN2 = math.log(2.0)
PI = math.pi


def majority_error(e, n):
    """Misread probability after a majority vote of n rounds (ties by a fair coin)."""
    n = max(int(n), 1)
    total = 0.0
    for k in range(n + 1):
        p = comb(n, k) * e**k * (1.0 - e) ** (n - k)
        if 2 * k > n:
            total += p
        elif 2 * k == n:
            total += 0.5 * p
    return total


class Step:
    """One constant piece of the probe."""

    def __init__(self, kind, duration, omega=0.0, phase=0.0, offset=0.0):
        self.kind = kind  # "pulse" or "free"
        self.duration = float(duration)
        self.omega = float(omega)  # rad/s
        self.phase = float(phase)  # rad
        self.offset = float(offset)  # rad/s, added to the laser detuning during this step

    def __repr__(self):
        return f"Step({self.kind}, T={self.duration}, Omega={self.omega:.4g}, phi={self.phase:.4g}, off={self.offset:.4g})"


def to_s_y(unit, value, f, nu0):
    """A spectral density value at Fourier frequency f converted to S_y, 1/Hz."""
    if unit == "s_y":
        return value
    if unit == "s_nu":
        return value / nu0**2
    if unit == "l_dbc":
        return 2.0 * 10.0 ** (value / 10.0) * (f / nu0) ** 2
    raise ValueError(unit)


def noise_term_h(term, nu0):
    """(alpha, h_alpha) in S_y units of one laser noise term of the design."""
    kind = term["kind"]
    if kind == "white_frequency":
        s = term["sigma_y_1s"]
        return 0, 2.0 * s * s  # sigma^2 = h0 / (2 tau), IEEE Std 1139-2008
    if kind == "flicker_floor":
        s = term["sigma_y"]
        return -1, s * s / (2.0 * LN2)  # sigma^2 = 2 ln2 h_-1
    if kind == "random_walk":
        s = term["sigma_y_1s"]
        return -2, 3.0 * s * s / (2.0 * PI**2)  # sigma^2 = (2 pi^2 / 3) h_-2 tau
    if kind == "power_law":
        return term["alpha"], to_s_y(term["unit"], term["coefficient"], 1.0, nu0)
    if kind == "power_law_at":
        a, f = term["alpha"], term["at_hz"]
        return a, to_s_y(term["unit"], term["value"], f, nu0) / f**a
    raise ValueError(kind)


class Spectrum:
    """S_y(f) of the free laser, vectorised in f."""

    def __init__(self, laser, nu0):
        self.terms = [noise_term_h(t, nu0) for t in laser.get("noise", [])]
        self.f_high = float(laser.get("high_cutoff_hz", 1e3))
        tab = laser.get("table")
        self.table = None
        if tab is not None:
            pts = np.array(tab["points"], dtype=float)
            f = pts[:, 0]
            s = np.array([to_s_y(tab["unit"], v, fi, nu0) for fi, v in pts])
            self.table = (np.log(f), np.log(s))
            self._table_lists = (self.table[0].tolist(), self.table[1].tolist())

    def table_part(self, f):
        f = np.asarray(f, dtype=float)
        if self.table is None:
            return np.zeros_like(f)
        lf, ls = self.table
        x = np.log(np.maximum(f, 1e-300))
        # Linear in log-log between rows; the end rows' power law beyond them.
        y = np.interp(x, lf, ls)
        lo = x < lf[0]
        hi = x > lf[-1]
        y = np.where(lo, ls[0] + (x - lf[0]) * (ls[1] - ls[0]) / (lf[1] - lf[0]), y)
        y = np.where(hi, ls[-1] + (x - lf[-1]) * (ls[-1] - ls[-2]) / (lf[-1] - lf[-2]), y)
        return np.where(f <= self.f_high, np.exp(y), 0.0)

    def __call__(self, f):
        f = np.asarray(f, dtype=float)
        s = np.zeros_like(f)
        for a, h in self.terms:
            term = h * f**a
            if a >= 1:
                term = np.where(f <= self.f_high, term, 0.0)
            s = s + term
        return s + self.table_part(f)

    def scalar(self, f):
        """S_y at one frequency, with plain floats (fast inside adaptive quadrature)."""
        s = 0.0
        for a, h in self.terms:
            if a >= 1 and f > self.f_high:
                continue
            s += h * f**a
        if self.table is not None and f <= self.f_high:
            s += self.table_scalar(f)
        return s

    def table_scalar(self, f):
        """table_part for one frequency, with plain floats."""
        if self.table is None or f > self.f_high or f <= 0.0:
            return 0.0
        lf, ls = self._table_lists
        x = math.log(f)
        n = len(lf)
        if x <= lf[0]:
            i = 0
        elif x >= lf[-1]:
            i = n - 2
        else:
            i = bisect.bisect_right(lf, x) - 1
        t = (x - lf[i]) / (lf[i + 1] - lf[i])
        return math.exp(ls[i] + t * (ls[i + 1] - ls[i]))

    def has_cutoff_part(self):
        return self.table is not None or any(a >= 1 for a, _ in self.terms)

    def features(self):
        """Frequencies where S_y has kinks or steps."""
        out = [self.f_high]
        if self.table is not None:
            out.extend(np.exp(self.table[0]).tolist())
        return out


def allan_closed_form(alpha, h, tau, f_h):
    """IEEE Std 1139-2008 Allan variance of S_y = h f^alpha (alpha >= 1 with cut-off f_h)."""
    if alpha == 0:
        return h / (2.0 * tau)
    if alpha == -1:
        return 2.0 * LN2 * h
    if alpha == -2:
        return 2.0 * PI**2 / 3.0 * h * tau
    if alpha == 2:
        return 3.0 * f_h * h / (4.0 * PI**2 * tau**2)
    if alpha == 1:
        return (1.038 + 3.0 * math.log(2.0 * PI * f_h * tau)) * h / (4.0 * PI**2 * tau**2)
    raise ValueError(alpha)


class Design:
    def __init__(self, path):
        self.path = path
        with open(path) as fh:
            d = json.load(fh)
        self.raw = d
        self.name = d["name"]
        tr = d["transition"]
        self.nu0 = float(tr["frequency_hz"])
        self.lifetime = tr.get("lifetime_s")
        self.gamma = 0.0 if self.lifetime is None else 1.0 / self.lifetime
        atoms = d["atoms"]
        self.count = int(atoms["count"])
        ent = atoms.get("entanglement", {"kind": "none"})
        self.ghz = ent["kind"] == "ghz"
        self.xi2 = 10.0 ** (-ent["gain_db"] / 10.0) if ent["kind"] == "squeezed" else 1.0
        self.n_eff = 1 if self.ghz else self.count
        self.det_factor = float(self.count) if self.ghz else 1.0

        det = d["detection"]
        self.rounds = int(det.get("rounds", 1))
        self.e_g = majority_error(det.get("misread_ground", 0.0), self.rounds)
        self.e_e = majority_error(det.get("misread_excited", 0.0), self.rounds)

        segs = d["sequence"]["segments"]

        def length(s):
            if s["kind"] == "dead" and s["label"] == "detection":
                return s["duration_s"] * self.rounds
            return s["duration_s"]

        self.cycle = float(sum(length(s) for s in segs))
        pulses = [i for i, s in enumerate(segs) if s["kind"] == "pulse"]
        first, last = pulses[0], pulses[-1]
        self.t_start = float(sum(length(s) for s in segs[:first]))
        self.steps = []
        for s in segs[first : last + 1]:
            if s["kind"] == "pulse":
                T = s["duration_s"]
                self.steps.append(
                    Step(
                        "pulse",
                        T,
                        omega=s["area_pi"] * PI / T,
                        phase=math.radians(s.get("phase_deg", 0.0)),
                        offset=2.0 * PI * s.get("detuning_offset_hz", 0.0),
                    )
                )
            else:
                self.steps.append(Step("free", s["duration_s"]))
        self.probe = float(sum(s.duration for s in self.steps))
        # Start time of every step within the cycle, and the end of the probe.
        self.step_t0 = self.t_start + np.concatenate([[0.0], np.cumsum([s.duration for s in self.steps])[:-1]])
        self.t_end = self.t_start + self.probe

        self.laser = d["laser"]
        self.spectrum = Spectrum(self.laser, self.nu0)
        self.drift = float(self.laser.get("drift_per_s", 0.0))
        self.attack = float(d["lock"]["attack_time_s"])
        self.rule = d["lock"].get("operating_point", "best_slope_to_noise")

    def measured(self, p):
        return self.e_g + (1.0 - self.e_g - self.e_e) * p

    @property
    def contrast(self):
        return 1.0 - self.e_g - self.e_e

    def free_laser_var(self, tau, drift=True):
        """Free-running laser Allan variance from the IEEE Std 1139-2008 closed forms
        (power laws only) plus the drift term D^2 tau^2 / 2."""
        v = sum(allan_closed_form(a, h, tau, self.spectrum.f_high) for a, h in self.spectrum.terms)
        if drift:
            v += self.drift**2 * tau**2 / 2.0
        return v
