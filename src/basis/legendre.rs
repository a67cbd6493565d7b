//! Normalized associated Legendre functions (the θ part of the rotor basis functions).

/// Normalized associated Legendre functions Θ_J^m(x) for J = m..=j_max at one x, with
/// ∫_{-1}^{1} Θ_J^m Θ_J'^m dx = δ_JJ' (so Y_J^m = Θ_J^m e^{imφ} / √(2π), Condon–Shortley phase omitted).
/// Returns a vector indexed by J − m.
pub fn theta_normalized(m: u32, j_max: u32, x: f64) -> Vec<f64> {
    let mut out = Vec::with_capacity((j_max + 1 - m) as usize);
    let mf = m as f64;
    // Θ_m^m = sqrt((2m+1)/2 · Π_{k=1..m} (2k−1)/(2k)) (1 − x²)^{m/2}
    let s2 = (1.0 - x * x).max(0.0);
    let mut pmm = (0.5f64).sqrt();
    for k in 1..=m {
        let kf = k as f64;
        pmm *= ((2.0 * kf + 1.0) / (2.0 * kf)).sqrt() * s2.sqrt();
    }
    // Now pmm = sqrt((2m+1)/2) ... : build by the product above (each factor sqrt((2k+1)/(2k))).
    out.push(pmm);
    if j_max == m {
        return out;
    }
    let p1 = x * (2.0 * mf + 3.0).sqrt() * pmm;
    out.push(p1);
    for j in (m + 2)..=j_max {
        let jf = j as f64;
        let a = ((4.0 * jf * jf - 1.0) / (jf * jf - mf * mf)).sqrt();
        let jm1 = jf - 1.0;
        let b = ((jm1 * jm1 - mf * mf) / (4.0 * jm1 * jm1 - 1.0)).sqrt();
        let n = out.len();
        let v = a * (x * out[n - 1] - b * out[n - 2]);
        out.push(v);
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::quadrature::gauss_legendre;

    #[test]
    fn legendre_orthonormal_and_tabulated() {
        // Orthonormality ∫_{−1}^{1} Θ_a Θ_b dx = δ_ab on [-1,1] (the definition of the normalized functions),
        // checked by Gauss–Legendre quadrature that is exact for these polynomial integrands.
        let (x, w) = gauss_legendre(40, -1.0, 1.0);
        for m in [0u32, 1, 3, 7] {
            let vals: Vec<Vec<f64>> = x.iter().map(|&xi| theta_normalized(m, m + 20, xi)).collect();
            for a in 0..=20usize {
                for b in 0..=20usize {
                    let s: f64 = (0..x.len()).map(|q| w[q] * vals[q][a] * vals[q][b]).sum();
                    let want = if a == b { 1.0 } else { 0.0 };
                    assert!((s - want).abs() < 1e-12, "m={m} a={a} b={b} s={s}");
                }
            }
        }
        // Closed forms (Abramowitz & Stegun ch. 8 and 22; common practice): P_2(x) = (3x²−1)/2,
        // normalization sqrt((2l+1)/2) = sqrt(5/2); P_2^1 = 3x sqrt(1−x²) (sign convention aside),
        // normalization sqrt((2l+1)/2 · (l−m)!/(l+m)!) = sqrt(5/2 · 1/6).
        let x0: f64 = 0.3;
        let t0 = theta_normalized(0, 2, x0);
        assert!((t0[2] - (2.5f64).sqrt() * (3.0 * x0 * x0 - 1.0) / 2.0).abs() < 1e-14);
        let t1 = theta_normalized(1, 2, x0);
        let want = (2.5f64 / 6.0).sqrt() * 3.0 * x0 * (1.0 - x0 * x0).sqrt();
        assert!((t1[1].abs() - want).abs() < 1e-14);
    }
}
