"""Two-level dynamics by matrix exponentials, and g(t) by brute-force phase steps.

Bloch vector r = (u, v, w), w = P_e - P_g, start (0, 0, -1). A step with Rabi frequency
Omega, phase phi and detuning delta turns r about W = (Omega cos phi, Omega sin phi, -delta);
decay at Gamma damps u, v at Gamma/2 and relaxes w to -1 at Gamma (optical Bloch equations).
The affine flow dr/dt = A r + b is written as one linear flow of (u, v, w, 1) and
propagated with scipy.linalg.expm of the 4x4 augmented generator.
"""

import numpy as np
from scipy.linalg import expm

PI = np.pi
R0 = np.array([0.0, 0.0, -1.0, 1.0])  # ground state, augmented


def generator(omega, phase, delta, gamma):
    """Augmented generator(s); `delta` and `phase` may be arrays of equal shape (batched)."""
    delta = np.asarray(delta, dtype=float)
    phase = np.broadcast_to(np.asarray(phase, dtype=float), delta.shape)
    wx = omega * np.cos(phase)
    wy = omega * np.sin(phase)
    wz = -delta
    A = np.zeros(delta.shape + (4, 4))
    h = gamma / 2.0
    # W x r
    A[..., 0, 1] = -wz
    A[..., 0, 2] = wy
    A[..., 1, 0] = wz
    A[..., 1, 2] = -wx
    A[..., 2, 0] = -wy
    A[..., 2, 1] = wx
    # decay
    A[..., 0, 0] = -h
    A[..., 1, 1] = -h
    A[..., 2, 2] = -gamma
    A[..., 2, 3] = -gamma
    return A


def step_delta(design, step, nu):
    """Detuning (rad/s) seen by the atoms during `step` at laser detuning nu (Hz)."""
    return 2.0 * PI * np.asarray(nu, dtype=float) * design.det_factor + step.offset


def final_state(design, nu, extra_phase=0.0):
    """Augmented Bloch vector(s) at the end of the probe; nu may be an array."""
    nu = np.atleast_1d(np.asarray(nu, dtype=float))
    r = np.broadcast_to(R0, nu.shape + (4,)).copy()
    for s in design.steps:
        A = generator(s.omega, s.phase + extra_phase, step_delta(design, s, nu), design.gamma)
        U = expm(A * s.duration)
        r = np.einsum("...ij,...j->...i", U, r)
    return r


def excitation(design, nu):
    """P_e at the end of the probe (true atomic state)."""
    r = final_state(design, nu)
    return (r[..., 2] + 1.0) / 2.0


def width_scale(design):
    """1 / (probe duration x detuning factor), Hz: the scale of the central feature."""
    return 1.0 / (design.probe * design.det_factor)


def slope(design, nu, h=None):
    """dP/dnu (1/Hz, true state) by a central difference with step 1e-5 of the width scale
    (truncation ~ (2 pi h T)^2 / 6 ~ 1e-9 relative, rounding ~ 1e-11)."""
    if h is None:
        h = 1e-5 * width_scale(design)
    nu = np.asarray(nu, dtype=float)
    return (excitation(design, nu + h) - excitation(design, nu - h)) / (2.0 * h)


def max_rate(design, nu):
    """Fastest rate of each step's generator, rad/s."""
    out = []
    for s in design.steps:
        d = float(step_delta(design, s, nu))
        out.append(np.hypot(s.omega, d) + design.gamma)
    return np.array(out)


# ---------------------------------------------------------------------------------------
# Sensitivity function by brute force.
#
# g(t) = 2 dP/dphi for a laser phase step dphi at time t: the step containing t is split,
# every later pulse (and the later part of the split pulse) gets phase + dphi, and the
# whole probe is propagated again. P is exactly a first harmonic in dphi (a phase step is
# a rotation about z of the state at t, and the rest of the probe is linear in that state),
# P(d) = a + b cos d + c sin d, so the central difference divided by sin(d) instead of d
# is exact: dP/dphi = c = (P(d) - P(-d)) / (2 sin d). run_all.py checks this against a
# plain central difference with a tiny step.
# ---------------------------------------------------------------------------------------

DPHI = 1e-2


def _perturbed_tail(design, k, nu, dphi):
    """Propagator of steps k+1 ... end with phase + dphi (one matrix)."""
    U = np.eye(4)
    for s in design.steps[k + 1 :]:
        A = generator(s.omega, s.phase + dphi, step_delta(design, s, nu), design.gamma)
        U = expm(A * s.duration) @ U
    return U


def _p_with_step(design, nu, t, dphi):
    """P at the end of the probe with a phase step dphi at times t (array)."""
    t = np.asarray(t, dtype=float)
    P = np.empty_like(t)
    # Before the probe: every pulse is shifted; after it: nothing is.
    before = t < design.t_start
    after = t >= design.t_end
    if before.any():
        r = final_state(design, nu, extra_phase=dphi)[0]
        P[before] = (r[2] + 1.0) / 2.0
    if after.any():
        r = final_state(design, nu)[0]
        P[after] = (r[2] + 1.0) / 2.0
    # State at the start of every step, unperturbed.
    r = R0.copy()
    starts = []
    for s in design.steps:
        starts.append(r.copy())
        A = generator(s.omega, s.phase, step_delta(design, s, nu), design.gamma)
        r = expm(A * s.duration) @ r
    for k, s in enumerate(design.steps):
        t0 = design.step_t0[k]
        sel = (t >= t0) & (t < t0 + s.duration) & ~before & ~after
        if not sel.any():
            continue
        s1 = t[sel] - t0
        s2 = s.duration - s1
        d = step_delta(design, s, nu)
        A0 = generator(s.omega, s.phase, d, design.gamma)
        A1 = generator(s.omega, s.phase + dphi, d, design.gamma)
        E1 = expm(A0[None] * s1[:, None, None])
        E2 = expm(A1[None] * s2[:, None, None])
        tail = _perturbed_tail(design, k, nu, dphi)
        rr = np.einsum("nij,j->ni", E1, starts[k])
        rr = np.einsum("nij,nj->ni", E2, rr)
        rr = rr @ tail.T
        P[sel] = (rr[:, 2] + 1.0) / 2.0
    return P


def g_bruteforce(design, nu, t, dphi=DPHI, exact_harmonic=True):
    """g(t) = 2 dP/dphi (sign: phase added to later pulses), unnormalised."""
    pp = _p_with_step(design, nu, t, dphi)
    pm = _p_with_step(design, nu, t, -dphi)
    denom = 2.0 * np.sin(dphi) if exact_harmonic else 2.0 * dphi
    return 2.0 * (pp - pm) / denom
