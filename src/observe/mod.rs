//! Observables and traces. After the last field interaction, expectation values follow exactly from
//! the density matrix by sums over coherences: ⟨O⟩(t) = Σ_nm ρ_nm O_mn exp(−i(ω_n − ω_m)(t − t0)).

use crate::propagate::BlockOps;
use nalgebra::DMatrix;

/// Coefficients for the fast field-free evaluation of ⟨cos²θ⟩ and ⟨|cosθ|⟩ in one block.
#[derive(Debug, Clone)]
pub struct CoherenceSums {
    /// Time at which ρ was taken, ps.
    pub t0_ps: f64,
    lo: usize,
    omega: Vec<f64>,
    /// Σ_n ρ_nn cos²_nn (also the exact time average of ⟨cos²θ⟩).
    pub cos2_static: f64,
    cos2_re: Vec<f64>,
    cos2_im: Vec<f64>,
    /// Σ_n ρ_nn |cos|_nn (the exact time average of ⟨cos²θ_2D⟩).
    pub abscos_static: f64,
    /// Upper triangle (row-major, n < m) of ρ_nm |cos|_mn, real and imaginary parts.
    abs_re: Vec<f64>,
    abs_im: Vec<f64>,
    with_2d: bool,
}

/// Populations below this are treated as empty when trimming the coherence sums.
const TRIM_POPULATION: f64 = 1e-22;

impl CoherenceSums {
    /// Prepare the sums from ρ = (re, im) at time t0 (ps); `with_2d` also prepares ⟨|cosθ|⟩.
    pub fn new(ops: &BlockOps, rho_re: &DMatrix<f64>, rho_im: &DMatrix<f64>, t0_ps: f64, with_2d: bool) -> CoherenceSums {
        let n = ops.size();
        let lo = (0..n).find(|&i| rho_re[(i, i)] > TRIM_POPULATION).unwrap_or(0);
        let hi = (0..n).rev().find(|&i| rho_re[(i, i)] > TRIM_POPULATION).map(|i| i + 1).unwrap_or(0).max(lo);
        let omega: Vec<f64> = ops.omega[lo..hi].to_vec();
        let m = hi - lo;
        let mut cos2_static = 0.0;
        let mut cos2_re = vec![0.0; m.saturating_sub(1)];
        let mut cos2_im = vec![0.0; m.saturating_sub(1)];
        for a in 0..m {
            let i = a + lo;
            cos2_static += rho_re[(i, i)] * ops.cos2_diag[i];
            if a + 1 < m {
                cos2_re[a] = rho_re[(i, i + 1)] * ops.cos2_off[i];
                cos2_im[a] = rho_im[(i, i + 1)] * ops.cos2_off[i];
            }
        }
        let (mut abscos_static, mut abs_re, mut abs_im) = (0.0, vec![], vec![]);
        if with_2d {
            let o = ops.abscos.as_ref().expect("|cosθ| matrix built for 2D observables");
            for a in 0..m {
                let i = a + lo;
                abscos_static += rho_re[(i, i)] * o[(i, i)];
                for b in (a + 1)..m {
                    let j = b + lo;
                    abs_re.push(rho_re[(i, j)] * o[(i, j)]);
                    abs_im.push(rho_im[(i, j)] * o[(i, j)]);
                }
            }
        }
        CoherenceSums { t0_ps, lo, omega, cos2_static, cos2_re, cos2_im, abscos_static, abs_re, abs_im, with_2d }
    }

    /// Index of the first basis state kept in the sums.
    pub fn first_index(&self) -> usize {
        self.lo
    }

    /// (⟨cos²θ⟩, ⟨|cosθ|⟩) of this block at time t (ps); the second is 0 without 2D preparation.
    pub fn eval(&self, t_ps: f64) -> (f64, f64) {
        let (mut zr, mut zi) = (vec![], vec![]);
        self.phases(t_ps, &mut zr, &mut zi);
        self.eval_with(&zr, &zi)
    }

    /// Values at many times. On a uniform grid the phases advance by one complex multiplication per
    /// level and step (re-synchronized with direct evaluation every 64 steps), instead of a sine and
    /// cosine each.
    pub fn eval_series(&self, times_ps: &[f64], mut out: impl FnMut(usize, (f64, f64))) {
        let (mut zr, mut zi) = (vec![], vec![]);
        let n = times_ps.len();
        let uniform = n > 2 && {
            let d = times_ps[1] - times_ps[0];
            times_ps.windows(2).all(|w| ((w[1] - w[0]) - d).abs() <= 1e-9 * d.abs().max(1e-12))
        };
        if !uniform {
            for (i, &t) in times_ps.iter().enumerate() {
                self.phases(t, &mut zr, &mut zi);
                out(i, self.eval_with(&zr, &zi));
            }
            return;
        }
        let dt = (times_ps[n - 1] - times_ps[0]) / (n - 1) as f64;
        let (mut rr, mut ri) = (vec![], vec![]);
        self.phases(self.t0_ps + dt, &mut rr, &mut ri);
        for i in 0..n {
            if i % 64 == 0 {
                self.phases(times_ps[0] + i as f64 * dt, &mut zr, &mut zi);
            } else {
                for k in 0..zr.len() {
                    let (a, b) = (zr[k], zi[k]);
                    zr[k] = a * rr[k] - b * ri[k];
                    zi[k] = a * ri[k] + b * rr[k];
                }
            }
            out(i, self.eval_with(&zr, &zi));
        }
    }

    /// Exact mean of (⟨cos²θ⟩, ⟨|cosθ|⟩) over [a, b] (ps), from ∫ exp(−iΔω t) dt in closed form.
    pub fn mean_over(&self, a_ps: f64, b_ps: f64) -> (f64, f64) {
        let len = b_ps - a_ps;
        if len <= 0.0 {
            return self.eval(a_ps);
        }
        let (ta, tb) = (a_ps - self.t0_ps, b_ps - self.t0_ps);
        // (1/L) ∫_a^b exp(−iΔ t) dt = (exp(−iΔ tb) − exp(−iΔ ta)) / (−iΔ L)
        let avg = |d: f64| -> (f64, f64) {
            if (d * len).abs() < 1e-9 {
                let (s, c) = (-d * 0.5 * (ta + tb)).sin_cos();
                return (c, s);
            }
            let (sb, cb) = (-d * tb).sin_cos();
            let (sa, ca) = (-d * ta).sin_cos();
            let (nr, ni) = (cb - ca, sb - sa);
            // (nr + i ni) / (−i d L) = (−ni + i nr) / (d L)
            (-ni / (d * len), nr / (d * len))
        };
        let m = self.omega.len();
        let mut cos2 = self.cos2_static;
        for a in 0..m.saturating_sub(1) {
            let (pr, pi) = avg(self.omega[a] - self.omega[a + 1]);
            cos2 += 2.0 * (self.cos2_re[a] * pr - self.cos2_im[a] * pi);
        }
        let mut abscos = 0.0;
        if self.with_2d {
            abscos = self.abscos_static;
            let mut idx = 0;
            for a in 0..m {
                for b in (a + 1)..m {
                    let (pr, pi) = avg(self.omega[a] - self.omega[b]);
                    abscos += 2.0 * (self.abs_re[idx] * pr - self.abs_im[idx] * pi);
                    idx += 1;
                }
            }
        }
        (cos2, abscos)
    }

    /// z_n = exp(−i ω_n (t − t0)) for the kept levels.
    fn phases(&self, t_ps: f64, z_re: &mut Vec<f64>, z_im: &mut Vec<f64>) {
        let tau = t_ps - self.t0_ps;
        z_re.clear();
        z_im.clear();
        for w in &self.omega {
            let (s, c) = (-w * tau).sin_cos();
            z_re.push(c);
            z_im.push(s);
        }
    }

    /// Values for given phases z_n.
    fn eval_with(&self, z_re: &[f64], z_im: &[f64]) -> (f64, f64) {
        let m = self.omega.len();
        // ρ_nm(t) = ρ_nm z_n conj(z_m); ⟨O⟩ = Σ_n ρ_nn O_nn + 2 Re Σ_{n<m} ρ_nm O_mn z_n conj(z_m).
        let mut cos2 = self.cos2_static;
        for a in 0..m.saturating_sub(1) {
            let (pr, pi) = phase_product(z_re[a], z_im[a], z_re[a + 1], z_im[a + 1]);
            cos2 += 2.0 * (self.cos2_re[a] * pr - self.cos2_im[a] * pi);
        }
        let mut abscos = 0.0;
        if self.with_2d {
            abscos = self.abscos_static;
            let mut idx = 0;
            for a in 0..m {
                // Σ_{b>a} C_ab conj(z_b), then times z_a.
                let len = m - a - 1;
                let row_r = &self.abs_re[idx..idx + len];
                let row_i = &self.abs_im[idx..idx + len];
                let zr = &z_re[a + 1..];
                let zi = &z_im[a + 1..];
                let (mut sr, mut si) = (0.0, 0.0);
                for k in 0..len {
                    // C · conj(z) = (cr + i ci)(zr − i zi)
                    sr += row_r[k] * zr[k] + row_i[k] * zi[k];
                    si += row_i[k] * zr[k] - row_r[k] * zi[k];
                }
                idx += len;
                abscos += 2.0 * (sr * z_re[a] - si * z_im[a]);
            }
        }
        (cos2, abscos)
    }
}

/// Real and imaginary parts of z_a conj(z_b).
#[inline]
fn phase_product(ar: f64, ai: f64, br: f64, bi: f64) -> (f64, f64) {
    (ar * br + ai * bi, ai * br - ar * bi)
}

/// A sampled trace of alignment observables.
#[derive(Debug, Clone, PartialEq)]
pub struct Trace {
    /// Sample times, ps.
    pub times_ps: Vec<f64>,
    /// ⟨cos²θ⟩ at each time.
    pub cos2: Vec<f64>,
    /// ⟨cos²θ_2D⟩ (= ⟨|cosθ|⟩ for an ensemble symmetric about Z) at each time; empty if not computed.
    pub cos2_2d: Vec<f64>,
}

/// Location of an extremum of a sampled series.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Extremum {
    /// Value.
    pub value: f64,
    /// Time, ps.
    pub t_ps: f64,
}

impl Trace {
    /// Largest value of `series` at times ≥ `from_ps` (None if no sample qualifies).
    pub fn max_after(&self, series: &[f64], from_ps: f64) -> Option<Extremum> {
        self.times_ps.iter().zip(series).filter(|(t, _)| **t >= from_ps).fold(None, |best: Option<Extremum>, (t, v)| match best {
            Some(b) if b.value >= *v => Some(b),
            _ => Some(Extremum { value: *v, t_ps: *t }),
        })
    }

    /// Smallest value of `series` at times ≥ `from_ps`.
    pub fn min_after(&self, series: &[f64], from_ps: f64) -> Option<Extremum> {
        self.times_ps.iter().zip(series).filter(|(t, _)| **t >= from_ps).fold(None, |best: Option<Extremum>, (t, v)| match best {
            Some(b) if b.value <= *v => Some(b),
            _ => Some(Extremum { value: *v, t_ps: *t }),
        })
    }
}
