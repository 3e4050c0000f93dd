//! Frequency-stability estimators: slow literal-loop twins, hand-derived exact values,
//! EDF against exact discrete covariances and the handbook's simple formulas, chi-square
//! functions against slow quadrature and known values, confidence-interval coverage, noise
//! identification, and input errors.

use clockwright_core::estimate::*;
use clockwright_core::synthesis::{expected_variance, synthesize, PowerLaw, Rng, Spec};

fn rel(a: f64, b: f64) -> f64 {
    if b == 0.0 {
        a.abs()
    } else {
        (a - b).abs() / b.abs()
    }
}

// ---------------------------------------------------------------------------------------
// Slow twins: the textbook formulas as literal loops (Handbook of Frequency Stability Analysis, Special Publication 1065 (2008), 5.2.4,
// 5.2.5, 5.2.9), terms touching a gap skipped.

fn slow_freq(y: &[f64], est: Estimator, m: usize) -> Option<(f64, u64)> {
    let n = y.len();
    let span = match est {
        Estimator::Allan => 2 * m,
        _ => 3 * m,
    };
    let win = |a: usize| -> f64 {
        let mut s = 0.0;
        for v in &y[a..a + m] {
            s += v;
        }
        s
    };
    let clean = |a: usize, len: usize| y[a..a + len].iter().all(|v| !v.is_nan());
    let mut sum = 0.0;
    let mut count = 0u64;
    match est {
        Estimator::Allan => {
            for i in 0..=n.checked_sub(span)? {
                if clean(i, span) {
                    let d = (win(i + m) - win(i)) / m as f64;
                    sum += d * d;
                    count += 1;
                }
            }
            (count > 0).then(|| (sum / (2.0 * count as f64), count))
        }
        Estimator::Hadamard => {
            for i in 0..=n.checked_sub(span)? {
                if clean(i, span) {
                    let d = (win(i + 2 * m) - 2.0 * win(i + m) + win(i)) / m as f64;
                    sum += d * d;
                    count += 1;
                }
            }
            (count > 0).then(|| (sum / (6.0 * count as f64), count))
        }
        Estimator::ModifiedAllan => {
            // Terms j = 0 ..= n + 1 - 3m, each the sum over i = j..j+m-1 of the frequency
            // form of the phase second difference; its span is y[j .. j + 3m - 1).
            let last = (n + 1).checked_sub(3 * m)?;
            for j in 0..=last {
                if clean(j, 3 * m - 1) {
                    let mut s = 0.0;
                    for i in j..j + m {
                        s += win(i + m) - win(i);
                    }
                    // x = tau0 sum y; Mod sigma^2 = s^2 tau0^2 / (2 m^2 tau^2) = s^2 / (2 m^4).
                    sum += s * s;
                    count += 1;
                }
            }
            let mf = m as f64;
            (count > 0).then(|| (sum / (2.0 * mf * mf * mf * mf * count as f64), count))
        }
    }
}

fn slow_phase(x: &[f64], est: Estimator, m: usize, tau0: f64) -> Option<(f64, u64)> {
    let n = x.len();
    let tau = m as f64 * tau0;
    let mut sum = 0.0;
    let mut count = 0u64;
    match est {
        Estimator::Allan => {
            for i in 0..n.checked_sub(2 * m)? {
                let d = x[i + 2 * m] - 2.0 * x[i + m] + x[i];
                if !d.is_nan() {
                    sum += d * d;
                    count += 1;
                }
            }
            (count > 0).then(|| (sum / (2.0 * tau * tau * count as f64), count))
        }
        Estimator::Hadamard => {
            for i in 0..n.checked_sub(3 * m)? {
                let d = x[i + 3 * m] - 3.0 * x[i + 2 * m] + 3.0 * x[i + m] - x[i];
                if !d.is_nan() {
                    sum += d * d;
                    count += 1;
                }
            }
            (count > 0).then(|| (sum / (6.0 * tau * tau * count as f64), count))
        }
        Estimator::ModifiedAllan => {
            for j in 0..(n + 1).checked_sub(3 * m)? {
                let mut s = 0.0;
                for i in j..j + m {
                    s += x[i + 2 * m] - 2.0 * x[i + m] + x[i];
                }
                if !s.is_nan() {
                    sum += s * s;
                    count += 1;
                }
            }
            let mf = m as f64;
            (count > 0).then(|| (sum / (2.0 * mf * mf * tau * tau * count as f64), count))
        }
    }
}

const ESTIMATORS: [Estimator; 3] = [Estimator::Allan, Estimator::ModifiedAllan, Estimator::Hadamard];

/// Random data: a mean offset, white noise, a random walk and a drift, with gaps sometimes.
fn random_series(rng: &mut Rng, n: usize, gaps: bool) -> Vec<f64> {
    let offset = rng.uniform() * 10.0 - 5.0;
    let walk = rng.uniform() * 0.3;
    let drift = (rng.uniform() - 0.5) * 1e-2;
    let mut w = 0.0;
    let mut y: Vec<f64> = (0..n)
        .map(|k| {
            w += walk * rng.gaussian();
            offset + rng.gaussian() + w + drift * k as f64
        })
        .collect();
    if gaps {
        let runs = 1 + (rng.next_u64() % 4) as usize;
        for _ in 0..runs {
            let start = (rng.next_u64() % n as u64) as usize;
            let len = 1 + (rng.next_u64() % 5) as usize;
            for v in y.iter_mut().skip(start).take(len) {
                *v = f64::NAN;
            }
        }
    }
    y
}

/// Fast estimators (doubling path for power-of-two factors, prefix-sum path otherwise)
/// against the literal loops on random frequency data with and without gaps; relative
/// difference at most 1e-10.
#[test]
fn frequency_estimators_match_literal_loops() {
    let mut rng = Rng::new(11);
    for case in 0..60 {
        let n = 20 + (rng.next_u64() % 400) as usize;
        let gaps = case % 2 == 1;
        let y = random_series(&mut rng, n, gaps);
        let tau0 = 0.1 + rng.uniform() * 5.0;
        for est in ESTIMATORS {
            let max = est.max_m(n + 1);
            let mut list: Vec<u64> = (1..=max).filter(|_| rng.uniform() < 0.3).collect();
            if list.is_empty() {
                list.push(1);
            }
            for taus in [Taus::Octave, Taus::List(list)] {
                let opt = Options { taus, alpha: Some(0), ..Default::default() };
                let e = estimate(Series::Frequency(&y), tau0, est, &opt).unwrap();
                for p in &e.points {
                    let (var, count) = slow_freq(&y, est, p.m as usize).expect("slow twin has terms");
                    assert_eq!(p.terms, count, "case {case} {est:?} m {}", p.m);
                    let d = rel(p.deviation * p.deviation, var);
                    assert!(d < 1e-10, "case {case} {est:?} m {}: {} vs {} ({d:e})", p.m, p.deviation * p.deviation, var);
                    assert!(rel(p.tau_s, p.m as f64 * tau0) < 1e-15);
                }
                for &m in &e.skipped_m {
                    assert!(slow_freq(&y, est, m as usize).is_none(), "m {m} skipped but has terms");
                }
            }
        }
    }
}

/// The same for phase data (seconds), with gaps at single phase points.
#[test]
fn phase_estimators_match_literal_loops() {
    let mut rng = Rng::new(12);
    for case in 0..60 {
        let n = 20 + (rng.next_u64() % 400) as usize;
        let mut x = random_series(&mut rng, n, false);
        if case % 2 == 1 {
            for _ in 0..3 {
                let k = (rng.next_u64() % n as u64) as usize;
                x[k] = f64::NAN;
            }
        }
        let tau0 = 0.5 + rng.uniform();
        for est in ESTIMATORS {
            let max = est.max_m(n);
            let list: Vec<u64> = (1..=max).filter(|m| m % 3 == 1).collect();
            for taus in [Taus::Octave, Taus::List(list)] {
                let opt = Options { taus, alpha: Some(-1), ..Default::default() };
                let e = estimate(Series::Phase(&x), tau0, est, &opt).unwrap();
                for p in &e.points {
                    let (var, count) = slow_phase(&x, est, p.m as usize, tau0).unwrap();
                    assert_eq!(p.terms, count);
                    assert!(rel(p.deviation * p.deviation, var) < 1e-10, "case {case} {est:?} m {}", p.m);
                }
            }
        }
    }
}

/// Frequency data and the phase made from them (x_0 = 0, x_(k+1) = x_k + tau0 y_k) give the
/// same deviations (module docs; common practice).
#[test]
fn frequency_and_phase_agree() {
    let mut rng = Rng::new(13);
    let y = random_series(&mut rng, 3000, false);
    let tau0 = 2.5;
    let mut x = vec![0.0];
    for v in &y {
        x.push(x.last().unwrap() + tau0 * v);
    }
    for est in ESTIMATORS {
        let o = Options { alpha: Some(0), ..Default::default() };
        let a = estimate(Series::Frequency(&y), tau0, est, &o).unwrap();
        let b = estimate(Series::Phase(&x), tau0, est, &o).unwrap();
        assert_eq!(a.points.len(), b.points.len());
        for (p, q) in a.points.iter().zip(&b.points) {
            assert_eq!(p.terms, q.terms);
            assert!(rel(p.deviation, q.deviation) < 1e-9, "{est:?} m {}: {} {}", p.m, p.deviation, q.deviation);
        }
    }
}

/// Exact values derived by hand. Linear frequency drift y_k = c + b k: every Allan term is
/// b m, so sigma = b m / sqrt(2); the modified terms are sums of m equal second differences,
/// again b m / sqrt(2); the Hadamard third difference of the quadratic phase is 0.
/// Alternating y_k = (-1)^k: Allan sigma = sqrt(2) at m = 1, 0 at even m, sqrt(2)/m at odd m.
#[test]
fn hand_derived_values() {
    let b = 3e-12;
    let y: Vec<f64> = (0..1000).map(|k| 7e-9 + b * k as f64).collect();
    for (est, want) in [(Estimator::Allan, 1.0), (Estimator::ModifiedAllan, 1.0)] {
        let e = estimate(Series::Frequency(&y), 1.0, est, &Options { taus: Taus::All, alpha: Some(-2), ..Default::default() }).unwrap();
        for p in &e.points {
            let exact = want * b * p.m as f64 / 2f64.sqrt();
            assert!(rel(p.deviation, exact) < 1e-9, "{est:?} m {}: {} vs {}", p.m, p.deviation, exact);
        }
    }
    let e = estimate(Series::Frequency(&y), 1.0, Estimator::Hadamard, &Options::default()).unwrap();
    for p in &e.points {
        assert!(p.deviation < 1e-9 * b * p.m as f64, "Hadamard of drift m {}: {}", p.m, p.deviation);
        assert!(p.deviation.is_finite() && p.ci_low.is_finite() && p.ci_high.is_finite());
    }
    let alt: Vec<f64> = (0..999).map(|k| if k % 2 == 0 { 1.0 } else { -1.0 }).collect();
    let e = estimate(Series::Frequency(&alt), 1.0, Estimator::Allan, &Options { taus: Taus::All, alpha: Some(2), ..Default::default() }).unwrap();
    for p in &e.points {
        let exact = if p.m == 1 {
            2f64.sqrt()
        } else if p.m % 2 == 0 {
            0.0
        } else {
            2f64.sqrt() / p.m as f64
        };
        assert!((p.deviation - exact).abs() < 1e-12, "alternating m {}: {}", p.m, p.deviation);
    }
}

/// Gaps are counted (samples and runs), and a factor whose terms all touch gaps is skipped.
#[test]
fn gaps_are_counted_and_skipped() {
    let mut y = vec![1.0, 2.0, f64::NAN, f64::NAN, 3.0, 1.0, f64::NAN, 2.0, 5.0, 1.0];
    let e = estimate(Series::Frequency(&y), 1.0, Estimator::Allan, &Options { taus: Taus::All, alpha: Some(0), ..Default::default() }).unwrap();
    assert_eq!((e.gap_samples, e.gaps), (3, 2));
    // m = 2: spans of 4 samples; only y[7..11) would be clean but is out of range: skipped.
    assert!(e.skipped_m.contains(&2), "{:?}", e.skipped_m);
    assert!(e.points.iter().all(|p| p.deviation.is_finite()));
    y.iter_mut().for_each(|v| *v = f64::NAN);
    let e = estimate(Series::Frequency(&y), 1.0, Estimator::Allan, &Options::default()).unwrap();
    assert!(e.points.is_empty() && e.skipped_m == vec![1, 2, 4]);
}

// ---------------------------------------------------------------------------------------
// EDF

/// Slow twin of the EDF for processes that are linear combinations of independent unit
/// innovations: each term z_i = sum_l c_l w_(l+i), R(k) = sum_l c_l c_(l+k), and
/// EDF = M R0^2 / (R0^2 + 2 sum_(k=1..M-1) (1 - k/M) R_k^2) (the Gaussian 2E^2/Var; common
/// practice), all as literal loops.
fn edf_from_coefficients(c: &[f64], big_m: usize) -> f64 {
    let r = |k: usize| -> f64 {
        let mut s = 0.0;
        for l in 0..c.len().saturating_sub(k) {
            s += c[l] * c[l + k];
        }
        s
    };
    let r0 = r(0);
    let mut sum = 0.0;
    for k in 1..big_m.min(c.len()) {
        let rk = r(k);
        sum += (1.0 - k as f64 / big_m as f64) * rk * rk;
    }
    big_m as f64 * r0 * r0 / (r0 * r0 + 2.0 * sum)
}

/// Coefficients of one term on the innovations: white FM (y = w), white PM (x = w: second
/// or third difference of x, or for the modified variance the sum of m of them).
fn coefficients(est: Estimator, alpha: i32, m: usize) -> Vec<f64> {
    // Phase coefficients of one term on phase points.
    let mut cx = vec![0.0; 3 * m + 1];
    match est {
        Estimator::Allan => {
            cx[0] += 1.0;
            cx[m] -= 2.0;
            cx[2 * m] += 1.0;
        }
        Estimator::Hadamard => {
            cx[0] -= 1.0;
            cx[m] += 3.0;
            cx[2 * m] -= 3.0;
            cx[3 * m] += 1.0;
        }
        Estimator::ModifiedAllan => {
            for i in 0..m {
                cx[i] += 1.0;
                cx[i + m] -= 2.0;
                cx[i + 2 * m] += 1.0;
            }
        }
    }
    match alpha {
        2 => cx,
        // White FM: x_j = sum_(l<j) y_l, so the coefficient of y_l is sum_(j>l) cx_j.
        _ => (0..cx.len()).map(|l| cx[l + 1..].iter().sum()).collect(),
    }
}

/// The EDF method is exact for white FM (Allan, Hadamard) and white PM (all three): the
/// literal covariance sums agree to 1e-9, in the direct regime (m small) and in the panel
/// regime (m large), which also tests the panel quadrature.
#[test]
fn edf_matches_exact_discrete_covariances() {
    let cases: [(Estimator, i32); 5] = [(Estimator::Allan, 0), (Estimator::Hadamard, 0), (Estimator::Allan, 2), (Estimator::Hadamard, 2), (Estimator::ModifiedAllan, 2)];
    for (est, alpha) in cases {
        for &(m, big_m) in &[(1usize, 500usize), (3, 1000), (16, 100), (64, 5000), (1500, 10_000), (3000, 200_000)] {
            let c = coefficients(est, alpha, m);
            let slow = edf_from_coefficients(&c, big_m);
            let fast = edf(est, alpha, m as u64, big_m as u64).unwrap();
            let tol = if (m * 5) as u64 > 2048 { 2e-4 } else { 1e-9 };
            assert!(rel(fast, slow) < tol, "{est:?} alpha {alpha} m {m} M {big_m}: {fast} vs {slow} ({:e})", rel(fast, slow));
        }
    }
}

/// For white FM the modified variance's EDF model (continuous averaging of the phase over
/// tau) differs from the discrete average of m phase points by O(1/m): within 3 % at
/// m >= 8 and 0.5 % at m >= 64 of the literal covariance sum.
#[test]
fn modified_edf_white_fm_close_to_discrete() {
    for &(m, big_m, tol) in &[(8usize, 2000usize, 0.03), (64, 20_000, 0.005), (300, 3000, 0.005)] {
        let slow = edf_from_coefficients(&coefficients(Estimator::ModifiedAllan, 0, m), big_m);
        let fast = edf(Estimator::ModifiedAllan, 0, m as u64, big_m as u64).unwrap();
        assert!(rel(fast, slow) < tol, "m {m}: {fast} vs {slow}");
    }
}

/// The simple overlapping-Allan EDF formulas of the handbook (Proc. 35th Frequency Control Symposium, 669 (1981);
/// from memory) against the method used: white FM within 3 %, white PM within 4 %, flicker
/// and random-walk FM within 13 % for m >= 2 (the simple forms are approximations).
#[test]
fn edf_close_to_handbook_simple_formulas() {
    for &n in &[1025u64, 100_001] {
        // The simple forms are meant for many terms: m up to N/10.
        for &m in [2u64, 4, 16, 64, 300, 3000].iter().filter(|&&m| m <= n / 10) {
            let terms = n - 2 * m;
            for (alpha, tol) in [(0, 0.03), (2, 0.04), (-1, 0.13), (-2, 0.13)] {
                let ours = edf(Estimator::Allan, alpha, m, terms).unwrap();
                let simple = edf_allan_simple(alpha, m, n).unwrap();
                assert!(rel(ours, simple) < tol, "alpha {alpha} N {n} m {m}: {ours} vs {simple}");
            }
        }
    }
}

/// EDF is at least 1 and at most a few times the number of terms, finite everywhere, and the
/// panel regime joins the direct one smoothly (no jump where the method switches).
#[test]
fn edf_sane_everywhere() {
    for est in ESTIMATORS {
        for alpha in -2..=2 {
            for &m in &[1u64, 7, 100, 409, 410, 2000, 100_000, 10_000_000] {
                for &terms in &[1u64, 2, 50, 10_000, 90_000_000] {
                    let v = edf(est, alpha, m, terms).unwrap();
                    assert!(v.is_finite() && v >= 0.999 && v <= 3.0 * terms as f64, "{est:?} {alpha} m {m} M {terms}: {v}");
                }
            }
            // Around the switch at 2048 lags (support 4 tau for Allan and alpha even: m = 512).
            let a = edf(est, alpha, 511, 1_000_000).unwrap();
            let b = edf(est, alpha, 513, 1_000_000).unwrap();
            assert!(rel(a, b) < 0.02, "{est:?} alpha {alpha}: {a} vs {b}");
        }
    }
}

// ---------------------------------------------------------------------------------------
// Chi-square

/// Slow twin of P(a, x): Simpson's rule on the density t^(a-1) e^-t / Gamma(a) with the
/// substitution t = s^(1/a)... kept simple: for a >= 1 directly on [0, x] with 200000
/// intervals; compared on random (a, x).
#[test]
fn gamma_p_matches_simpson() {
    let mut rng = Rng::new(21);
    for _ in 0..40 {
        let a = 1.0 + rng.uniform() * 40.0;
        let x = rng.uniform() * 3.0 * a;
        let n = 200_000;
        let h = x / n as f64;
        let lg = libm::lgamma(a);
        let f = |t: f64| if t <= 0.0 { if a == 1.0 { 1.0 } else { 0.0 } } else { libm::exp((a - 1.0) * libm::log(t) - t - lg) };
        let mut s = f(0.0) + f(x);
        for k in 1..n {
            s += if k % 2 == 1 { 4.0 } else { 2.0 } * f(k as f64 * h);
        }
        let slow = s * h / 3.0;
        let fast = gamma_p(a, x).unwrap();
        assert!((fast - slow).abs() < 1e-9, "a {a} x {x}: {fast} vs {slow}");
    }
}

/// Known chi-square values: dof 2 is exponential, x = -2 ln(1-p); dof 1 median 0.454936
/// (from memory); dof 10 at p = 0.95 is 18.307 (from memory, printed tables); and the
/// quantile inverts the CDF to 1e-12 (times dof/1e6 above 1e6) for dof from 0.1 to 1e8.
#[test]
fn chi2_known_values_and_inversion() {
    for &p in &[1e-9, 0.01, 0.1585, 0.5, 0.8415, 0.99, 1.0 - 1e-9] {
        let x = chi2_quantile(p, 2.0).unwrap();
        assert!(rel(x, -2.0 * libm::log1p(-p)) < 1e-12, "p {p}: {x}");
    }
    assert!(rel(chi2_quantile(0.5, 1.0).unwrap(), 0.454_936) < 1e-6);
    assert!(rel(chi2_quantile(0.95, 10.0).unwrap(), 18.307) < 1e-4);
    let mut rng = Rng::new(22);
    for _ in 0..300 {
        let dof = libm::exp(libm::log(0.1) + rng.uniform() * (libm::log(1e8) - libm::log(0.1)));
        let p = 1e-6 + rng.uniform() * (1.0 - 2e-6);
        let x = chi2_quantile(p, dof).unwrap();
        let back = chi2_cdf(x, dof).unwrap();
        // The CDF's own rounding grows like sqrt(dof) eps above dof ~ 1e6 (the quantile x is
        // still accurate to ~1e-15 relative there, the density being tiny).
        let tol = 1e-12 * (dof / 1e6).max(1.0);
        assert!(x > 0.0 && x.is_finite() && (back - p).abs() < tol, "dof {dof} p {p}: x {x} back {back}");
    }
}

// ---------------------------------------------------------------------------------------
// Confidence intervals and noise identification on synthesised data

/// Over many synthetic runs the 68.3 % interval contains the true deviation (the exact
/// expectation of the discrete process, `synthesis::expected_variance`) about 68.3 % of the
/// time: within +-0.05 (more than 3 binomial standard deviations for 700 runs) where the EDF
/// model is exact (white FM, white PM), within +-0.08 for the other laws, whose EDF model is
/// the continuous-time one (up to ~20 % from the discrete process; module docs).
#[test]
fn confidence_intervals_cover_at_the_stated_rate() {
    let runs = 700u64;
    let n = 1024u64;
    for alpha in [0, 2, -1, 1, -2] {
        for est in ESTIMATORS {
            let ms = [2u64, 8, 32];
            let truth: Vec<f64> = ms.iter().map(|&m| libm::sqrt(expected_variance(est, &[PowerLaw { alpha, h: 1.0 }], 1.0, m).unwrap())).collect();
            let mut inside = [0u64; 3];
            for r in 0..runs {
                let y = synthesize(&Spec { tau0_s: 1.0, points: n, seed: 90_000 + r, terms: vec![PowerLaw { alpha, h: 1.0 }] }).unwrap();
                let e = estimate(Series::Frequency(&y), 1.0, est, &Options { taus: Taus::List(ms.to_vec()), alpha: Some(alpha), ..Default::default() }).unwrap();
                for (k, p) in e.points.iter().enumerate() {
                    if p.ci_low <= truth[k] && truth[k] <= p.ci_high {
                        inside[k] += 1;
                    }
                }
            }
            let tol = if alpha == 0 || alpha == 2 { 0.05 } else { 0.08 };
            for (k, &m) in ms.iter().enumerate() {
                let rate = inside[k] as f64 / runs as f64;
                assert!((rate - 0.683).abs() < tol, "alpha {alpha} {est:?} m {m}: coverage {rate}");
            }
        }
    }
}

/// A 95 % interval, selectable: wider than the 68.3 % one and covering about 95 % (white FM).
#[test]
fn selectable_confidence() {
    let runs = 500u64;
    let mut inside = 0;
    for r in 0..runs {
        let y = synthesize(&Spec { tau0_s: 1.0, points: 512, seed: 5000 + r, terms: vec![PowerLaw { alpha: 0, h: 2.0 }] }).unwrap();
        let o95 = Options { taus: Taus::List(vec![4]), alpha: Some(0), confidence: 0.95 };
        let o68 = Options { confidence: 0.683, ..o95.clone() };
        let a = &estimate(Series::Frequency(&y), 1.0, Estimator::Allan, &o95).unwrap().points[0];
        let b = &estimate(Series::Frequency(&y), 1.0, Estimator::Allan, &o68).unwrap().points[0];
        assert!(a.ci_low < b.ci_low && a.ci_high > b.ci_high);
        let truth = libm::sqrt(1.0 / 4.0); // h0 / (2 tau) with h0 = 2, tau = 4
        if a.ci_low <= truth && truth <= a.ci_high {
            inside += 1;
        }
    }
    let rate = inside as f64 / runs as f64;
    assert!((rate - 0.95).abs() < 0.03, "coverage {rate}");
}

/// The lag-1 autocorrelation identification (Proc. 18th European Frequency and Time Forum (2004)) finds each power law
/// in synthesised frequency data and in the phase made from it, at m = 1 and 4.
#[test]
fn noise_identification_finds_each_law() {
    for alpha in -2..=2 {
        for seed in 0..3u64 {
            let y = synthesize(&Spec { tau0_s: 1.0, points: 1 << 14, seed: 300 + seed, terms: vec![PowerLaw { alpha, h: 1.0 }] }).unwrap();
            let mut x = vec![0.0];
            for v in &y {
                x.push(x.last().unwrap() + v);
            }
            for m in [1u64, 4] {
                let a = identify_noise(Series::Frequency(&y), m).unwrap().unwrap();
                let b = identify_noise(Series::Phase(&x), m).unwrap().unwrap();
                assert_eq!(a.alpha, alpha, "frequency, alpha {alpha} seed {seed} m {m}: {a:?}");
                assert_eq!(b.alpha, alpha, "phase, alpha {alpha} seed {seed} m {m}: {b:?}");
            }
        }
    }
    // Too few averaged points: None; estimate then uses the largest m/2^k that works.
    let y = synthesize(&Spec { tau0_s: 1.0, points: 200, seed: 1, terms: vec![PowerLaw { alpha: -2, h: 1.0 }] }).unwrap();
    assert_eq!(identify_noise(Series::Frequency(&y), 8).unwrap(), None);
    let e = estimate(Series::Frequency(&y), 1.0, Estimator::Allan, &Options::default()).unwrap();
    for p in &e.points {
        assert_eq!(p.alpha_source, AlphaSource::Identified);
        assert!(p.alpha_m <= p.m && 200 / p.alpha_m as usize >= MIN_ID_POINTS);
    }
    // Constant data: nothing to identify; white FM assumed, deviation 0, no NaN.
    let c = vec![1.0; 100];
    let e = estimate(Series::Frequency(&c), 1.0, Estimator::Hadamard, &Options::default()).unwrap();
    assert!(e.points.iter().all(|p| p.alpha_source == AlphaSource::Default && p.deviation == 0.0 && p.ci_high == 0.0));
}

// ---------------------------------------------------------------------------------------
// Input errors: clear, located, never a panic or NaN.

#[test]
fn bad_input_gives_located_errors() {
    let y = vec![1.0; 100];
    let o = Options::default();
    let err = |r: Result<Estimate, clockwright_core::InputError>| r.unwrap_err().problems[0].clone();
    let p = err(estimate(Series::Frequency(&y[..1]), 1.0, Estimator::Allan, &o));
    assert_eq!(p.path, "frequency");
    assert!(p.allowed.contains("at least 2"));
    let p = err(estimate(Series::Phase(&y[..3]), 1.0, Estimator::Hadamard, &o));
    assert!(p.allowed.contains("at least 4"));
    let mut bad = y.clone();
    bad[17] = f64::INFINITY;
    let p = err(estimate(Series::Frequency(&bad), 1.0, Estimator::Allan, &o));
    assert_eq!((p.path.as_str(), p.value.as_str()), ("frequency[17]", "infinity"));
    assert_eq!(err(estimate(Series::Frequency(&y), 0.0, Estimator::Allan, &o)).path, "tau0_s");
    assert_eq!(err(estimate(Series::Frequency(&y), f64::NAN, Estimator::Allan, &o)).path, "tau0_s");
    let o2 = Options { confidence: 1.0, ..Default::default() };
    assert_eq!(err(estimate(Series::Frequency(&y), 1.0, Estimator::Allan, &o2)).path, "confidence");
    let o3 = Options { alpha: Some(3), ..Default::default() };
    assert_eq!(err(estimate(Series::Frequency(&y), 1.0, Estimator::Allan, &o3)).path, "alpha");
    let o4 = Options { taus: Taus::List(vec![1, 4, 4]), ..Default::default() };
    assert_eq!(err(estimate(Series::Frequency(&y), 1.0, Estimator::Allan, &o4)).path, "taus.list[2]");
    let o5 = Options { taus: Taus::List(vec![51]), ..Default::default() };
    let p = err(estimate(Series::Frequency(&y), 1.0, Estimator::Allan, &o5));
    assert_eq!(p.path, "taus.list[0]");
    assert!(p.allowed.contains("from 1 to 50"));
    let long = vec![0.0; 2 * MAX_TAUS + 10];
    assert_eq!(err(estimate(Series::Frequency(&long), 1.0, Estimator::Allan, &Options { taus: Taus::All, ..Default::default() })).path, "taus");
    assert!(chi2_quantile(0.0, 3.0).is_err() && chi2_quantile(0.5, 0.0).is_err() && chi2_quantile(f64::NAN, 3.0).is_err());
    assert!(edf(Estimator::Allan, -3, 1, 10).is_err() && edf(Estimator::Allan, 0, 0, 10).is_err());
    assert!(identify_noise(Series::Frequency(&y), 0).is_err());
    let json_err = serde_json::from_str::<Options>(r#"{"taus":"weekly"}"#);
    assert!(json_err.is_err());
}

/// Random inputs with gaps, offsets and every estimator and tau choice: always finite
/// numbers, ordered intervals (containing the estimate when the confidence is at least 0.5;
/// a narrow interval around the chi-square median need not), and terms never above the
/// gap-free count.
#[test]
fn never_nan_on_random_input() {
    let mut rng = Rng::new(31);
    for case in 0..200 {
        let n = 2 + (rng.next_u64() % 200) as usize;
        let mut y = random_series(&mut rng, n, case % 3 == 0);
        if case % 7 == 0 {
            y.iter_mut().for_each(|v| *v *= 1e-90);
        }
        for est in ESTIMATORS {
            for taus in [Taus::Octave, Taus::All] {
                let o = Options { taus, confidence: 0.01 + 0.98 * rng.uniform(), alpha: None };
                let r = if case % 2 == 0 { estimate(Series::Frequency(&y), 1.0, est, &o) } else { estimate(Series::Phase(&y), 1.0, est, &o) };
                let Ok(e) = r else { continue };
                let n_phase = if case % 2 == 0 { n + 1 } else { n };
                for p in &e.points {
                    assert!(p.deviation.is_finite() && p.edf.is_finite() && p.ci_low.is_finite() && p.ci_high.is_finite(), "case {case}: {p:?}");
                    assert!(p.ci_low <= p.ci_high, "case {case}: {p:?}");
                    if o.confidence >= 0.5 {
                        assert!(p.ci_low <= p.deviation && p.deviation <= p.ci_high, "case {case}: {p:?}");
                    }
                    assert!(p.terms >= 1 && p.terms <= est.terms(n_phase, p.m));
                }
            }
        }
    }
}
