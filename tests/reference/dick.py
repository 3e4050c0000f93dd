"""Sensitivity function on quadrature panels, its Fourier coefficients, the Dick sum.

g(t) is sampled by brute force (bloch.g_bruteforce) at Gauss-Legendre nodes of panels
that are short against every rate of the dynamics (at most 1 rad of the fastest rate), so
that on each panel it is represented to rounding by its Legendre interpolant. The Fourier
coefficients

    g_m = (1/T_c) int_0^T_c g(t) exp(-2 pi i m t / T_c) dt

are then integrated by Gauss-Legendre quadrature on sub-panels of at most one period of
the highest harmonic (16 nodes each), and the Dick variance

    sigma_y^2(tau) = (1/tau) sum_{m>=1} |g_m|^2 / g_0^2 S_y(m / T_c)

(IEEE Trans. UFFC 45, 887 (1998)) is summed to M harmonics, M at least the cut-off
harmonic f_h T_c of the phase-noise terms and of a table. Beyond M only the alpha <= 0
terms contribute: the white part exactly, from Parseval's theorem
sum_{m>=1} |g_m|^2 = ((1/T_c) int g^2 - g_0^2) / 2, the alpha < 0 parts between 0 and
h_a (M/T_c)^a times that same tail (they fall with m); the half-width of that interval is
the reference's own truncation uncertainty.
"""

import numpy as np
from numpy.polynomial import legendre as L

import bloch

PI = np.pi
NODES_G = 20  # brute-force samples per panel
NODES_Q = 16  # quadrature nodes per sub-panel
RAD_PER_PANEL = 1.0


class GFunction:
    """Brute-force g(t) on panels with its Legendre interpolants (unnormalised, raw sign)."""

    def __init__(self, design, nu):
        self.design = design
        self.nu = nu
        self.cycle = design.cycle
        rates = bloch.max_rate(design, nu)
        x, _ = L.leggauss(NODES_G)
        self.panels = []  # (a, b)
        for k, s in enumerate(design.steps):
            n = max(1, int(np.ceil(rates[k] * s.duration / RAD_PER_PANEL)))
            t0 = design.step_t0[k]
            edges = t0 + s.duration * np.arange(n + 1) / n
            self.panels.extend(zip(edges[:-1], edges[1:]))
        a = np.array([p[0] for p in self.panels])
        b = np.array([p[1] for p in self.panels])
        self.a, self.b = a, b
        t = (a[:, None] + b[:, None]) / 2 + (b[:, None] - a[:, None]) / 2 * x[None, :]
        self.samples_t = t
        vals = bloch.g_bruteforce(design, nu, t.ravel()).reshape(t.shape)
        self.samples_g = vals
        # Interpolating Legendre series on each panel (degree NODES_G - 1 through the nodes).
        V = L.legvander(x, NODES_G - 1)
        self.coef = np.linalg.solve(V, vals.T).T  # (panels, NODES_G)

    def __call__(self, t):
        t = np.atleast_1d(np.asarray(t, dtype=float))
        out = np.zeros_like(t)
        for i in range(len(self.a)):
            a, b = self.a[i], self.b[i]
            sel = (t >= a) & (t <= b)
            if sel.any():
                x = (2 * t[sel] - a - b) / (b - a)
                out[sel] = L.legval(x, self.coef[i])
        return out

    def quadrature(self, m_max):
        """Nodes, weights and g values resolving exp(-2 pi i m t / T_c) up to m_max."""
        x, w = L.leggauss(NODES_Q)
        ts, ws, gs = [], [], []
        for i in range(len(self.a)):
            a, b = self.a[i], self.b[i]
            n = max(1, int(np.ceil((b - a) * m_max / self.cycle)))
            e = a + (b - a) * np.arange(n + 1) / n
            lo, hi = e[:-1, None], e[1:, None]
            tq = ((lo + hi) / 2 + (hi - lo) / 2 * x[None, :]).ravel()
            wq = ((hi - lo) / 2 * w[None, :]).ravel()
            xq = (2 * tq - a - b) / (b - a)
            ts.append(tq)
            ws.append(wq)
            gs.append(L.legval(xq, self.coef[i]))
        return np.concatenate(ts), np.concatenate(ws), np.concatenate(gs)

    def max_abs(self):
        """Largest |g| over the cycle: dense evaluation of the interpolants, then refined."""
        from scipy.optimize import minimize_scalar

        best, where = 0.0, None
        for i in range(len(self.a)):
            tt = np.linspace(self.a[i], self.b[i], 401)
            v = np.abs(self(tt))
            j = int(np.argmax(v))
            if v[j] > best:
                best, where = v[j], (tt[max(j - 1, 0)], tt[min(j + 1, 400)])
        r = minimize_scalar(lambda s: -abs(self(s)[0]), bounds=where, method="bounded", options={"xatol": 1e-14 * self.cycle})
        return max(best, -r.fun)


def fourier(gf, m_max):
    """g_0 and g_1..g_m_max (complex), plus (1/T_c) int g^2."""
    tq, wq, gq = gf.quadrature(m_max)
    tc = gf.cycle
    wg = wq * gq / tc
    g0 = wg.sum()
    mean_g2 = (wq * gq * gq).sum() / tc
    w1 = 2 * PI / tc
    B = 128
    zpow = np.exp(-1j * w1 * np.outer(np.arange(B), tq))  # exp(-i w1 k t), k < B
    out = np.empty(m_max, dtype=complex)
    for m0 in range(1, m_max + 1, B):
        nb = min(B, m_max + 1 - m0)
        base = np.exp(-1j * w1 * m0 * tq)
        out[m0 - 1 : m0 - 1 + nb] = (zpow[:nb] * base[None, :]) @ wg
    return g0, out, mean_g2


class DickResult:
    pass


def dick(design, gf, m_min=1024):
    spec = design.spectrum
    tc = design.cycle
    M = m_min
    if spec.has_cutoff_part():
        M = max(M, int(np.ceil(spec.f_high * tc)) + 1)
    g0, gm, mean_g2 = fourier(gf, M)
    m = np.arange(1, M + 1)
    c2 = np.abs(gm) ** 2
    s = spec(m / tc)
    direct = float((c2 * s).sum())
    tail0 = max((mean_g2 - g0 * g0) / 2.0 - c2.sum(), 0.0)
    white = sum(h for a, h in spec.terms if a == 0)
    neg_hi = sum(h * (M / tc) ** a for a, h in spec.terms if a < 0) * tail0
    tail = white * tail0 + neg_hi / 2.0
    total = direct + tail
    r = DickResult()
    r.M = M
    r.g0 = g0
    r.weights = c2 / g0**2
    r.variance_coefficient = total / g0**2
    r.sigma_1s = np.sqrt(r.variance_coefficient)
    r.uncertainty_rel = (neg_hi / 2.0) / total if total > 0 else 0.0
    r.tail0_rel = tail0 / ((mean_g2 - g0 * g0) / 2.0)
    return r
