"""Allan and modified Allan variance of a spectrum by adaptive quadrature (scipy.integrate.quad).

    sigma_y^2(tau)     = 2 int_0^inf S_y(f) sin^4(pi f tau) / (pi f tau)^2 df
                         (IEEE Trans. Instrum. Meas. IM-20, 105 (1971))
    mod sigma_y^2(tau) = 2 int_0^inf S_y(f) sin^6(pi f tau) / (pi f tau)^4 df
                         (continuous-averaging limit of the modified Allan variance;
                          from memory)

With u = pi f tau: I = (2 / (pi tau)) int_0^inf S(u / (pi tau)) sin^(p+2)(u) / u^p du.
On [0, 64 pi] the integrand is integrated as it stands (QAGP, break points at every
multiple of pi and at the spectrum's features). Beyond, the kernel is expanded exactly,
sin^4 = 3/8 - cos(2u)/2 + cos(4u)/8 and
sin^6 = (10 - 15 cos 2u + 6 cos 4u - cos 6u) / 32, so that the remaining integral is a
smooth, non-oscillating part (QAGS in log u) plus Fourier integrals
int F(u) cos(k u) du (QUADPACK QAWO on finite intervals, QAWF to infinity).
"""

import math
import warnings

import numpy as np
from scipy import integrate

PI = math.pi
KERNELS = {
    "allan": (2, [(0, 3 / 8), (2, -1 / 2), (4, 1 / 8)]),
    "mod": (4, [(0, 10 / 32), (2, -15 / 32), (4, 6 / 32), (6, -1 / 32)]),
}
U0 = 64 * PI
GEOM = 16.0  # longest ratio b/a of one interval of the smooth range


def _quad(f, a, b, **kw):
    with warnings.catch_warnings():
        warnings.simplefilter("error", integrate.IntegrationWarning)
        try:
            return integrate.quad(f, a, b, **kw)[0]
        except integrate.IntegrationWarning:
            # Retry with a finer budget before accepting a warning as a failure.
            kw["limit"] = kw.get("limit", 50) * 8
            warnings.simplefilter("ignore", integrate.IntegrationWarning)
            val, err = integrate.quad(f, a, b, **kw)[:2]
            return val


def variance(S, tau, kind="allan", features=(), rel=1e-11):
    """Allan ('allan') or modified Allan ('mod') variance of S_y (S: float f in Hz -> 1/Hz)."""
    p, coefs = KERNELS[kind]
    scale = PI * tau
    feats = sorted({float(f) * scale for f in features if np.isfinite(f) and f > 0})
    # Normalise the spectrum so that absolute tolerances are meaningful.
    s_ref = max(S(f) for f in np.logspace(-3, 3, 25) / tau)
    if s_ref <= 0:
        return 0.0

    def Sn(u):
        return S(u / scale) / s_ref

    def kern(u):
        if u < 1e-3:
            return u * u  # sin^(p+2) u / u^p ~ u^2
        return math.sin(u) ** (p + 2) / u**p

    # [0, U0]
    pts = sorted(set([k * PI for k in range(1, 64)] + [u for u in feats if u < U0]))
    part1 = _quad(lambda u: Sn(u) * kern(u), 0.0, U0, points=pts, limit=4000, epsabs=0.0, epsrel=rel)
    eps_abs = rel * max(part1, 1e-300) * 1e-2

    def F(u):
        return Sn(u) / u**p

    # [U0, inf): intervals split at features and geometrically.
    edges = [U0]
    for u in feats:
        if u > U0:
            edges.append(u)
    cuts = []
    for a, b in zip(edges[:-1], edges[1:]):
        cuts.append(a)
        x = a * GEOM
        while x < b:
            cuts.append(x)
            x *= GEOM
    cuts.append(edges[-1])
    # After the last feature: a few geometric steps, then to infinity.
    x = edges[-1]
    for _ in range(2):
        x *= GEOM
        cuts.append(x)
    part2 = 0.0
    for a, b in zip(cuts[:-1], cuts[1:]):
        for k, c in coefs:
            if k == 0:
                v = _quad(lambda t: F(math.exp(t)) * math.exp(t), math.log(a), math.log(b), epsabs=eps_abs, epsrel=rel, limit=400)
            else:
                v = _quad(F, a, b, weight="cos", wvar=k, epsabs=eps_abs, epsrel=rel, limit=2000, maxp1=200)
            part2 += c * v
    last = cuts[-1]
    for k, c in coefs:
        if k == 0:
            v = _quad(F, last, np.inf, epsabs=eps_abs, epsrel=rel, limit=400)
        else:
            v = _quad(F, last, np.inf, weight="cos", wvar=k, epsabs=eps_abs, limlst=200)
        part2 += c * v
    return (2.0 / scale) * (part1 + part2) * s_ref


# ---------------------------------------------------------------------------------------
# The locked laser (common practice): integrating servo as a first-order loop,
# H(f) = 1 / (1 + i 2 pi f T_s); the free laser's noise passes through |1 - H|^2, the
# atoms' white noise (projection and Dick, each h0 = 2 sigma_1s^2) through |H|^2.
# ---------------------------------------------------------------------------------------


def highpass(f, ts):
    x2 = (2 * PI * f * ts) ** 2
    return x2 / (1 + x2)


def lowpass(f, ts):
    x2 = (2 * PI * f * ts) ** 2
    return 1 / (1 + x2)


class LockedBudget:
    def __init__(self, design, sigma_qpn_1s, sigma_dick_1s):
        self.d = design
        self.spec = design.spectrum
        self.ts = design.attack
        self.h0_qpn = 2 * sigma_qpn_1s**2
        self.h0_dick = 2 * sigma_dick_1s**2
        self.features = list(self.spec.features()) + [1 / (2 * PI * self.ts)]

    def laser(self, tau):
        return variance(lambda f: self.spec.scalar(f) * highpass(f, self.ts), tau, "allan", self.features)

    def projection(self, tau):
        return variance(lambda f: self.h0_qpn * lowpass(f, self.ts), tau, "allan", self.features)

    def dick(self, tau):
        return variance(lambda f: self.h0_dick * lowpass(f, self.ts), tau, "allan", self.features)

    def mod_total(self, tau):
        h0 = self.h0_qpn + self.h0_dick
        return variance(lambda f: self.spec.scalar(f) * highpass(f, self.ts) + h0 * lowpass(f, self.ts), tau, "mod", self.features)

    def free_laser(self, tau):
        v = self.d.free_laser_var(tau, drift=True)
        if self.spec.table is not None:
            v += variance(self.spec.table_scalar, tau, "allan", self.features)
        return v
