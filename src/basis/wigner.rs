//! Angular-momentum coupling functions: Wigner 3j symbols (Racah's formula) and Wigner small-d
//! functions d^j_{m'm}(β) (three-term recursion in j), for integer angular momenta.

use std::sync::OnceLock;

/// Largest argument of the log-factorial table (3j symbols need (j1 + j2 + j3 + 1)!).
const LN_FACT_MAX: usize = 4096;

fn ln_factorials() -> &'static [f64] {
    static TABLE: OnceLock<Vec<f64>> = OnceLock::new();
    TABLE.get_or_init(|| {
        let mut t = vec![0.0; LN_FACT_MAX + 1];
        for n in 1..=LN_FACT_MAX {
            t[n] = t[n - 1] + (n as f64).ln();
        }
        t
    })
}

/// ln(n!) for 0 ≤ n ≤ 4096.
fn ln_fact(n: i64) -> f64 {
    ln_factorials()[n as usize]
}

/// Wigner 3j symbol (j1 j2 j3; m1 m2 m3) for integer arguments, by Racah's single-sum formula
/// (Edmonds, "Angular Momentum in Quantum Mechanics", eq. 3.7.3) with terms in log space. When one j is
/// small (as for the rank-1 and rank-2 operators here) the sum has at most 2 j_small + 1 terms, so
/// there is no large cancellation.
pub fn three_j(j1: i64, j2: i64, j3: i64, m1: i64, m2: i64, m3: i64) -> f64 {
    if m1 + m2 + m3 != 0 || j1 < 0 || j2 < 0 || j3 < 0 {
        return 0.0;
    }
    if m1.abs() > j1 || m2.abs() > j2 || m3.abs() > j3 {
        return 0.0;
    }
    if j3 > j1 + j2 || j3 < (j1 - j2).abs() {
        return 0.0;
    }
    debug_assert!(((j1 + j2 + j3 + 1) as usize) <= LN_FACT_MAX, "3j arguments too large");
    let ln_delta = ln_fact(j1 + j2 - j3) + ln_fact(j1 - j2 + j3) + ln_fact(-j1 + j2 + j3) - ln_fact(j1 + j2 + j3 + 1);
    let ln_pre = 0.5 * (ln_delta + ln_fact(j1 + m1) + ln_fact(j1 - m1) + ln_fact(j2 + m2) + ln_fact(j2 - m2) + ln_fact(j3 + m3) + ln_fact(j3 - m3));
    let t_min = 0.max(j2 - j3 - m1).max(j1 - j3 + m2);
    let t_max = (j1 + j2 - j3).min(j1 - m1).min(j2 + m2);
    let mut sum = 0.0;
    for t in t_min..=t_max {
        let ln_den =
            ln_fact(t) + ln_fact(j3 - j2 + t + m1) + ln_fact(j3 - j1 + t - m2) + ln_fact(j1 + j2 - j3 - t) + ln_fact(j1 - t - m1) + ln_fact(j2 - t + m2);
        let term = (ln_pre - ln_den).exp();
        sum += if t % 2 == 0 { term } else { -term };
    }
    let phase = j1 - j2 - m3;
    if phase.rem_euclid(2) == 0 { sum } else { -sum }
}

/// Wigner small-d functions d^j_{m'm}(β) for j = 0..=j_max (zero where j < max(|m'|, |m|)), by the
/// upward three-term recursion in j (stable for fixed m', m), started from the closed form at
/// j = max(|m'|, |m|). Convention: D^j_{m'm}(α, β, γ) = e^{−i m' α} d^j_{m'm}(β) e^{−i m γ} (Wigner, Edmonds).
pub fn small_d_series(mp: i64, m: i64, beta: f64, j_max: i64) -> Vec<f64> {
    let mut out = vec![0.0; (j_max.max(0) + 1) as usize];
    let j0 = mp.abs().max(m.abs());
    if j0 > j_max {
        return out;
    }
    out[j0 as usize] = small_d_lowest(mp, m, beta);
    let x = beta.cos();
    let (mf, mpf) = (m as f64, mp as f64);
    for j in (j0 + 1)..=j_max {
        let jf = j as f64;
        let prev = out[(j - 1) as usize];
        let prev2 = if j >= j0 + 2 { out[(j - 2) as usize] } else { 0.0 };
        // d^j = j(2j−1)/sqrt((j²−m²)(j²−m'²)) · [(cosβ − m m'/(j(j−1))) d^{j−1}
        //       − sqrt(((j−1)²−m²)((j−1)²−m'²)) / ((j−1)(2j−1)) d^{j−2}]
        // (Blanco, Flórez & Bermejo, J. Mol. Struct. THEOCHEM 419, 19 (1997)); at j = 1 only m = m' = 0 occurs.
        let a = ((jf * jf - mf * mf) * (jf * jf - mpf * mpf)).sqrt();
        let first = if j == 1 { x * prev } else { (x - mf * mpf / (jf * (jf - 1.0))) * prev };
        let second = if j >= 2 {
            let b = (((jf - 1.0).powi(2) - mf * mf) * ((jf - 1.0).powi(2) - mpf * mpf)).sqrt();
            b / ((jf - 1.0) * (2.0 * jf - 1.0)) * prev2
        } else {
            0.0
        };
        out[j as usize] = jf * (2.0 * jf - 1.0) / a * (first - second);
    }
    out
}

/// d^j_{m'm}(β) at the lowest j = max(|m'|, |m|), in closed form.
fn small_d_lowest(mp: i64, m: i64, beta: f64) -> f64 {
    let (c, s) = ((0.5 * beta).cos(), (0.5 * beta).sin());
    if mp.abs() >= m.abs() {
        let j = mp.abs();
        let norm = (0.5 * (ln_fact(2 * j) - ln_fact(j + m) - ln_fact(j - m))).exp();
        if mp >= 0 {
            // d^j_{jm} = sqrt((2j)!/((j+m)!(j−m)!)) cos^{j+m}(β/2) (−sin(β/2))^{j−m}
            norm * c.powi((j + m) as i32) * (-s).powi((j - m) as i32)
        } else {
            // d^j_{−j,m} = sqrt((2j)!/((j+m)!(j−m)!)) cos^{j−m}(β/2) sin^{j+m}(β/2)
            norm * c.powi((j - m) as i32) * s.powi((j + m) as i32)
        }
    } else {
        // d^j_{m'm} = (−1)^{m'−m} d^j_{m m'}.
        let v = small_d_lowest(m, mp, beta);
        if (mp - m).rem_euclid(2) == 0 { v } else { -v }
    }
}

/// d^j_{m'm}(β) from Wigner's explicit sum (Edmonds eq. 4.1.23). Exact but loses accuracy for large j
/// through cancellation; kept as the independent reference for tests (j ≲ 15).
pub fn small_d_explicit(j: i64, mp: i64, m: i64, beta: f64) -> f64 {
    if mp.abs() > j || m.abs() > j {
        return 0.0;
    }
    let (c, s) = ((0.5 * beta).cos(), (0.5 * beta).sin());
    let f = |n: i64| ln_fact(n).exp();
    let pre = (f(j + mp) * f(j - mp) * f(j + m) * f(j - m)).sqrt();
    let mut sum = 0.0;
    for k in 0..=(2 * j) {
        let (a, b, cc, d) = (j + m - k, k, mp - m + k, j - mp - k);
        if a < 0 || cc < 0 || d < 0 {
            continue;
        }
        let sign = if (mp - m + k).rem_euclid(2) == 0 { 1.0 } else { -1.0 };
        sum += sign * c.powi((2 * j + m - mp - 2 * k) as i32) * s.powi((mp - m + 2 * k) as i32) / (f(a) * f(b) * f(cc) * f(d));
    }
    pre * sum
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn three_j_table_values() {
        // Exact values from the closed forms of Edmonds 1957: (j1 j2 j3; 0 0 0) = (−1)^g
        // sqrt[(2g−2j1)!(2g−2j2)!(2g−2j3)!/(2g+1)!] g!/[(g−j1)!(g−j2)!(g−j3)!], 2g = j1+j2+j3 (eq. 3.7.17),
        // and (j j 0; m −m 0) = (−1)^{j−m}/sqrt(2j+1) (eq. 3.7.9):
        // (1 1 0; 0 0 0) = −1/√3, (1 1 2; 0 0 0) = √(2/15), (2 2 2; 0 0 0) = −√(2/35),
        // (2 2 0; 2 −2 0) = 1/√5, (3 2 1; 0 0 0) = −√(3/35); and (1 1 2; 1 −1 0) = √(1/30) (from memory).
        // All six values were also recomputed with SymPy's sympy.physics.wigner.wigner_3j (SymPy 1.14).
        let cases = [
            ((1, 1, 0, 0, 0, 0), -1.0 / 3f64.sqrt()),
            ((1, 1, 2, 0, 0, 0), (2.0 / 15.0f64).sqrt()),
            ((2, 2, 2, 0, 0, 0), -(2.0 / 35.0f64).sqrt()),
            ((1, 1, 2, 1, -1, 0), (1.0 / 30.0f64).sqrt()),
            ((2, 2, 0, 2, -2, 0), 1.0 / 5f64.sqrt()),
            ((3, 2, 1, 0, 0, 0), -(3.0 / 35.0f64).sqrt()),
        ];
        for ((a, b, c, d, e, f), want) in cases {
            let got = three_j(a, b, c, d, e, f);
            assert!((got - want).abs() < 1e-14, "({a} {b} {c}; {d} {e} {f}) = {got}, want {want}");
        }
    }

    #[test]
    fn three_j_orthogonality() {
        // Σ_{m1 m2} (j1 j2 j3; m1 m2 m3)(j1 j2 j3'; m1 m2 m3') = δ δ / (2 j3 + 1) (Edmonds eq. 3.7.8), with large j1.
        for (j1, j2) in [(40i64, 2i64), (75, 1), (120, 2)] {
            for j3 in (j1 - j2)..=(j1 + j2) {
                for j3p in (j1 - j2)..=(j1 + j2) {
                    let m3 = 1;
                    let mut s = 0.0;
                    for m1 in -j1..=j1 {
                        let m2 = -m1 - m3;
                        s += three_j(j1, j2, j3, m1, m2, m3) * three_j(j1, j2, j3p, m1, m2, m3);
                    }
                    let want = if j3 == j3p { 1.0 / (2 * j3 + 1) as f64 } else { 0.0 };
                    assert!((s - want).abs() < 1e-13, "j1={j1} j2={j2} j3={j3} j3'={j3p}: {s}");
                }
            }
        }
    }

    #[test]
    fn small_d_recursion_matches_explicit_sum() {
        // Recursion against Wigner's explicit formula (Edmonds eq. 4.1.23) for j ≤ 12.
        for beta in [0.0, 0.3, 1.1, std::f64::consts::FRAC_PI_2, 2.7, std::f64::consts::PI] {
            for mp in -5i64..=5 {
                for m in -5i64..=5 {
                    let rec = small_d_series(mp, m, beta, 12);
                    for j in 0..=12 {
                        let want = small_d_explicit(j, mp, m, beta);
                        assert!((rec[j as usize] - want).abs() < 1e-12, "j={j} m'={mp} m={m} β={beta}: {} vs {want}", rec[j as usize]);
                    }
                }
            }
        }
        // Textbook special cases: d^1_{00} = cosβ, d^1_{10} = −sinβ/√2, d^2_{02} = √(3/8) sin²β (Edmonds Table 4.1).
        let b = 0.77f64;
        assert!((small_d_explicit(1, 0, 0, b) - b.cos()).abs() < 1e-15);
        assert!((small_d_explicit(1, 1, 0, b) + b.sin() / 2f64.sqrt()).abs() < 1e-15);
        assert!((small_d_explicit(2, 0, 2, b) - (3.0f64 / 8.0).sqrt() * b.sin().powi(2)).abs() < 1e-15);
    }

    #[test]
    fn small_d_stays_unitary_at_large_j() {
        // Σ_{m} d^j_{m'm}(β)² = 1 (unitarity of the rotation matrix), checked at j = 80 where the
        // explicit sum is useless.
        let j = 80i64;
        let beta = 1.234;
        for mp in [0i64, 3, 40, 80] {
            let s: f64 = (-j..=j).map(|m| small_d_series(mp, m, beta, j)[j as usize].powi(2)).sum();
            assert!((s - 1.0).abs() < 1e-11, "m'={mp}: {s}");
        }
    }
}
