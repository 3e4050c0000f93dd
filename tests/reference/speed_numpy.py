"""The engine's evaluation and simulation written the way a careful user would write them in a
notebook with NumPy and SciPy: vectorised, no Python loop over frequencies, averaging times or
time samples. It is the speed yardstick of `tests/reference/speed.py` (`./dev speed`), and its
numbers are compared with the engine's there.

Evaluation of one design (`evaluate`):

* the line: the Bloch vector carried through the probe by matrix exponentials of the 4x4
  augmented generator of the optical Bloch equations (common practice; decay included),
  batched over detunings; the exponentials by scaling and squaring of a truncated Taylor
  series (SIAM Review 20, 801 (1978), "Nineteen dubious ways to compute the exponential of a
  matrix"), all matrices of a batch at once;
* the operating point: a vectorised scan of the line, the edge and the flank by scipy's
  bounded minimiser and brentq, the best slope-to-noise on a grid of the flank refined by
  scipy's bounded minimiser (the engine's documented rule: the flank is where P lies more
  than 5 % of the feature's height away from its top and bottom);
* the projection-noise term, sigma_1s = sqrt(xi^2 P'(1 - P') / N) / (nu0 |dP'/dnu|) sqrt(T_c)
  (Phys. Rev. A 47, 3554 (1993); squeezing Phys. Rev. A 50, 67 (1994));
* g(t) = 2 dP/dphi for a phase step at t, from the forward state r(t) and the backward
  costate lambda(t) of each step: a phase step phi rotates the state about z, so
  dP/dphi = lambda_u v - lambda_v u; both are evaluated at all sample times at once from
  one eigendecomposition of each step's generator (IEEE Trans. UFFC 45, 887 (1998) for the
  sensitivity function);
* the Dick sum sigma^2 tau = sum_{m>=1} |g_m|^2 / g_0^2 S_y(m / T_c) (IEEE Trans. UFFC 45,
  887 (1998)) with g_m from one real FFT of g sampled uniformly over the cycle
  (numpy.fft.rfft; g is continuous and periodic, so the rectangle rule converges as h^2),
  at 2^14 points over the cycle (more if the spectrum's cut-off needs it), summed to a
  quarter of the sample count in harmonics; the white part of the rest exactly by Parseval's theorem;
* the locked laser (common practice, the engine's model): S_lock = |1 - H|^2 S_laser +
  |H|^2 h0_atoms with H = 1 / (1 + i 2 pi f T_s); each part's Allan variance
  2 int S(f) sin^4(pi f tau) / (pi f tau)^2 df (IEEE Trans. Instrum. Meas. IM-20, 105
  (1971)) and the modified one with sin^6 / (pi f tau)^4, by Gauss-Legendre quadrature in
  u = pi f tau on one node set shared by all averaging times (a 2-D array of averaging
  times by nodes): log-spaced panels below pi/4, quarter-period panels to 64 pi, then the
  kernel's mean (3/8, 5/16) on log-spaced panels to 64 pi 1e12 and a flat tail;
* the free laser from the IEEE Std 1139-2008 closed forms.

The simulation (`simulate`) is the engine's closed loop (core/src/simulate.rs, same model):
the laser noise of a block of cycles is made at once (white FM, a Wiener process, banks of
Ornstein-Uhlenbeck processes two per decade for flicker FM, slow ones advanced per block of
cycles, fast ones merged into white FM), since it does not depend on the servo; the loop over
cycles is a Python loop, sequential by nature, with the work inside vectorised over the
probe's intervals and over independent runs (`runs`; 1 is one long run). The normal and
binomial deviates come from numpy's default generator, so a run is equal to the engine's in
distribution, not draw by draw. Only frequency-noise power laws (alpha -2..0) and a drift are
simulated here (the single-ion Ramsey design needs no more).
"""

import math
import sys
from pathlib import Path

import numpy as np
from numpy.polynomial.legendre import leggauss
from scipy.optimize import brentq, minimize_scalar
from scipy.signal import lfilter

sys.path.insert(0, str(Path(__file__).resolve().parent))

from bloch import generator  # noqa: E402  (vectorised generator of the Bloch equations)
from model import Design, allan_closed_form  # noqa: E402

PI = math.pi
R0 = np.array([0.0, 0.0, -1.0, 1.0])
FLANK_MARGIN = 0.05  # the engine's documented flank (core/src/projection.rs)


# ---------------------------------------------------------------------------------------
# Propagators


def expm_batched(M, terms=18):
    """exp(M) of a stack of small matrices (..., n, n): scaling and squaring with a Taylor
    series (SIAM Review 20, 801 (1978)). The scaled norm is at most 1/2, so 18 terms leave a
    truncation below 1e-20."""
    norm = float(np.abs(M).sum(axis=-1).max()) if M.size else 0.0
    s = max(0, int(math.ceil(math.log2(norm))) + 1) if norm > 0.5 else 0
    X = M / 2.0**s
    E = np.broadcast_to(np.eye(M.shape[-1]), M.shape).copy()
    term = E.copy()
    for k in range(1, terms + 1):
        term = term @ X / k
        E += term
    for _ in range(s):
        E = E @ E
    return E


def step_generators(d, nu):
    """Generators of every probe step at laser detunings nu (Hz, array): list of (n, 4, 4)."""
    nu = np.asarray(nu, dtype=float)
    return [generator(s.omega, s.phase, 2 * PI * nu * d.det_factor + s.offset, d.gamma) for s in d.steps]


def excitation(d, nu):
    """P_e at the end of the probe, vectorised over detunings nu (Hz)."""
    nu = np.atleast_1d(np.asarray(nu, dtype=float))
    r = np.broadcast_to(R0, nu.shape + (4,)).copy()
    for s, A in zip(d.steps, step_generators(d, nu)):
        U = expm_batched(A * s.duration)
        r = np.einsum("nij,nj->ni", U, r)
    return (r[:, 2] + 1.0) / 2.0


# ---------------------------------------------------------------------------------------
# Operating point and projection noise


def operating_point(d):
    w = 1.0 / (d.probe * d.det_factor)
    h = 1e-5 * w  # central-difference step of the slope, as the engine's
    nu = np.linspace(0.0, 4.0 * w, 401)
    P = excitation(d, nu)
    p0 = P[0]
    dP = np.diff(P)
    first = np.sign(dP[np.nonzero(dP)[0][0]])
    k = int(np.argmax(np.sign(dP) == -first))
    if k == 0:
        raise ValueError("no turning point of the line within 4 width scales")
    sgn = -1.0 if first > 0 else 1.0
    r = minimize_scalar(lambda x: sgn * excitation(d, x)[0], bounds=(nu[max(k - 1, 0)], nu[k + 1]), method="bounded", options={"xatol": 1e-12 * w})
    edge = r.x
    p_edge = excitation(d, edge)[0]
    height = p0 - p_edge

    def cross(frac):
        lvl = p_edge + frac * height
        return brentq(lambda x: excitation(d, x)[0] - lvl, 0.0, edge, xtol=1e-13 * w)

    half = cross(0.5)
    if d.rule == "half_maximum":
        nu_op = half
    else:
        lo, hi = cross(1 - FLANK_MARGIN), cross(FLANK_MARGIN)
        grid = np.linspace(lo, hi, 201)

        def merit(x):
            x = np.atleast_1d(x)
            n = len(x)
            p = excitation(d, np.concatenate([x - h, x, x + h]))
            pm = d.measured(p[n : 2 * n])
            slope = d.contrast * (p[2 * n :] - p[:n]) / (2 * h)
            return np.abs(slope) / np.sqrt(pm * (1 - pm))

        m = merit(grid)
        j = int(np.argmax(m))
        a, b = grid[max(j - 1, 0)], grid[min(j + 1, len(grid) - 1)]
        rr = minimize_scalar(lambda x: -merit(x)[0], bounds=(a, b), method="bounded", options={"xatol": 1e-9 * w})
        nu_op = rr.x if -rr.fun >= m[j] else grid[j]
    p = excitation(d, np.array([nu_op - h, nu_op, nu_op + h]))
    return {"detuning_hz": nu_op, "excitation": p[1], "slope_true": (p[2] - p[0]) / (2 * h), "edge_hz": edge, "half_hz": half}


def projection_sigma_1s(d, op):
    pm = d.measured(op["excitation"])
    slope = d.contrast * op["slope_true"]
    return math.sqrt(d.xi2 * pm * (1 - pm) / d.n_eff) / (d.nu0 * abs(slope)) * math.sqrt(d.cycle)


# ---------------------------------------------------------------------------------------
# Sensitivity function and the Dick sum


def g_raw(d, nu, t):
    """g(t) (unnormalised) at times t within the cycle, all at once: state and costate of
    each step from one eigendecomposition, dP/dphi = lambda_u v - lambda_v u."""
    t = np.asarray(t, dtype=float)
    out = np.zeros_like(t)
    gens = [A[0] for A in step_generators(d, np.array([nu]))]
    eigs = []
    starts = []
    r = R0.astype(complex)
    for s, A in zip(d.steps, gens):
        lam, V = np.linalg.eig(A)
        Vi = np.linalg.inv(V)
        eigs.append((lam, V, Vi))
        starts.append(r.real.copy())
        r = V @ (np.exp(lam * s.duration) * (Vi @ r))
    # Costate at the end of each step, backwards from P = (w + 1) / 2.
    ends = [None] * len(d.steps)
    c = np.array([0.0, 0.0, 0.5, 0.5], dtype=complex)
    for k in range(len(d.steps) - 1, -1, -1):
        ends[k] = c.real.copy()
        lam, V, Vi = eigs[k]
        c = ((c @ V) * np.exp(lam * d.steps[k].duration)) @ Vi
    for k, s in enumerate(d.steps):
        t0 = d.step_t0[k]
        sel = (t >= t0) & (t < t0 + s.duration)
        if not sel.any():
            continue
        lam, V, Vi = eigs[k]
        sk = t[sel] - t0
        state = (np.exp(np.outer(sk, lam)) * (Vi @ starts[k])) @ V.T
        cost = ((ends[k] @ V) * np.exp(np.outer(s.duration - sk, lam))) @ Vi
        state, cost = state.real, cost.real
        out[sel] = 2.0 * (cost[:, 0] * state[:, 1] - cost[:, 1] * state[:, 0])
    return out


N_FFT = 1 << 14  # the fewest samples that hold the Dick sum to 1e-7 on the demo designs


def dick(d, nu):
    """Dick variance coefficient (sigma^2 tau), g0 and the weights |g_m|^2/g0^2, and the
    sign and maximum of g for normalising the plotted g(t)."""
    n = N_FFT
    while n // 4 < d.spectrum.f_high * d.cycle:  # harmonics past the cut-off of any phase noise
        n *= 2
    t = d.cycle * np.arange(n) / n
    g = g_raw(d, nu, t)
    G = np.fft.rfft(g) / n
    g0 = G[0].real
    M = n // 4
    c2 = np.abs(G[1 : M + 1]) ** 2
    m = np.arange(1, M + 1)
    direct = float(c2 @ d.spectrum(m / d.cycle))
    white = sum(h for a, h in d.spectrum.terms if a == 0)
    tail = max((float(g @ g) / n - g0 * g0) / 2.0 - c2.sum(), 0.0)
    coef = (direct + white * tail) / (g0 * g0)
    # max|g|: the sampled maximum refined on a fine grid between its neighbours.
    j = int(np.argmax(np.abs(g)))
    h = d.cycle / n
    gmax = max(float(np.abs(g[j])), float(np.abs(g_raw(d, nu, np.clip(t[j] + h * np.linspace(-1, 1, 201), 0.0, d.cycle * (1 - 1e-12)))).max()))
    return {"coef": coef, "g0_raw": g0, "weights": c2 / (g0 * g0), "gmax": gmax, "sign": 1.0 if g0 >= 0 else -1.0}


# ---------------------------------------------------------------------------------------
# Transfer-function integrals, all averaging times at once

U0 = 64 * PI


def _nodes():
    x, w = leggauss(8)

    def panels(edges):
        a, b = edges[:-1, None], edges[1:, None]
        return ((a + b) / 2 + (b - a) / 2 * x).ravel(), ((b - a) / 2 * w).ravel()

    small = panels(np.geomspace(1e-9, PI / 4, 8 * 16 + 1))
    osc = panels(PI / 4 * np.arange(1, 257, dtype=float))
    far = panels(U0 * np.geomspace(1.0, 1e12, 12 * 16 + 1))
    return small, osc, far


NODES = _nodes()
KERNELS = {"allan": (2, 3.0 / 8.0), "mod": (4, 5.0 / 16.0)}


def variance(S, tau, kind="allan"):
    """Allan ('allan') or modified Allan ('mod') variance at every tau (array) of the
    spectrum S (vectorised function of f, any shape)."""
    p, mean = KERNELS[kind]
    tau = np.asarray(tau, dtype=float)[:, None]
    scale = PI * tau
    (us, ws), (uo, wo), (uf, wf) = NODES
    u = np.concatenate([us, uo])
    wgt = np.concatenate([ws, wo])
    kern = np.sin(u) ** (p + 2) / u**p
    near = (S(u / scale) * kern) @ wgt
    far = (S(uf / scale) * (mean / uf**p)) @ wf
    u_end = U0 * 1e12
    tail = S(np.full_like(tau, u_end) / scale)[:, 0] * mean * u_end ** (1 - p) / (p - 1)
    return 2.0 / scale[:, 0] * (near + far + tail)


def log_grid(a, b, n):
    return np.exp(np.linspace(math.log(a), math.log(b), n))


# The engine's default evaluation options (core/src/result.rs).
TAU_POINTS = 61
TAU_MAX_S = 1e6
PLOT_POINTS = 161
CHECKPOINTS_S = np.array([1.0, 1000.0, 86400.0])


def evaluate(d):
    """The engine's numbers of one design (a model.Design), as a dict."""
    op = operating_point(d)
    nu = op["detuning_hz"]
    sig_qpn = projection_sigma_1s(d, op)
    dk = dick(d, nu)
    ts = d.attack
    spec = d.spectrum

    def hp(f):
        x2 = (2 * PI * f * ts) ** 2
        return x2 / (1 + x2)

    def lp(f):
        return 1.0 / (1 + (2 * PI * f * ts) ** 2)

    h0_qpn = 2 * sig_qpn**2
    h0_dick = 2 * dk["coef"]
    taus = np.concatenate([log_grid(d.cycle, TAU_MAX_S, TAU_POINTS), CHECKPOINTS_S])
    laser = variance(lambda f: spec(f) * hp(f), taus)
    white_lp = variance(lp, taus)
    proj = h0_qpn * white_lp
    dck = h0_dick * white_lp
    mod = variance(lambda f: spec(f) * hp(f) + (h0_qpn + h0_dick) * lp(f), taus, "mod")
    free = np.array([d.free_laser_var(t, drift=True) for t in taus[:TAU_POINTS]])
    total = laser + proj + dck
    n = TAU_POINTS
    t_plot = d.cycle * np.arange(PLOT_POINTS) / (PLOT_POINTS - 1)
    g_plot = dk["sign"] * g_raw(d, nu, np.minimum(t_plot, d.cycle * (1 - 1e-12))) / dk["gmax"]
    edge = op["edge_hz"]
    line_nu = np.linspace(-3 * edge, 3 * edge, PLOT_POINTS)
    line = excitation(d, line_nu)
    return {
        "operating_point": {"detuning_hz": nu, "excitation": op["excitation"], "slope_per_hz": d.contrast * op["slope_true"]},
        "projection": {"sigma_1s": sig_qpn},
        "dick": {"sigma_1s": math.sqrt(dk["coef"]), "weights": dk["weights"], "g0": dk["g0_raw"] * dk["sign"] / dk["gmax"]},
        "curve": {
            "tau_s": taus[:n],
            "total": np.sqrt(total[:n]),
            "laser": np.sqrt(laser[:n]),
            "projection": np.sqrt(proj[:n]),
            "dick": np.sqrt(dck[:n]),
            "mod_total": np.sqrt(mod[:n]),
            "free_laser": np.sqrt(free),
        },
        "checkpoints": [
            {"tau_s": float(taus[n + i]), "total": math.sqrt(total[n + i]), "laser": math.sqrt(laser[n + i]), "projection": math.sqrt(proj[n + i]), "dick": math.sqrt(dck[n + i])}
            for i in range(len(CHECKPOINTS_S))
        ],
        "sensitivity": {"t_s": t_plot, "g": g_plot},
        "line_shape": {"detuning_hz": line_nu, "excitation": line},
    }


# ---------------------------------------------------------------------------------------
# The closed loop, cycle by cycle

POLES_PER_DECADE = 2.0  # the engine's flicker bank (core/src/simulate.rs)
SLOW_RATIO = 64.0


def ou_coeffs(var, tau, L):
    """Exact step over L of an Ornstein-Uhlenbeck process (variance var, correlation time
    tau): x' = a x + s1 g1 and its integral J = m x + k (x' - a x) + sj g2 (the joint
    Gaussian law of end value and integral; common practice)."""
    x = L / tau
    a = math.exp(-x)
    oma = -math.expm1(-x)
    if x < 0.02:
        f = x**3 * (1 / 6 - x * x / 60 + 17 * x**4 / 10080)
    else:
        f = 2 * x - 3 + 4 * a - a * a - oma**3 / (1 + a)
    sd = math.sqrt(var)
    return a, sd * math.sqrt(-math.expm1(-2 * x)), tau * oma, tau * oma / (1 + a), sd * tau * math.sqrt(max(f, 0.0))


class Laser:
    """The free laser's integrals of y over each interval of each cycle, made a block of
    cycles at a time for `runs` independent runs (shape (runs, cycles, intervals))."""

    def __init__(self, d, layout, run_s, runs, rng):
        self.layout = np.asarray(layout, dtype=float)
        self.tc = float(self.layout.sum())
        self.runs = runs
        self.rng = rng
        self.drift = d.drift
        self.t0 = 0.0
        h = {a: 0.0 for a in (-2, -1, 0)}
        for a, v in d.spectrum.terms:
            if a not in h or d.spectrum.table is not None:
                raise NotImplementedError("the reference simulation covers frequency-noise power laws (alpha -2..0) only")
            h[a] += v
        h0 = h[0]
        delta = math.log(10.0) / POLES_PER_DECADE
        f_lo = 0.1 / max(run_s, self.tc)
        f_top = 10.0 / (2 * PI * self.layout.min())
        poles = []
        if h[-1] > 0:
            f = f_lo
            while len(poles) < 96 and f <= f_top * 1e3:
                poles.append(f)
                f *= math.exp(delta)
            h0 += 2 * h[-1] * delta / (PI * poles[-1] * math.exp(delta)) / (1 - math.exp(-delta))
        var = h[-1] * delta
        self.fast, self.slow = [], []
        for f in poles:
            if f > f_top:
                h0 += 2 * var / (PI * f)
                continue
            tau = 1 / (2 * PI * f)
            x0 = math.sqrt(var) * rng.standard_normal(runs)
            if tau < self.tc:
                self.fast.append({"x": x0, "c": np.array([ou_coeffs(var, tau, L) for L in self.layout])})
            else:
                n = 1
                while n * 2 * self.tc * SLOW_RATIO <= tau:
                    n *= 2
                self.slow.append({"x": x0, "c": ou_coeffs(var, tau, n * self.tc), "n": n, "left": 0, "mean": np.zeros(runs)})
        self.white_sd = np.sqrt(h0 / 2 * self.layout)
        D = 2 * PI**2 * h[-2]
        self.wiener = (math.sqrt(D * self.tc), self.tc / 2, math.sqrt(D * self.tc**3 / 12)) if D > 0 else None
        self.w = np.zeros(runs)

    def block(self, n):
        R, L, tc, rng = self.runs, self.layout, self.tc, self.rng
        out = self.white_sd * rng.standard_normal((R, n, len(L)))
        slow = np.zeros((R, n))
        if self.wiener is not None:
            s1, half, sj = self.wiener
            dw = s1 * rng.standard_normal((R, n))
            w_start = self.w[:, None] + np.cumsum(dw, axis=1) - dw
            slow += (w_start * tc + half * dw + sj * rng.standard_normal((R, n))) / tc
            self.w = w_start[:, -1] + dw[:, -1]
        for p in self.fast:
            g1 = rng.standard_normal((R, n, len(L)))
            g2 = rng.standard_normal((R, n, len(L)))
            J, p["x"] = ou_integrals(p["c"], p["x"], g1, g2)
            out += J
        for p in self.slow:
            a, s1, m, k, sj = p["c"]
            nb = p["n"]
            # Cycles still covered by the last block's mean, then whole new blocks.
            c = 0
            col = np.empty((R, n))
            while c < n:
                if p["left"] == 0:
                    d1 = s1 * rng.standard_normal(R)
                    j = m * p["x"] + k * d1 + sj * rng.standard_normal(R)
                    p["x"] = a * p["x"] + d1
                    p["mean"] = j / (nb * tc)
                    p["left"] = nb
                take = min(p["left"], n - c)
                col[:, c : c + take] = p["mean"][:, None]
                p["left"] -= take
                c += take
            slow += col
        out += slow[:, :, None] * L
        if self.drift != 0.0:
            t = self.t0 + tc * np.arange(n)[:, None] + np.concatenate([[0.0], np.cumsum(L)[:-1]])
            out += self.drift * (t * L + 0.5 * L * L)
        self.t0 += n * tc
        return out


def ou_integrals(coeffs, x0, g1, g2):
    """Integrals over every interval of n cycles of an Ornstein-Uhlenbeck process stepped
    exactly interval by interval (`coeffs`: one row (a, s1, m, k, sj) of `ou_coeffs` per
    interval of the cycle), for each run, from its value x0 (runs,) and the normal deviates
    g1, g2 (runs, n, intervals). Returns the integrals and the value at the end.
    Vectorised: the value at each cycle start is an AR(1) recursion with the product of the
    interval coefficients, run by scipy.signal.lfilter; `ou_integrals_loop` is its twin."""
    a, s1, m, k, sj = np.asarray(coeffs).T
    d = s1 * g1
    # Innovation over a whole cycle: sum_i d_i prod_{j>i} a_j.
    after = np.concatenate([np.cumprod(a[::-1])[::-1][1:], [1.0]])
    e = d @ after
    ac = float(np.prod(a))
    xi = _ar1(e, ac, x0)
    x_end = ac * xi[:, -1] + e[:, -1]
    out = np.empty_like(g1)
    for i in range(len(a)):
        out[:, :, i] = m[i] * xi + k[i] * d[:, :, i] + sj[i] * g2[:, :, i]
        xi = a[i] * xi + d[:, :, i]
    return out, x_end


def ou_integrals_loop(coeffs, x0, g1, g2):
    """The slow, obvious twin of `ou_integrals`: every interval stepped in turn."""
    R, n, L = g1.shape
    out = np.empty_like(g1)
    x_end = np.empty(R)
    for r in range(R):
        x = float(x0[r])
        for c in range(n):
            for i in range(L):
                a, s1, m, k, sj = coeffs[i]
                dd = s1 * g1[r, c, i]
                out[r, c, i] = m * x + k * dd + sj * g2[r, c, i]
                x = a * x + dd
        x_end[r] = x
    return out, x_end


def _ar1(e, a, x0):
    """x_c, c = 0..n-1, of x_(c+1) = a x_c + e_c for each run (rows), x_0 given: one
    scipy.signal.lfilter call along the cycles."""
    y, _ = lfilter([1.0], [1.0, -a], e[:, :-1], axis=1, zi=(a * x0)[:, None])
    return np.concatenate([x0[:, None], y], axis=1)


def simulate(d, cycles, runs=1, seed=1, substeps=4, settle=None, block=4096):
    """Locked and free fractional frequency per cycle, shape (runs, cycles) each."""
    rng = np.random.default_rng(seed)
    op = operating_point(d)
    nu_op, slope = op["detuning_hz"], d.contrast * op["slope_true"]
    steps = []
    for s in d.steps:
        n = substeps if s.kind == "pulse" else 1
        steps += [(s, s.duration / n)] * n
    lens = np.array([L for _, L in steps])
    probe = float(lens.sum())
    dead = max(d.cycle - probe, 1e-12 * d.cycle)
    layout = np.concatenate([lens, [dead]])
    if settle is None:
        settle = int(math.ceil(10 * d.attack / d.cycle))
    total = settle + cycles
    laser = Laser(d, layout, total * d.cycle, runs, rng)
    # The generator of each interval is A0 + delta * Bz (Bz: the detuning's part).
    A0 = np.stack([generator(s.omega, s.phase, np.array(s.offset), d.gamma) for s, _ in steps])
    Bz = np.zeros((4, 4))
    Bz[0, 1], Bz[1, 0] = 1.0, -1.0  # d/d(delta) of the generator (W_z = -delta)
    A0L = A0 * lens[:, None, None]
    BzL = Bz[None] * lens[:, None, None]
    gain = d.cycle / d.attack
    n_atoms = d.n_eff
    sq = math.sqrt(d.xi2)
    corr = np.zeros(runs)
    last = None
    side = 1.0
    y_lock = np.empty((runs, cycles))
    y_free = np.empty((runs, cycles))
    done = 0
    while done < total:
        n = min(block, total - done)
        J = laser.block(n)  # (runs, n, intervals)
        for c in range(n):
            j = J[:, c, :]
            err = d.nu0 * j[:, :-1] / lens + corr[:, None]  # Hz, (runs, intervals)
            delta = 2 * PI * (side * nu_op + err) * d.det_factor
            U = expm_batched(A0L[None] + delta[:, :, None, None] * BzL[None])
            r = np.broadcast_to(R0, (runs, 4))
            for i in range(len(steps)):
                r = np.einsum("rij,rj->ri", U[:, i], r)
            p = np.clip((r[:, 2] + 1) / 2, 0.0, 1.0)
            pm = np.clip(d.measured(p), 0.0, 1.0)
            m = rng.binomial(n_atoms, pm) / n_atoms
            if sq != 1.0:
                m = pm + (m - pm) * sq
            k = done + c - settle
            if k >= 0:
                free = j.sum(axis=1) / d.cycle
                y_free[:, k] = free
                y_lock[:, k] = free + corr / d.nu0
            if last is not None:
                corr = corr - gain * side * (m - last) / (2 * slope)
            last = m
            side = -side
        done += n
    return y_lock, y_free


def oadev(y, tau0, ms):
    """Overlapping Allan variance of frequency data y (runs, n) at factors ms, pooled over
    runs (Handbook of Frequency Stability Analysis, Special Publication 1065 (2008))."""
    x = np.concatenate([np.zeros((y.shape[0], 1)), np.cumsum(y, axis=1)], axis=1) * tau0
    out = []
    for m in ms:
        d2 = x[:, 2 * m :] - 2 * x[:, m:-m] + x[:, : -2 * m]
        out.append(float(np.mean(d2 * d2)) / (2.0 * (m * tau0) ** 2))
    return np.array(out)


def ramsey_probe(design_json):
    """The simulation bench's design from its JSON (built by the engine's timing example)."""
    import json
    import tempfile

    with tempfile.NamedTemporaryFile("w", suffix=".json", delete=False) as f:
        json.dump(design_json, f)
    try:
        return Design(f.name)
    finally:
        Path(f.name).unlink()


def free_closed_form(d, tau):
    return math.sqrt(sum(allan_closed_form(a, h, tau, d.spectrum.f_high) for a, h in d.spectrum.terms))
