"""All checks of one design: the engine's Evaluation against the reference's own numbers."""

import math

import numpy as np
from scipy.optimize import brentq, minimize_scalar

import allan
import bloch
import dick
import engine
import oppoint
from model import Design
from report import Check, rel

PI = math.pi

SRC_BLOCH = "optical Bloch equations (common practice)"
SRC_VOTE = "binomial majority vote (common practice)"
SRC_QPN = "Phys. Rev. A 47, 3554 (1993)"
SRC_SQZ = "Phys. Rev. A 50, 67 (1994)"
SRC_G = "IEEE Trans. UFFC 45, 887 (1998)"
SRC_AVAR = "IEEE Trans. Instrum. Meas. IM-20, 105 (1971)"
SRC_IEEE = "IEEE Std 1139-2008"
SRC_LOCK = "first-order servo loop (common practice)"
SRC_MOD = "continuous-averaging modified Allan transfer function (from memory)"
SRC_DEF = "design schema definition (common practice)"

# Engine's documented flank for the best slope-to-noise search: P more than this fraction
# of the feature's height away from its top and bottom (core/src/projection.rs).
FLANK_MARGIN = 0.05

TOL_CURVE = 1e-5
WHY_CURVE = "engine's transfer-function quadrature is meant to hold 1e-5; reference quad ~1e-10"


def is_ideal_ramsey(d):
    s = d.steps
    if len(s) != 3 or d.gamma != 0.0 or d.ghz:
        return False
    p1, fr, p2 = s
    white_only = all(a == 0 for a, _ in d.spectrum.terms) and d.spectrum.table is None
    return (
        p1.kind == "pulse"
        and fr.kind == "free"
        and p2.kind == "pulse"
        and abs(p1.omega * p1.duration - PI / 2) < 1e-12
        and abs(p2.omega * p2.duration - PI / 2) < 1e-12
        and max(p1.duration, p2.duration) < 1e-5 * fr.duration
        and p1.offset == 0.0
        and p2.offset == 0.0
        and white_only
    )


def check_design(label, path, options_path, exe):
    """Returns (checks, info lines)."""
    out = []
    info = []

    def add(*a, **k):
        out.append(Check(label, *a, **k))

    e = engine.evaluate(exe, path, options_path)
    d = Design(path)
    op = e["operating_point"]
    nu = op["detuning_hz"]

    # ---- 1. timing --------------------------------------------------------------------
    add("cycle_time_s", rel(e["cycle_time_s"], d.cycle), 1e-13, SRC_DEF, "a sum of the same durations", e["cycle_time_s"], d.cycle)
    add("probe_time_s", rel(e["probe_time_s"], d.probe), 1e-13, SRC_DEF, "a sum of the same durations", e["probe_time_s"], d.probe)
    add("dead_time_s (rel. to cycle)", abs(e["dead_time_s"] - (d.cycle - d.probe)) / d.cycle, 1e-13, SRC_DEF, "a difference of sums", e["dead_time_s"], d.cycle - d.probe)

    # ---- 2. detection -------------------------------------------------------------------
    pr = e["projection"]
    add("misread_ground_effective", abs(pr["misread_ground_effective"] - d.e_g), 1e-14, SRC_VOTE, "finite binomial sum, rounding only", pr["misread_ground_effective"], d.e_g, kind="abs")
    add("misread_excited_effective", abs(pr["misread_excited_effective"] - d.e_e), 1e-14, SRC_VOTE, "finite binomial sum, rounding only", pr["misread_excited_effective"], d.e_e, kind="abs")

    # ---- 3. line and operating point ----------------------------------------------------
    p_ref = float(bloch.excitation(d, nu)[0])
    add("operating_point.excitation", abs(op["excitation"] - p_ref), 1e-10, SRC_BLOCH, "two exact propagators (engine Rodrigues/Taylor, reference expm); rounding ~1e-14", op["excitation"], p_ref, kind="abs")
    pm_ref = d.measured(p_ref)
    add("operating_point.measured_excitation", abs(op["measured_excitation"] - pm_ref), 1e-10, SRC_BLOCH + "; " + SRC_VOTE, "as excitation", op["measured_excitation"], pm_ref, kind="abs")
    dpdnu = float(bloch.slope(d, nu)[0])
    slope_ref = d.contrast * dpdnu
    add("operating_point.slope_per_hz", rel(op["slope_per_hz"], slope_ref), 1e-7, SRC_BLOCH, "two central differences, truncation <= 1e-9 and rounding ~1e-11 each", op["slope_per_hz"], slope_ref)

    f = oppoint.analyse(d)
    # Flank as documented by the engine, from the reference's own feature.
    height = f.p0 - f.p_edge

    def crossing(frac):
        lvl = f.p_edge + frac * height
        return brentq(lambda x: float(bloch.excitation(d, x)[0]) - lvl, 0.0, f.edge, xtol=1e-14 * f.width)

    fl_lo, fl_hi = crossing(1 - FLANK_MARGIN), crossing(FLANK_MARGIN)
    _, flank_best = oppoint.best_on(d, f.grid, f.grid_merit, fl_lo, fl_hi)
    m_eng = float(oppoint.merit(d, op["best_detuning_hz"])[0])
    add(
        "best slope-to-noise: merit deficit vs dense scan of the flank",
        (flank_best - m_eng) / flank_best if m_eng <= flank_best else (m_eng - flank_best) / flank_best,
        1e-6,
        SRC_QPN,
        "engine refines by golden section / flat rule to 1e-6 of the merit",
        m_eng,
        flank_best,
    )
    on_flank = fl_lo <= f.best_hz <= fl_hi
    if on_flank:
        add(
            f"best slope-to-noise: merit deficit vs dense scan of all of (0, edge) (global max at {f.best_hz:.6g} Hz, on the flank)",
            abs(f.best_merit - m_eng) / f.best_merit,
            1e-6,
            SRC_QPN,
            "as above: the global maximum lies on the flank",
            m_eng,
            f.best_merit,
        )
    else:
        info.append(
            f"[{label}] merit over (0, edge): global maximum {f.best_merit:.9g} at {f.best_hz:.6g} Hz lies OFF the engine's flank "
            f"[{fl_lo:.4g}, {fl_hi:.4g}] Hz (documented rule); engine's merit {m_eng:.9g} is {(f.best_merit - m_eng) / f.best_merit:.2e} below it"
        )
    want = op["best_detuning_hz"] if d.rule == "best_slope_to_noise" else op["half_maximum_detuning_hz"]
    add(f"operating point follows rule {d.rule}", rel(nu, want), 0.0, SRC_DEF, "the same number", nu, want)

    # The engine walks out on a grid and refines the first extremum by golden section; P is
    # quadratic there, so P(edge) and the half level are exact to rounding.
    add(
        "operating_point.peak_excitation (max of P(0), P(first extremum))",
        abs(op["peak_excitation"] - f.peak),
        1e-10,
        SRC_BLOCH,
        "extremum refined on both sides; P flat there, rounding only",
        op["peak_excitation"],
        f.peak,
        kind="abs",
    )
    p_half_eng = float(bloch.excitation(d, op["half_maximum_detuning_hz"])[0])
    add(
        "half_maximum_detuning_hz: P there minus (P(0)+P(edge))/2",
        abs(p_half_eng - f.half_level),
        1e-10,
        SRC_BLOCH,
        "root finding on both sides, rounding only",
        op["half_maximum_detuning_hz"],
        f.half_hz,
        kind="abs",
    )

    # ---- 4. projection noise ------------------------------------------------------------
    sig_qpn = math.sqrt(d.xi2 * pm_ref * (1 - pm_ref) / d.n_eff) / (d.nu0 * abs(slope_ref)) * math.sqrt(d.cycle)
    add("projection.sigma_1s", rel(pr["sigma_1s"], sig_qpn), 1e-7, SRC_QPN, "set by the slope's central differences", pr["sigma_1s"], sig_qpn)
    add("projection.effective_atoms", rel(pr["effective_atoms"], d.n_eff), 1e-15, SRC_QPN, "exact", pr["effective_atoms"], d.n_eff)
    add("projection.squeezing_factor", rel(pr["squeezing_factor"], d.xi2), 1e-14, SRC_SQZ, "10^(-dB/10), rounding only", pr["squeezing_factor"], d.xi2)

    # ---- 5. sensitivity function ----------------------------------------------------------
    gf = dick.GFunction(d, nu)
    ts = np.array(e["sensitivity"]["t_s"])
    ge = np.array(e["sensitivity"]["g"])
    n = len(ts)
    t_grid = d.cycle * np.arange(n) / (n - 1)
    add("sensitivity.t_s grid (0..T_c)", float(np.max(np.abs(ts - t_grid))) / d.cycle, 1e-14, SRC_DEF, "linspace, rounding only")
    # engine evaluates just below T_c at the last point
    tq = np.minimum(ts, d.cycle * (1 - 1e-12))
    g_bf = bloch.g_bruteforce(d, nu, tq)
    g_plain = bloch.g_bruteforce(d, nu, tq[::8], dphi=1e-6, exact_harmonic=False)
    gmax_raw = float(np.max(np.abs(g_bf)))
    add(
        "reference self-check: exact-harmonic phase step vs plain central difference (dphi=1e-6)",
        float(np.max(np.abs(g_bf[::8] - g_plain))) / gmax_raw,
        1e-8,
        SRC_G,
        "plain difference: truncation 2e-13, rounding ~1e-10",
    )
    add(
        "reference self-check: Legendre interpolant of g vs fresh brute force at the plot times",
        float(np.max(np.abs(gf(tq) - g_bf))) / gmax_raw,
        1e-10,
        SRC_G,
        "20 nodes per <= 1 rad panel resolve g to rounding",
    )
    g0_check, _, _ = dick.fourier(gf, 1)
    sign = 1.0 if g0_check >= 0 else -1.0
    gmax = gf.max_abs()
    g_ref = sign * g_bf / gmax
    c = float(ge @ g_ref / (g_ref @ g_ref))
    add(
        "sensitivity.g shape (engine minus best-scaled brute force, rel. to max|g|)",
        float(np.max(np.abs(ge - c * g_ref))),
        1e-9,
        SRC_G,
        "both exact to rounding",
    )
    add(
        "sensitivity.g normalisation: scale of engine g to brute-force g/max|g| (positive mean)",
        abs(c - 1.0),
        1e-6,
        SRC_G,
        "engine states max|g| = 1 and positive mean",
        c,
        1.0,
        labels=("engine/ref scale", "expected"),
    )

    # ---- 6. Dick effect --------------------------------------------------------------------
    dr = dick.dick(d, gf)
    ed = e["dick"]
    add("dick.g0 = (1/T_c) int g dt", rel(ed["g0"], abs(dr.g0)), 1e-9, SRC_G, "quadrature of an interpolant exact to ~1e-13", ed["g0"], abs(dr.g0))
    ident = PI * abs(dr.g0) * d.cycle * d.det_factor
    add(
        "reference self-check: pi * int g dt * N = |dP/dnu| (g is the response to a phase ramp)",
        rel(ident, abs(dpdnu)),
        1e-7,
        SRC_G,
        "limited by the central-difference slope",
        ident,
        abs(dpdnu),
        labels=("pi int g N", "|dP/dnu|"),
    )
    we = np.array(ed["weights"])
    wr = dr.weights[: len(we)]
    floor = 1e-9 * wr.max()
    err_w = np.abs(we - wr) / np.maximum(wr, floor)
    k = int(np.argmax(err_w))
    add(
        f"dick.weights m=1..{len(we)} (worst m={k + 1}; rel., floor 1e-9 of the largest)",
        float(err_w.max()),
        1e-7,
        SRC_G,
        "both integrate smooth pieces to ~1e-13 of g; tiny weights lose relative accuracy",
        float(we[k]),
        float(wr[k]),
    )
    tol_dick = ed["truncation_bound_relative"] + dr.uncertainty_rel + 1e-9
    add(
        f"dick.sigma_1s, variance (engine {ed['harmonics_summed']} harmonics; reference {dr.M} + Parseval tail)",
        rel(ed["sigma_1s"] ** 2, dr.variance_coefficient),
        tol_dick,
        SRC_G,
        f"engine's stated truncation bound {ed['truncation_bound_relative']:.1e} + reference tail {dr.uncertainty_rel:.1e} + 1e-9",
        ed["sigma_1s"],
        dr.sigma_1s,
    )
    eq = math.sqrt(sig_qpn**2 + dr.variance_coefficient)
    add("sigma_1s_equivalent = sqrt(QPN^2 + Dick^2)", rel(e["sigma_1s_equivalent"], eq), 1e-7, SRC_LOCK, "as its parts", e["sigma_1s_equivalent"], eq)

    if is_ideal_ramsey(d):
        p1, fr, p2 = d.steps
        t_r = fr.duration + 2 * p1.duration * 2 / PI  # effective Ramsey time of finite pi/2 pulses
        m = np.arange(1, len(we) + 1)
        x = PI * m * t_r / d.cycle
        sinc2 = (np.sin(x) / x) ** 2
        add(
            "ideal Ramsey: engine weights vs sinc^2(pi m T_R/T_c) (abs., rel. to weight 1)",
            float(np.max(np.abs(we - sinc2))) / sinc2[0],
            1e-7,
            SRC_G,
            "T_R = T + 4 tau_p/pi; other pulse effects O((tau_p/T_c)^2, delta tau_p) < 1e-8",
        )
        add(
            "ideal Ramsey: reference weights vs sinc^2 (reference self-check)",
            float(np.max(np.abs(wr - sinc2))) / sinc2[0],
            1e-7,
            SRC_G,
            "as above",
        )
        h0 = d.spectrum.terms[0][1]
        cf = math.sqrt(h0 / 2 * (d.cycle - t_r) / t_r)
        # Finite pulses: int g^2 = T + tau_p but int g = T + 4 tau_p/pi = T_R, so by Parseval
        # the white-noise Dick variance is (h0/2)(T_c (T + tau_p)/T_R^2 - 1), which differs from
        # the ideal closed form by (4/pi - 1)(tau_p/T_R) T_c/(T_c - T_R) relative; allow twice that.
        corr = (4 / PI - 1) * p1.duration / t_r * d.cycle / (d.cycle - t_r)
        why = f"finite-pulse correction (4/pi-1)(tau_p/T_R) T_c/(T_c-T_R) = {corr:.1e}, doubled"
        add("ideal Ramsey: dick.sigma_1s vs sqrt((h0/2)(T_c-T_R)/T_R), variance", rel(ed["sigma_1s"] ** 2, cf**2), 2 * corr, SRC_G, why, ed["sigma_1s"], cf, labels=("engine", "closed form"))
        add("ideal Ramsey: reference Dick vs closed form (self-check), variance", rel(dr.variance_coefficient, cf**2), 2 * corr, SRC_G, why, dr.sigma_1s, cf, labels=("ref", "closed form"))
        var_p = h0 / 2 * (d.cycle * (fr.duration + p1.duration) / t_r**2 - 1)
        add(
            "ideal Ramsey: dick variance vs Parseval form (h0/2)(T_c (T+tau_p)/T_R^2 - 1) for square pi/2 pulses",
            rel(ed["sigma_1s"] ** 2, var_p),
            1e-9,
            SRC_G,
            "exact for white noise; detuning during the 0.1 us pulses changes g by < 1e-12",
            ed["sigma_1s"] ** 2,
            var_p,
            labels=("engine", "Parseval form"),
        )

    # ---- 7/8. locked laser, free laser -------------------------------------------------------
    lb = allan.LockedBudget(d, sig_qpn, dr.sigma_1s)
    cur = e["curve"]
    taus = np.array(cur["tau_s"])
    ntau = len(taus)
    tau_max = taus[-1]
    grid_t = np.exp(np.log(d.cycle) + (np.log(tau_max) - np.log(d.cycle)) * np.arange(ntau) / (ntau - 1))
    add("curve.tau_s log grid from T_c", float(np.max(np.abs(taus / grid_t - 1))), 1e-12, SRC_DEF, "rounding of exp/log")
    has_table = d.spectrum.table is not None
    cache = {}

    def parts(tau):
        if tau not in cache:
            cache[tau] = (lb.laser(tau), lb.projection(tau), lb.dick(tau))
        return cache[tau]

    # Every point of the curve; one line per component with the worst tau.
    src_l = SRC_AVAR + "; " + SRC_LOCK
    spec = {
        "laser": (src_l, TOL_CURVE, WHY_CURVE),
        "projection": (src_l, 1e-6, "engine: exact low-pass closed form; reference quad ~1e-10 + QPN input 1e-7"),
        "dick": (src_l, 1e-6, "engine: exact low-pass closed form; reference quad ~1e-10 + Dick input"),
        "total": (src_l, TOL_CURVE, WHY_CURVE),
        "mod_total": (SRC_MOD + "; " + SRC_LOCK, TOL_CURVE, WHY_CURVE),
        "free_laser": (SRC_IEEE + "; drift D tau/sqrt(2) (common practice)", TOL_CURVE if has_table else 1e-12, WHY_CURVE if has_table else "same closed forms, rounding only"),
    }
    worst = {k: (-1.0, None, None, None) for k in spec}
    for i in range(ntau):
        tau = float(taus[i])
        vl, vp, vd = parts(tau)
        refs = {
            "laser": math.sqrt(vl),
            "projection": math.sqrt(vp),
            "dick": math.sqrt(vd),
            "total": math.sqrt(vl + vp + vd),
            "mod_total": math.sqrt(lb.mod_total(tau)),
            "free_laser": math.sqrt(lb.free_laser(tau)),
        }
        for key, ref in refs.items():
            x = rel(cur[key][i], ref)
            if not x <= worst[key][0]:  # also catches NaN
                worst[key] = (x, tau, cur[key][i], ref)
    for key, (src, tol, why) in spec.items():
        x, tau, ev, rv = worst[key]
        add(f"curve.{key}, all {ntau} tau (worst at tau={tau:.4g} s)", x, tol, src, why, ev, rv)

    for cp in e["checkpoints"]:
        tau = cp["tau_s"]
        vl, vp, vd = parts(tau)
        for key, v, tol in [("total", vl + vp + vd, TOL_CURVE), ("laser", vl, TOL_CURVE), ("projection", vp, 1e-6), ("dick", vd, 1e-6)]:
            add(f"checkpoint tau={tau:g} s {key}", rel(cp[key], math.sqrt(v)), tol, SRC_AVAR + "; " + SRC_LOCK, WHY_CURVE if tol == TOL_CURVE else "closed form in the engine", cp[key], math.sqrt(v))
        dom = ["laser", "projection", "dick"][int(np.argmax([vl, vp, vd]))]
        srt = sorted([vl, vp, vd])
        margin = (srt[2] - srt[1]) / srt[2]
        if margin > 1e-4:
            add(f"checkpoint tau={tau:g} s dominant mechanism (engine {cp['dominant']}, ref {dom}; 0 = same)", 0.0 if cp["dominant"] == dom else 1.0, 0.0, SRC_LOCK, "largest of three variances that differ by > 1e-4")
        else:
            info.append(f"[{label}] checkpoint tau={tau:g} s: two largest mechanisms within 1e-4; dominant not compared (engine {cp['dominant']}, ref {dom})")

    # ---- limits and target -------------------------------------------------------------------
    lim = e["limits"]

    def free_var_nodrift(t):
        v = d.free_laser_var(t, drift=False)
        if has_table:
            v += allan.variance(d.spectrum.table_scalar, t, "allan", d.spectrum.features())
        return v

    def phase_rms(t):
        return 2 * PI * d.nu0 * d.det_factor * t * math.sqrt(2 * free_var_nodrift(t))

    tol_lim = TOL_CURVE if has_table else 1e-12
    ph = phase_rms(d.probe)
    add("limits.probe_phase_rms_rad = 2 pi nu0 N T sqrt(2) sigma_y(T)", rel(lim["probe_phase_rms_rad"], ph), tol_lim, SRC_IEEE + " (common practice)", "closed forms" + (" + integrated table" if has_table else ", rounding only"), lim["probe_phase_rms_rad"], ph)
    if phase_rms(1e5) < 1.0:
        add("limits.coherence_probe_limit_s is null (phase stays below 1 rad up to 1e5 s; 0 = yes)", 0.0 if lim["coherence_probe_limit_s"] is None else 1.0, 0.0, SRC_IEEE + " (common practice)", "exact")
    else:
        tcoh = math.exp(brentq(lambda x: phase_rms(math.exp(x)) - 1.0, math.log(1e-7), math.log(1e5), xtol=1e-14))
        add("limits.coherence_probe_limit_s (phase rms = 1 rad)", rel(lim["coherence_probe_limit_s"], tcoh), 1e-8 if not has_table else TOL_CURVE, SRC_IEEE + " (common practice)", "root finding on closed forms", lim["coherence_probe_limit_s"], tcoh)
    pol = d.probe / d.lifetime if d.lifetime else 0.0
    add("limits.probe_over_lifetime", rel(lim["probe_over_lifetime"], pol), 1e-14, SRC_DEF, "exact", lim["probe_over_lifetime"], pol)
    lag = d.drift * d.attack
    add("limits.servo_lag_fractional = D T_s", rel(lim["servo_lag_fractional"], lag), 1e-14, SRC_LOCK, "exact", lim["servo_lag_fractional"], lag)

    tg = e["target"]
    if tg["time_s"] is not None and "found on the computed curve" in tg["note"]:
        t = tg["time_s"]
        vl, vp, vd = parts(t)
        tot = math.sqrt(vl + vp + vd)
        add(f"target: total sigma at the reported time {t:.5g} s equals the target", rel(tot, tg["target"]), TOL_CURVE, SRC_AVAR, WHY_CURVE, tot, tg["target"])
    elif tg["time_s"] is not None:
        t_ext = (eq / tg["target"]) ** 2
        add("target: extrapolated white-noise time (sigma_eq/target)^2", rel(tg["time_s"], t_ext), 2e-7, SRC_LOCK, "as sigma_1s_equivalent", tg["time_s"], t_ext)
    else:
        vl, vp, vd = parts(float(taus[-1]))
        add("target not reached: total at the last tau is above the target (0 = yes)", 0.0 if math.sqrt(vl + vp + vd) > tg["target"] else 1.0, 0.0, SRC_AVAR, "exact")
    return out, info
