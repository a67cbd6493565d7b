//! Quadrature rules on an interval: Gauss–Legendre nodes and weights, composite Simpson's rule. Used by
//! the basis (matrix elements), the field model (pulse areas) and the optics (focal averages).

/// Gauss–Legendre nodes and weights on [a, b] with `n` points (exact for polynomials of degree 2n−1).
pub fn gauss_legendre(n: usize, a: f64, b: f64) -> (Vec<f64>, Vec<f64>) {
    let mut x = vec![0.0; n];
    let mut w = vec![0.0; n];
    let half = 0.5 * (b - a);
    let mid = 0.5 * (b + a);
    for i in 0..n.div_ceil(2) {
        // Initial guess (Tricomi), then Newton on P_n.
        let mut z = (std::f64::consts::PI * (i as f64 + 0.75) / (n as f64 + 0.5)).cos();
        let mut dp = 1.0;
        for _ in 0..100 {
            let (mut p0, mut p1) = (1.0, z);
            if n == 0 {
                break;
            }
            if n == 1 {
                p1 = z;
                p0 = 1.0;
            } else {
                for k in 2..=n {
                    let p2 = ((2 * k - 1) as f64 * z * p1 - (k - 1) as f64 * p0) / k as f64;
                    p0 = p1;
                    p1 = p2;
                }
            }
            // p1 = P_n(z), p0 = P_{n-1}(z)
            dp = n as f64 * (z * p1 - p0) / (z * z - 1.0);
            let dz = p1 / dp;
            z -= dz;
            if dz.abs() < 1e-16 {
                break;
            }
        }
        let wi = 2.0 / ((1.0 - z * z) * dp * dp);
        x[i] = mid - half * z;
        x[n - 1 - i] = mid + half * z;
        w[i] = half * wi;
        w[n - 1 - i] = half * wi;
    }
    (x, w)
}

/// Composite Simpson rule for ∫_a^b f(t) dt with `n` (made even) intervals.
pub fn simpson(a: f64, b: f64, n: usize, f: impl Fn(f64) -> f64) -> f64 {
    let (x, w) = simpson_grid(a, b, n);
    x.iter().zip(&w).map(|(&x, &w)| w * f(x)).sum()
}

/// Nodes and weights of composite Simpson's rule on [a, b] with `n` intervals (rounded up to even).
pub fn simpson_grid(a: f64, b: f64, n: usize) -> (Vec<f64>, Vec<f64>) {
    let n = n.max(2) + n % 2;
    let h = (b - a) / n as f64;
    let x = (0..=n).map(|i| a + i as f64 * h).collect();
    let w = (0..=n)
        .map(|i| {
            h / 3.0
                * if i == 0 || i == n {
                    1.0
                } else if i % 2 == 1 {
                    4.0
                } else {
                    2.0
                }
        })
        .collect();
    (x, w)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn gauss_legendre_integrates_polynomials_exactly() {
        // ∫_0^1 x^k dx = 1/(k+1) (exact calculus); n points are exact up to degree 2n−1.
        let (x, w) = gauss_legendre(6, 0.0, 1.0);
        for k in 0..12 {
            let q: f64 = x.iter().zip(&w).map(|(xi, wi)| wi * xi.powi(k)).sum();
            assert!((q - 1.0 / (k as f64 + 1.0)).abs() < 1e-14, "k={k}");
        }
    }

    #[test]
    fn simpson_is_exact_for_cubics() {
        // Simpson's rule integrates cubics exactly (its error term is ∝ f⁗, which vanishes; common practice,
        // Abramowitz & Stegun §25.4): ∫_0^2 (t³ − t) dt = 16/4 − 4/2 = 2.
        let v = simpson(0.0, 2.0, 4, |t| t * t * t - t);
        assert!((v - 2.0).abs() < 1e-14);
    }
}
