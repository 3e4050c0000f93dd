"""Closed forms of the power laws against direct integration with mpmath.

Allan variance sigma^2 = 2 int S sin^4(pi f tau)/(pi f tau)^2 df (IEEE Trans. Instrum. Meas.
IM-20, 105 (1971)); with u = pi f tau and S = h f^a it is
    sigma^2 = 2 h (pi tau)^(-a-1) int sin^4(u) u^(a-2) du,
and the modified variance has sin^6 and u^(a-4). Each integral is done as it stands on
[0, 10 pi] (one mp.quad panel per half period), and beyond by expanding the kernel into
cosines: the constant part in closed form, each cosine by mp.quadosc. Cut-off spectra
(a = 1, 2, S = 0 above f_h) are integrated directly up to u_h = pi f_h tau.

IEEE Std 1139-2008 closed forms checked:
    white FM     h0/(2 tau)                     flicker FM    2 ln2 h_-1
    random walk  (2 pi^2/3) h_-2 tau            white PM      3 f_h h2/(4 pi^2 tau^2)
    flicker PM   (1.038 + 3 ln(2 pi f_h tau)) h1/(4 pi^2 tau^2)
The white- and flicker-PM forms are asymptotic in u_h; their tolerances are the remainder
bounds derived from the exact integrals (stated with each check).
"""

import math

import mpmath as mp

import allan
from report import Check

mp.mp.dps = 17
PI = mp.pi
KER = {
    "allan": (2, [(0, mp.mpf(3) / 8), (2, -mp.mpf(1) / 2), (4, mp.mpf(1) / 8)]),
    "mod": (4, [(0, mp.mpf(10) / 32), (2, -mp.mpf(15) / 32), (4, mp.mpf(6) / 32), (6, -mp.mpf(1) / 32)]),
}
SRC_AVAR = "IEEE Trans. Instrum. Meas. IM-20, 105 (1971)"
SRC_IEEE = "IEEE Std 1139-2008"


def kernel_integral(kind, q, n_head=10):
    """int_0^inf sin^(p+2)(u) / u^q du (p = 2 Allan, 4 modified)."""
    p, coefs = KER[kind]
    U = n_head * PI
    head = mp.quad(lambda u: mp.sin(u) ** (p + 2) / u**q, mp.linspace(0, U, n_head + 1))
    tail = mp.mpf(0)
    for k, c in coefs:
        if k == 0:
            tail += c * U ** (1 - q) / (q - 1)
        else:
            tail += c * mp.quadosc(lambda u: mp.cos(k * u) / u**q, [U, mp.inf], omega=k)
    return head + tail


def power_law_variance(kind, a, tau):
    """Variance of S = f^a (h = 1) by direct integration, no cut-off (a <= 0)."""
    p, _ = KER[kind]
    return 2 * (PI * tau) ** (-a - 1) * kernel_integral(kind, p - a)


def cutoff_variance(a, tau, f_h):
    """Allan variance of S = f^a for f <= f_h (a = 1, 2), direct integration to u_h."""
    uh = PI * f_h * tau
    n = int(mp.ceil(uh / PI))
    pts = [PI * k for k in range(n)] + [uh]
    integral = mp.quad(lambda u: mp.sin(u) ** 4 * u ** (a - 2), pts)
    return 2 * (PI * tau) ** (-a - 1) * integral


def checks():
    """Returns (checks, info lines)."""
    out = []
    info = []

    def add(*a, **k):
        out.append(Check("global", *a, **k))

    ln2 = math.log(2)
    for tau in (1.0, 37.0):
        add(f"white FM: h0/(2 tau) vs mpmath integral, tau={tau:g}", abs(1 / (2 * tau) / float(power_law_variance("allan", 0, tau)) - 1), 1e-12, SRC_IEEE + "; " + SRC_AVAR, "exact closed form; mpmath at 17 digits")
        add(f"flicker FM: 2 ln2 h_-1 vs mpmath integral, tau={tau:g}", abs(2 * ln2 / float(power_law_variance("allan", -1, tau)) - 1), 1e-12, SRC_IEEE + "; " + SRC_AVAR, "exact closed form; mpmath at 17 digits")
        add(f"random walk FM: (2 pi^2/3) h_-2 tau vs mpmath integral, tau={tau:g}", abs(2 * math.pi**2 / 3 * tau / float(power_law_variance("allan", -2, tau)) - 1), 1e-12, SRC_IEEE + "; " + SRC_AVAR, "exact closed form; mpmath at 17 digits")

    # Phase noise with a sharp cut-off, at a u_h that is not a multiple of pi.
    tau, f_h = 1.0, 37.3
    uh = math.pi * f_h * tau
    direct = float(cutoff_variance(2, tau, f_h))
    ieee = 3 * f_h / (4 * math.pi**2 * tau**2)
    # Exact: int_0^U sin^4 = 3U/8 - sin(2U)/4 + sin(4U)/32, so |exact/closed - 1| <= (9/32)/(3U/8).
    bound = (9 / 32) / (3 * uh / 8)
    add(f"white PM: 3 f_h h2/(4 pi^2 tau^2) vs mpmath integral (f_h tau={f_h * tau:g})", abs(ieee / direct - 1), bound, SRC_IEEE + "; " + SRC_AVAR, "asymptotic form; remainder bound (9/32)/(3 u_h/8)", ieee, direct, labels=("closed form", "integral"))
    exact_wpm = 2 * (math.pi * tau) ** -3 * (3 * uh / 8 - math.sin(2 * uh) / 4 + math.sin(4 * uh) / 32)
    add("white PM: exact finite-cut-off form vs mpmath integral (reference self-check)", abs(exact_wpm / direct - 1), 1e-12, SRC_AVAR, "exact")

    direct = float(cutoff_variance(1, tau, f_h))
    ieee = (1.038 + 3 * math.log(2 * math.pi * f_h * tau)) / (4 * math.pi**2 * tau**2)
    c_exact = 3 * float(mp.euler) - math.log(2)
    # Exact: (c_exact + 3 ln(2 pi f_h tau) - 4 Ci(2U) + Ci(4U)) / (4 pi^2 tau^2); |Ci(x)| < 1.1/x for x > 20.
    bracket = 1.038 + 3 * math.log(2 * math.pi * f_h * tau)
    bound = (abs(1.038 - c_exact) + 1.1 * (4 / (2 * uh) + 1 / (4 * uh))) / bracket
    add(
        f"flicker PM: (1.038 + 3 ln(2 pi f_h tau)) h1/(4 pi^2 tau^2) vs mpmath integral (f_h tau={f_h * tau:g}); exact constant 3 gamma - ln2 = {c_exact:.6f}",
        abs(ieee / direct - 1),
        bound,
        SRC_IEEE + "; " + SRC_AVAR,
        "rounded constant 1.038 plus remainder bound from Ci terms",
        ieee,
        direct,
        labels=("closed form", "integral"),
    )
    U = mp.mpf(uh)
    exact_fpm = float((c_exact + 3 * mp.log(2 * PI * f_h * tau) - 4 * mp.ci(2 * U) + mp.ci(4 * U)) / (4 * PI**2 * tau**2))
    add("flicker PM: exact form with Ci vs mpmath integral (reference self-check)", abs(exact_fpm / direct - 1), 1e-12, SRC_AVAR, "exact")

    # Modified Allan constants (continuous averaging), printed for the Rust tests.
    w = float(power_law_variance("mod", 0, 1.0))
    fl = float(power_law_variance("mod", -1, 1.0))
    rw = float(power_law_variance("mod", -2, 1.0))
    info.append(f"modified Allan, continuous averaging (mpmath): white FM {w:.15f} h0/tau; flicker FM {fl:.15f} h_-1; random-walk FM {rw:.15f} h_-2 tau")
    info.append(f"  analytic: 1/4; (27 ln3 - 32 ln2)/8 = {(27 * math.log(3) - 32 * ln2) / 8:.15f}; 11 pi^2/20 = {11 * math.pi**2 / 20:.15f}")
    info.append(f"  ratios to the Allan variance: white {w / 0.5:.6f}, flicker {fl / (2 * ln2):.6f}, random walk {rw / (2 * math.pi**2 / 3):.6f}")
    info.append(f"  flicker PM: the exact constant of the IEEE Std 1139-2008 form is 3 gamma - ln 2 = {c_exact:.10f} (the standard rounds it to 1.038)")
    src_mod = "continuous-averaging modified Allan transfer function (from memory)"
    add("mod white FM: h0/(4 tau) vs mpmath integral", abs(w / 0.25 - 1), 1e-12, src_mod + "; value from memory", "exact")
    add(
        "mod flicker FM: (27 ln3 - 32 ln2)/8 h_-1 vs mpmath integral",
        abs(fl / ((27 * math.log(3) - 32 * ln2) / 8) - 1),
        1e-12,
        src_mod + "; value derived here from the cosine expansion of sin^6",
        "exact",
    )
    add("mod random-walk FM: (11 pi^2/20) h_-2 tau vs mpmath integral", abs(rw / (11 * math.pi**2 / 20) - 1), 1e-12, src_mod + "; value from memory (int (sin x/x)^6 dx = 11 pi/40)", "exact")

    # The reference's scipy integrator against the same values (used for every curve check).
    for kind, a, val in [("allan", 0, 0.5), ("allan", -1, 2 * ln2), ("allan", -2, 2 * math.pi**2 / 3), ("mod", 0, w), ("mod", -1, fl), ("mod", -2, rw)]:
        for tau in (0.3, 2e4):
            scale = tau**-1 if a == 0 else (tau if a == -2 else 1.0)
            v = allan.variance(lambda f, a=a: f**a, tau, kind)
            add(f"reference integrator: {kind} variance of f^{a} at tau={tau:g} vs mpmath value", abs(v / (val * scale) - 1), 1e-9, SRC_AVAR, "scipy QUADPACK at 1e-11 relative")
    for a, fh, tau in [(2, 1000.0, 0.37), (1, 1000.0, 0.37), (2, 300.0, 5e4), (1, 300.0, 5e4)]:
        v = allan.variance(lambda f, a=a, fh=fh: f**a if f <= fh else 0.0, tau, "allan", [fh])
        U = math.pi * fh * tau
        if a == 2:
            ex = 2 * (math.pi * tau) ** -3 * (3 * U / 8 - math.sin(2 * U) / 4 + math.sin(4 * U) / 32)
        else:
            Um = mp.mpf(U)
            ex = float((c_exact + 3 * mp.log(2 * Um) - 4 * mp.ci(2 * Um) + mp.ci(4 * Um)) / (4 * PI**2 * tau**2))
        add(f"reference integrator: cut-off f^{a} (f_h={fh:g} Hz) at tau={tau:g} vs exact form", abs(v / ex - 1), 1e-9, SRC_AVAR, "scipy QUADPACK at 1e-11 relative")
    return out, info
