"""The central feature of the line and the lock's operating point, by dense scans.

* edge: the first extremum of P(nu) away from nu = 0 (scan, then Brent on the bracket);
* half maximum: P = (P(0) + P(edge)) / 2 on (0, edge) by root finding;
* best slope-to-noise: the largest |dP'/dnu| / sqrt(P' (1 - P')) on (0, edge), from a
  dense scan refined by Brent's method on the bracketing interval (IEEE Trans. UFFC 45,
  887 (1998) and Phys. Rev. A 47, 3554 (1993) for the projection-noise form of the merit).
"""

import numpy as np
from scipy.optimize import brentq, minimize_scalar

import bloch

SCAN_EDGE = 160  # points over (0, 4 w] looking for the first extremum (then refined)
SCAN_MERIT = 200  # points over (0, edge) for the merit


def merit(design, nu):
    nu = np.atleast_1d(np.asarray(nu, dtype=float))
    p = design.measured(bloch.excitation(design, nu))
    s = design.contrast * bloch.slope(design, nu)
    var = p * (1 - p)
    return np.where(var > 0, np.abs(s) / np.sqrt(np.maximum(var, 1e-300)), 0.0)


class Feature:
    pass


def analyse(design):
    w = bloch.width_scale(design)
    f = Feature()
    f.width = w
    nu = np.linspace(0.0, 4.0 * w, SCAN_EDGE + 1)
    P = bloch.excitation(design, nu)
    f.p0 = P[0]
    d = np.diff(P)
    sgn = np.sign(d[0])
    k = int(np.argmax(np.sign(d) != sgn))  # first step whose direction differs
    if k == 0:
        raise RuntimeError("no extremum within 4 width scales")
    # the extremum lies in [nu[k-1], nu[k+1]]
    sign = -1.0 if sgn > 0 else 1.0  # maximise P if rising, else minimise
    r = minimize_scalar(lambda x: sign * bloch.excitation(design, x)[0], bounds=(nu[k - 1], nu[k + 1]), method="bounded", options={"xatol": 1e-13 * w})
    f.edge = r.x
    f.p_edge = bloch.excitation(design, f.edge)[0]
    f.peak = max(f.p0, f.p_edge)
    f.half_level = (f.p0 + f.p_edge) / 2
    f.half_hz = brentq(lambda x: bloch.excitation(design, x)[0] - f.half_level, 0.0, f.edge, xtol=1e-14 * w, rtol=1e-15)
    grid = f.edge * np.arange(1, SCAN_MERIT) / SCAN_MERIT
    m = merit(design, grid)
    f.grid, f.grid_merit = grid, m
    f.best_hz, f.best_merit = best_on(design, grid, m, 0.0, f.edge)
    return f


def best_on(design, grid, m, a, b):
    """Largest merit on [a, b]: the best scanned point inside, refined by Brent's method
    between its neighbours (clipped to [a, b])."""
    inside = np.nonzero((grid >= a) & (grid <= b))[0]
    j = inside[int(np.argmax(m[inside]))]
    lo = max(a, grid[j - 1] if j > 0 else a)
    hi = min(b, grid[j + 1] if j + 1 < len(grid) else b)
    if lo <= 0.0:
        lo = grid[j] / 2
    r = minimize_scalar(lambda x: -merit(design, x)[0], bounds=(lo, hi), method="bounded", options={"xatol": 1e-10 * (b - a)})
    if -r.fun >= m[j]:
        return r.x, -r.fun
    return grid[j], m[j]
