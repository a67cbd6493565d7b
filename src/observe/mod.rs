//! Observables and traces. After the last field interaction, expectation values follow exactly from
//! the density matrix by sums over coherences: ⟨O⟩(t) = Σ_nm ρ_nm O_mn exp(−i(ω_n − ω_m)(t − t0)).

pub mod pairs;

use crate::numeric::{advance_and_project, sin_cos, sin_cos_slice};
use crate::propagate::{BlockOps, BlockState};
use pairs::PairSums;

/// The ensemble's coherence sums after the last field interaction, for evaluation at any later time.
#[derive(Debug, Clone)]
pub enum FreeSums {
    /// Linear molecules: merged by J (t0 = ∞ marks runs scored on their samples alone).
    Levels(LevelSums),
    /// Tops and all-M runs: merged by pairs of field-free levels; `parts` says which of the sums'
    /// observables is which.
    Pairs {
        /// The sums.
        sums: PairSums,
        /// Where each goal observable sits among the sums' parts.
        parts: PairParts,
    },
}

/// Where the goal observables sit among the parts of a run's [`PairSums`].
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PairParts {
    /// ⟨cos²θ⟩ of the alignment axis with Z.
    pub cos2: usize,
    /// ⟨cos²θ_2D⟩ of the alignment axis, when computed.
    pub cos2_2d: Option<usize>,
    /// The three-axis goal's two averages, when the sums carry them.
    pub three_axis: Option<ThreeAxisParts>,
}

/// The two averages of the three-axis goal, min(⟨cos²⟩ of the alignment axis with Z, ⟨cos²⟩ of the
/// second axis with X).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ThreeAxisParts {
    /// ⟨cos²⟩ of the alignment axis with Z.
    pub along_z: usize,
    /// The second axis: its ⟨cos²⟩ with X, or with Z when `second_from_z`.
    pub second: usize,
    /// True for runs symmetric about Z, which hold the second axis's ⟨cos²⟩ with Z only: its average
    /// with X is then (1 − ⟨cos²⟩ with Z)/2.
    pub second_from_z: bool,
}

impl ThreeAxisParts {
    /// The goal's value from the parts' values `v`.
    pub fn value(&self, v: &[f64]) -> f64 {
        let second = if self.second_from_z { 0.5 * (1.0 - v[self.second]) } else { v[self.second] };
        v[self.along_z].min(second)
    }
}

impl FreeSums {
    /// Time from which the sums are valid, ps.
    pub fn t0_ps(&self) -> f64 {
        match self {
            FreeSums::Levels(l) => l.t0_ps,
            FreeSums::Pairs { sums, .. } => sums.t0_ps,
        }
    }

    /// (⟨cos²θ⟩, ⟨cos²θ_2D⟩) at time t (ps); the second is 0 when not prepared.
    pub fn eval(&self, t_ps: f64) -> (f64, f64) {
        match self {
            FreeSums::Levels(l) => l.eval(t_ps),
            FreeSums::Pairs { sums, parts } => {
                let v = sums.eval(t_ps);
                (v[parts.cos2], parts.cos2_2d.map(|i| v[i]).unwrap_or(0.0))
            }
        }
    }

    /// True when the sums carry the three-axis goal's two averages.
    pub fn carries_three_axis(&self) -> bool {
        matches!(self, FreeSums::Pairs { parts: PairParts { three_axis: Some(_), .. }, .. })
    }

    /// The three-axis goal's value at time t (ps), when the sums carry it.
    pub fn eval_three_axis(&self, t_ps: f64) -> Option<f64> {
        match self {
            FreeSums::Pairs { sums, parts: PairParts { three_axis: Some(three), .. } } => Some(three.value(&sums.eval(t_ps))),
            _ => None,
        }
    }

    /// Exact means of (⟨cos²θ⟩, ⟨cos²θ_2D⟩) over [a, b] (ps).
    pub fn mean_over(&self, a_ps: f64, b_ps: f64) -> (f64, f64) {
        match self {
            FreeSums::Levels(l) => l.mean_over(a_ps, b_ps),
            FreeSums::Pairs { sums, parts } => {
                let v = sums.mean_over(a_ps, b_ps);
                (v[parts.cos2], parts.cos2_2d.map(|i| v[i]).unwrap_or(0.0))
            }
        }
    }
}

/// One block's share of the coherence sums: ρ_nm O_mn for the block's levels, labelled by J.
#[derive(Debug, Clone)]
pub struct BlockSums {
    /// J of the first kept level; level a has J = j_first + 2a.
    pub j_first: u32,
    /// Σ_n ρ_nn cos²_nn.
    pub cos2_static: f64,
    /// ρ_{a,a+1} cos²_{a+1,a} (real, imaginary), a = 0..m−1.
    pub cos2_c: Vec<(f64, f64)>,
    /// Σ_n ρ_nn |cos|_nn.
    pub abscos_static: f64,
    /// Upper triangle (row-major, a < b) of ρ_ab |cos|_ba (real, imaginary); empty without 2D.
    pub abs_c: Vec<(f64, f64)>,
    /// Number of kept levels.
    pub levels: usize,
}

/// Populations below this are treated as empty when trimming the coherence sums.
const TRIM_POPULATION: f64 = 1e-22;

impl BlockSums {
    /// The block's coefficients from its propagated states (populations `pops`); `with_2d` adds |cosθ|.
    /// Without 2D only the diagonal and first off-diagonal of ρ are formed (O(N K) work).
    pub fn from_state(ops: &BlockOps, state: &BlockState, pops: &[f64], with_2d: bool) -> BlockSums {
        let mut out = BlockSums::from_columns(ops, state.psi.as_slice(), state.k, pops, &mut Default::default());
        if with_2d {
            out.add_abscos(ops, state, pops);
        }
        out
    }

    /// The ⟨cos²θ⟩ coefficients from the states' amplitudes `psi` (column-major, N rows, columns
    /// [Re ψ_1..ψ_K | Im ψ_1..ψ_K]) with populations `pops`; the |cosθ| part is left empty. `scratch`
    /// holds work arrays that can be reused from call to call.
    pub fn from_columns(ops: &BlockOps, psi: &[f64], k: usize, pops: &[f64], scratch: &mut [Vec<f64>; 3]) -> BlockSums {
        let n = ops.size();
        let (re, im) = psi[..2 * n * k].split_at(n * k);
        // ρ_rr and ρ_{r,r+1} = Σ_c p_c ψ_r conj(ψ_{r+1}), column by column (contiguous rows).
        for v in scratch.iter_mut() {
            v.clear();
            v.resize(n, 0.0);
        }
        let [diag, off_re, off_im] = scratch;
        accumulate_neighbours(re, im, n, &pops[..k], diag, off_re, off_im);
        let lo = (0..n).find(|&i| diag[i] > TRIM_POPULATION).unwrap_or(0);
        let hi = (0..n).rev().find(|&i| diag[i] > TRIM_POPULATION).map(|i| i + 1).unwrap_or(0).max(lo);
        let m = hi - lo;
        let mut out = BlockSums { j_first: ops.block.j(lo), cos2_static: 0.0, cos2_c: Vec::with_capacity(m), abscos_static: 0.0, abs_c: vec![], levels: m };
        for a in 0..m {
            let i = a + lo;
            out.cos2_static += diag[i] * ops.cos2_diag[i];
            if a + 1 < m {
                out.cos2_c.push((off_re[i] * ops.cos2_off[i], off_im[i] * ops.cos2_off[i]));
            }
        }
        out
    }

    /// Add the |cosθ| (⟨cos²θ_2D⟩) coefficients over the kept levels.
    fn add_abscos(&mut self, ops: &BlockOps, state: &BlockState, pops: &[f64]) {
        let n = ops.size();
        let k = state.k;
        let psi = &state.psi;
        let diag: Vec<f64> = (0..n).map(|r| (0..k).map(|c| pops[c] * (psi[(r, c)].powi(2) + psi[(r, c + k)].powi(2))).sum()).collect();
        let lo = ((self.j_first - ops.block.j(0)) / ops.block.j_step()) as usize;
        let m = self.levels;
        let out = self;
        let o = ops.abscos.as_ref().expect("|cosθ| matrix built for 2D observables");
        let (rre, rim) = state.density(pops);
        for a in 0..m {
            let i = a + lo;
            out.abscos_static += diag[i] * o[(i, i)];
            for b in (a + 1)..m {
                let j = b + lo;
                out.abs_c.push((rre[(i, j)] * o[(i, j)], rim[(i, j)] * o[(i, j)]));
            }
        }
    }
}

crate::numeric::wide_simd! {
/// ρ_rr (into `diag`) and ρ_{r,r+1} (into `off_re`, `off_im`) = Σ_c p_c ψ_r conj(ψ_{r+1}) over the
/// columns c of `re` and `im` (N rows each, column-major), added to what the arrays hold.
fn accumulate_neighbours(re: &[f64], im: &[f64], n: usize, pops: &[f64], diag: &mut [f64], off_re: &mut [f64], off_im: &mut [f64]) {
    let (diag, off_re, off_im) = (&mut diag[..n], &mut off_re[..n], &mut off_im[..n]);
    for (c, &p) in pops.iter().enumerate() {
        let (a, b) = (&re[c * n..(c + 1) * n], &im[c * n..(c + 1) * n]);
        for r in 0..n {
            diag[r] += p * (a[r] * a[r] + b[r] * b[r]);
        }
        for r in 0..n - 1 {
            off_re[r] += p * (a[r] * a[r + 1] + b[r] * b[r + 1]);
            off_im[r] += p * (b[r] * a[r + 1] - a[r] * b[r + 1]);
        }
    }
}
}

/// Coherence sums of the whole ensemble, merged over blocks by rotational level J. Field-free
/// frequencies depend on J only, so every block's coherence between J and J' adds into one
/// coefficient: a trace then costs O(J_max) per time for ⟨cos²θ⟩ and O(J_max²) for ⟨cos²θ_2D⟩,
/// independent of the number of M blocks.
#[derive(Debug, Clone)]
pub struct LevelSums {
    /// Time at which the states were taken, ps.
    pub t0_ps: f64,
    omega: Vec<f64>,
    /// Σ ρ_nn cos²_nn over the ensemble: the exact time average of ⟨cos²θ⟩.
    pub cos2_static: f64,
    c2: Vec<(f64, f64)>,
    /// Σ ρ_nn |cos|_nn over the ensemble: the exact time average of ⟨cos²θ_2D⟩.
    pub abscos_static: f64,
    /// Dense (J, J') coefficients, J < J', row-major over J_count × J_count.
    abs: Vec<(f64, f64)>,
    with_2d: bool,
}

impl LevelSums {
    /// Empty sums for levels J = 0..omega_by_j.len() (ω_J in rad/ps) at time t0 (ps).
    pub fn new(omega_by_j: Vec<f64>, t0_ps: f64, with_2d: bool) -> LevelSums {
        let n = omega_by_j.len();
        LevelSums {
            t0_ps,
            c2: vec![(0.0, 0.0); n],
            abs: if with_2d { vec![(0.0, 0.0); n * n] } else { vec![] },
            omega: omega_by_j,
            cos2_static: 0.0,
            abscos_static: 0.0,
            with_2d,
        }
    }

    /// Number of J levels covered.
    pub fn levels(&self) -> usize {
        self.omega.len()
    }

    /// Add one block's coefficients with weight `g` (2 for |M| > 0: ±M are identical).
    pub fn add(&mut self, g: f64, b: &BlockSums) {
        self.cos2_static += g * b.cos2_static;
        self.abscos_static += g * b.abscos_static;
        let n = self.omega.len();
        let j0 = b.j_first as usize;
        for (a, c) in b.cos2_c.iter().enumerate() {
            let j = j0 + 2 * a;
            self.c2[j].0 += g * c.0;
            self.c2[j].1 += g * c.1;
        }
        if self.with_2d {
            let mut idx = 0;
            for a in 0..b.levels {
                for bb in (a + 1)..b.levels {
                    let (j, jp) = (j0 + 2 * a, j0 + 2 * bb);
                    let c = b.abs_c[idx];
                    self.abs[j * n + jp].0 += g * c.0;
                    self.abs[j * n + jp].1 += g * c.1;
                    idx += 1;
                }
            }
        }
    }

    /// Multiply every coefficient by `w` (e.g. a quadrature weight).
    pub fn scale(&mut self, w: f64) {
        self.cos2_static *= w;
        self.abscos_static *= w;
        self.c2.iter_mut().chain(self.abs.iter_mut()).for_each(|c| *c = (w * c.0, w * c.1));
    }

    /// True if `other` can be added to these sums: same time, same observables, same levels J where both have them.
    pub fn compatible(&self, other: &LevelSums) -> bool {
        let common = self.omega.len().min(other.omega.len());
        self.t0_ps == other.t0_ps && self.with_2d == other.with_2d && self.omega[..common] == other.omega[..common]
    }

    /// Add `w` times sums of the same molecule taken at the same time (either may cover more levels J;
    /// panics on sums of different runs: a programming error).
    pub fn add_scaled(&mut self, w: f64, other: &LevelSums) {
        assert!(self.compatible(other), "level sums of different runs");
        if other.omega.len() > self.omega.len() {
            self.grow(other.omega.clone());
        }
        self.cos2_static += w * other.cos2_static;
        self.abscos_static += w * other.abscos_static;
        for (a, b) in self.c2.iter_mut().zip(&other.c2) {
            a.0 += w * b.0;
            a.1 += w * b.1;
        }
        let (n, m) = (self.omega.len(), other.omega.len());
        if self.with_2d {
            for j in 0..m {
                for jp in 0..m {
                    let b = other.abs[j * m + jp];
                    self.abs[j * n + jp].0 += w * b.0;
                    self.abs[j * n + jp].1 += w * b.1;
                }
            }
        }
    }

    /// Extend to the levels of `omega_by_j` (which starts with the current levels), with zero coefficients.
    fn grow(&mut self, omega_by_j: Vec<f64>) {
        let (old, n) = (self.omega.len(), omega_by_j.len());
        self.c2.resize(n, (0.0, 0.0));
        if self.with_2d {
            let mut abs = vec![(0.0, 0.0); n * n];
            for j in 0..old {
                abs[j * n..j * n + old].copy_from_slice(&self.abs[j * old..(j + 1) * old]);
            }
            self.abs = abs;
        }
        self.omega = omega_by_j;
    }

    /// (⟨cos²θ⟩, ⟨|cosθ|⟩) at time t (ps); the second is 0 without 2D preparation.
    pub fn eval(&self, t_ps: f64) -> (f64, f64) {
        if !self.with_2d {
            // ⟨cos²θ⟩ alone: one phase per coherence J, J+2.
            let tau = t_ps - self.t0_ps;
            let m = self.omega.len().saturating_sub(2);
            let arg: Vec<f64> = (0..m).map(|j| (self.omega[j + 2] - self.omega[j]) * tau).collect();
            let (mut s, mut c) = (vec![0.0; m], vec![0.0; m]);
            sin_cos_slice(&arg, &mut s, &mut c);
            let mut acc = 0.0;
            for j in 0..m {
                acc += self.c2[j].0 * c[j] - self.c2[j].1 * s[j];
            }
            return (self.cos2_static + 2.0 * acc, 0.0);
        }
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
        if !is_uniform_grid(times_ps) {
            for (i, &t) in times_ps.iter().enumerate() {
                self.phases(t, &mut zr, &mut zi);
                out(i, self.eval_with(&zr, &zi));
            }
            return;
        }
        let dt = (times_ps[n - 1] - times_ps[0]) / (n - 1) as f64;
        if !self.with_2d {
            return self.eval_cos2_series(times_ps[0], dt, n, out);
        }
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

    /// ⟨cos²θ⟩ alone on the uniform grid t_i = t_first + i dt (i < n): each coherence J, J+2 with a
    /// nonzero coefficient advances its phase exp(i(ω_J+2 − ω_J)(t − t0)) by one complex
    /// multiplication per step (re-synchronized every 256 steps). The second value is 0.
    fn eval_cos2_series(&self, t_first: f64, dt: f64, n: usize, mut out: impl FnMut(usize, (f64, f64))) {
        let live: Vec<usize> = (0..self.omega.len().saturating_sub(2)).filter(|&j| self.c2[j] != (0.0, 0.0)).collect();
        let d: Vec<f64> = live.iter().map(|&j| self.omega[j + 2] - self.omega[j]).collect();
        let (cr, ci): (Vec<f64>, Vec<f64>) = live.iter().map(|&j| self.c2[j]).unzip();
        let (rr, ri): (Vec<f64>, Vec<f64>) = d.iter().map(|&x| sin_cos(x * dt)).map(|(s, c)| (c, s)).unzip();
        let (mut wr, mut wi) = (vec![0.0; live.len()], vec![0.0; live.len()]);
        let (one, zero) = (vec![1.0; live.len()], vec![0.0; live.len()]);
        for i in 0..n {
            let acc = if i % 256 == 0 {
                // Re-synchronize: w = exp(i d τ) directly, then project with a unit step.
                let tau = t_first + i as f64 * dt - self.t0_ps;
                let arg: Vec<f64> = d.iter().map(|x| x * tau).collect();
                sin_cos_slice(&arg, &mut wi, &mut wr);
                advance_and_project(&mut wr, &mut wi, &one, &zero, &cr, &ci)
            } else {
                advance_and_project(&mut wr, &mut wi, &rr, &ri, &cr, &ci)
            };
            out(i, (self.cos2_static + 2.0 * acc, 0.0));
        }
    }

    /// ⟨cos²θ⟩ and its first and second time derivatives (ps⁻¹, ps⁻²) at t (ps), from the coherences J, J+2.
    pub fn cos2_derivatives(&self, t_ps: f64) -> (f64, f64, f64) {
        let tau = t_ps - self.t0_ps;
        let m = self.omega.len().saturating_sub(2);
        let d: Vec<f64> = (0..m).map(|j| self.omega[j + 2] - self.omega[j]).collect();
        let arg: Vec<f64> = d.iter().map(|x| x * tau).collect();
        let (mut s, mut c) = (vec![0.0; m], vec![0.0; m]);
        sin_cos_slice(&arg, &mut s, &mut c);
        // Term 2 Re(C e^{i d τ}) = 2 (Cr cos − Ci sin); derivatives bring down i d each time.
        let (mut f, mut f1, mut f2) = (0.0, 0.0, 0.0);
        for j in 0..m {
            let (cr, ci) = self.c2[j];
            let re = cr * c[j] - ci * s[j];
            let im = cr * s[j] + ci * c[j];
            f += re;
            f1 -= d[j] * im;
            f2 -= d[j] * d[j] * re;
        }
        (self.cos2_static + 2.0 * f, 2.0 * f1, 2.0 * f2)
    }

    /// Exact mean of (⟨cos²θ⟩, ⟨|cosθ|⟩) over [a, b] (ps), from ∫ exp(−iΔω t) dt in closed form.
    pub fn mean_over(&self, a_ps: f64, b_ps: f64) -> (f64, f64) {
        let len = b_ps - a_ps;
        if len <= 0.0 {
            return self.eval(a_ps);
        }
        let (ta, tb) = (a_ps - self.t0_ps, b_ps - self.t0_ps);
        // Mean of exp(−iD τ) over [ta, tb] = (exp(−iD tb) − exp(−iD ta)) / (−iD L).
        let avg = |d: f64| -> (f64, f64) {
            if (d * len).abs() < 1e-9 {
                let (s, c) = sin_cos(-d * 0.5 * (ta + tb));
                return (c, s);
            }
            let (sb, cb) = sin_cos(-d * tb);
            let (sa, ca) = sin_cos(-d * ta);
            let (nr, ni) = (cb - ca, sb - sa);
            // (nr + i ni) / (−i d L) = (−ni + i nr) / (d L)
            (-ni / (d * len), nr / (d * len))
        };
        let n = self.omega.len();
        let mut cos2 = self.cos2_static;
        for j in 0..n.saturating_sub(2) {
            let c = self.c2[j];
            if c != (0.0, 0.0) {
                let (pr, pi) = avg(self.omega[j] - self.omega[j + 2]);
                cos2 += 2.0 * (c.0 * pr - c.1 * pi);
            }
        }
        let mut abscos = 0.0;
        if self.with_2d {
            abscos = self.abscos_static;
            for j in 0..n {
                for jp in ((j + 2)..n).step_by(2) {
                    let c = self.abs[j * n + jp];
                    if c != (0.0, 0.0) {
                        let (pr, pi) = avg(self.omega[j] - self.omega[jp]);
                        abscos += 2.0 * (c.0 * pr - c.1 * pi);
                    }
                }
            }
        }
        (cos2, abscos)
    }

    /// z_J = exp(−i ω_J (t − t0)).
    fn phases(&self, t_ps: f64, z_re: &mut Vec<f64>, z_im: &mut Vec<f64>) {
        let tau = t_ps - self.t0_ps;
        z_re.clear();
        z_im.clear();
        for w in &self.omega {
            let (s, c) = sin_cos(-w * tau);
            z_re.push(c);
            z_im.push(s);
        }
    }

    /// Values for given phases z_J.
    fn eval_with(&self, z_re: &[f64], z_im: &[f64]) -> (f64, f64) {
        let n = self.omega.len();
        // ρ_JJ'(t) = ρ_JJ' z_J conj(z_J'); ⟨O⟩ = static + 2 Re Σ_{J<J'} C_JJ' z_J conj(z_J').
        let mut cos2 = self.cos2_static;
        for j in 0..n.saturating_sub(2) {
            let (pr, pi) = phase_product(z_re[j], z_im[j], z_re[j + 2], z_im[j + 2]);
            cos2 += 2.0 * (self.c2[j].0 * pr - self.c2[j].1 * pi);
        }
        let mut abscos = 0.0;
        if self.with_2d {
            abscos = self.abscos_static;
            for j in 0..n {
                let row = &self.abs[j * n..(j + 1) * n];
                let (mut sr, mut si) = (0.0, 0.0);
                let mut jp = j + 2;
                while jp < n {
                    let c = row[jp];
                    // C · conj(z) = (cr + i ci)(zr − i zi)
                    sr += c.0 * z_re[jp] + c.1 * z_im[jp];
                    si += c.1 * z_re[jp] - c.0 * z_im[jp];
                    jp += 2;
                }
                abscos += 2.0 * (sr * z_re[j] - si * z_im[j]);
            }
        }
        (cos2, abscos)
    }
}

/// Coherence sums of one block in the eigenbasis of a constant Hamiltonian (dense: every pair of
/// states), for several observables at once. Used where levels are not labelled by J alone (static
/// fields mix J).
#[derive(Debug, Clone)]
pub struct DenseSums {
    /// Time at which the states were taken, ps.
    pub t0_ps: f64,
    eps: Vec<f64>,
    /// Diagonal parts Σ_i ρ_ii O_ii: the exact time averages.
    pub statics: Vec<f64>,
    /// Per observable, the strict upper triangle (i < j, over the kept states) of ρ_ij O_ji as real and
    /// imaginary matrices.
    coeffs: Vec<(nalgebra::DMatrix<f64>, nalgebra::DMatrix<f64>)>,
}

impl DenseSums {
    /// From ρ = (re, im) and observables O, all in the same eigenbasis with eigen-frequencies `eps`
    /// (rad/ps), at time `t0_ps`.
    pub fn new(rho_re: &nalgebra::DMatrix<f64>, rho_im: &nalgebra::DMatrix<f64>, observables: &[nalgebra::DMatrix<f64>], eps: &[f64], t0_ps: f64) -> DenseSums {
        let n = eps.len();
        let keep: Vec<usize> = (0..n).filter(|&i| rho_re[(i, i)] > TRIM_POPULATION).collect();
        let m = keep.len();
        let mut statics = vec![0.0; observables.len()];
        let mut coeffs = vec![];
        for (o, op) in observables.iter().enumerate() {
            let (mut c0, mut c1) = (nalgebra::DMatrix::zeros(m, m), nalgebra::DMatrix::zeros(m, m));
            for (a, &i) in keep.iter().enumerate() {
                statics[o] += rho_re[(i, i)] * op[(i, i)];
                for (b, &j) in keep.iter().enumerate().skip(a + 1) {
                    c0[(a, b)] = rho_re[(i, j)] * op[(j, i)];
                    c1[(a, b)] = rho_im[(i, j)] * op[(j, i)];
                }
            }
            coeffs.push((c0, c1));
        }
        DenseSums { t0_ps, eps: keep.iter().map(|&i| eps[i]).collect(), statics, coeffs }
    }

    /// Values of every observable at time t (ps).
    pub fn eval(&self, t_ps: f64) -> Vec<f64> {
        let mut out = vec![];
        self.eval_series(&[t_ps], |_, v| out = v);
        out
    }

    /// Values of every observable at each of `times_ps`, passed to `out(index, values)`. The phases
    /// z_a(t) = exp(−i ε_a (t − t0)) of a chunk of times form the columns of a matrix, so the pair sums
    /// Σ_{a<b} c_ab z_a* z_b of all times are matrix products; on a uniform grid the phases advance by
    /// one complex product per step (re-synchronized at every chunk).
    pub fn eval_series(&self, times_ps: &[f64], mut out: impl FnMut(usize, Vec<f64>)) {
        const CHUNK: usize = 256;
        let m = self.eps.len();
        let uniform = is_uniform_grid(times_ps);
        let dt = if uniform { times_ps[1] - times_ps[0] } else { 0.0 };
        let step: Vec<(f64, f64)> = self.eps.iter().map(|e| sin_cos(-e * dt)).collect();
        for (c, chunk) in times_ps.chunks(CHUNK).enumerate() {
            let k = chunk.len();
            let (mut zr, mut zi) = (nalgebra::DMatrix::<f64>::zeros(m, k), nalgebra::DMatrix::<f64>::zeros(m, k));
            for (col, &t) in chunk.iter().enumerate() {
                for a in 0..m {
                    let (s, co) = if uniform && col > 0 {
                        let (ps, pc) = (zi[(a, col - 1)], zr[(a, col - 1)]);
                        let (ss, sc) = step[a];
                        (ps * sc + pc * ss, pc * sc - ps * ss)
                    } else {
                        sin_cos(-self.eps[a] * (t - self.t0_ps))
                    };
                    zr[(a, col)] = co;
                    zi[(a, col)] = s;
                }
            }
            // S = C z: SR = C0 ZR + C1 ZI, SI = C1 ZR − C0 ZI; the value is static + 2 Σ_a Re(conj-free
            // products) as in the pair sum 2 Σ_a (SR_a zr_a − SI_a zi_a).
            let sums: Vec<nalgebra::DMatrix<f64>> = self
                .coeffs
                .iter()
                .map(|(c0, c1)| {
                    let sr = c0 * &zr + c1 * &zi;
                    let si = c1 * &zr - c0 * &zi;
                    sr.component_mul(&zr) - si.component_mul(&zi)
                })
                .collect();
            for col in 0..k {
                let vals = sums.iter().zip(&self.statics).map(|(p, st)| st + 2.0 * p.column(col).sum()).collect();
                out(c * CHUNK + col, vals);
            }
        }
    }
}

/// True for more than two times on an equally spaced grid (spacing equal to 1e-9 relative), where phases
/// can advance by one complex product per step.
pub fn is_uniform_grid(times_ps: &[f64]) -> bool {
    times_ps.len() > 2 && {
        let d = times_ps[1] - times_ps[0];
        times_ps.windows(2).all(|w| ((w[1] - w[0]) - d).abs() <= 1e-9 * d.abs().max(1e-12))
    }
}

/// Real and imaginary parts of z_a conj(z_b).
#[inline]
fn phase_product(ar: f64, ai: f64, br: f64, bi: f64) -> (f64, f64) {
    (ar * br + ai * bi, ai * br - ar * bi)
}

/// A sampled trace of alignment observables. Every column a run may or may not compute is an
/// `Option`: `None` means "not computed for this run", never an empty or zero-filled series.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Trace {
    /// Sample times, ps.
    pub times_ps: Vec<f64>,
    /// ⟨cos²θ⟩ of the alignment axis at each time.
    pub cos2: Vec<f64>,
    /// ⟨cos²θ_2D⟩ (= ⟨|cosθ|⟩ for an ensemble symmetric about Z) at each time, when a goal, a focal
    /// average or the caller asked for it.
    pub cos2_2d: Option<Vec<f64>>,
    /// ⟨cosθ⟩ and ⟨cos³θ⟩, when a field breaks head–tail symmetry.
    pub orientation: Option<Orientation>,
    /// ⟨cos²⟩ of each body axis with Z and the three-axis series, for tops.
    pub body_axes: Option<BodyAxes>,
    /// ⟨cos²⟩ of each body axis with each lab axis, when the field is not symmetric about Z (empty otherwise).
    pub lab_axes: Vec<LabAxisSeries>,
    /// ⟨cos⟩ of the dipole axis with each lab axis, when an orienting field is not along Z (empty otherwise).
    pub lab_cos: Vec<LabAxisSeries>,
}

/// Orientation columns of a trace.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Orientation {
    /// ⟨cosθ⟩ (of the dipole axis for tops) at each time.
    pub cos: Vec<f64>,
    /// ⟨cos³θ⟩ at each time (None when a search asked for ⟨cosθ⟩ alone).
    pub cos3: Option<Vec<f64>>,
}

/// Body-axis columns of a top's trace.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct BodyAxes {
    /// ⟨cos²⟩ of the body a axis with Z.
    pub a: Vec<f64>,
    /// ⟨cos²⟩ of the body b axis with Z.
    pub b: Vec<f64>,
    /// ⟨cos²⟩ of the body c axis with Z.
    pub c: Vec<f64>,
    /// The three-axis goal's series, min(⟨cos²⟩ of the alignment axis with Z, ⟨cos²⟩ of the second most
    /// polarizable axis with X).
    pub three_axis: Vec<f64>,
    /// The three-axis orientation goal's series, min(⟨cosθ⟩ of the dipole axis with Z, ⟨cos²⟩ with X of the
    /// most polarizable axis other than the dipole axis); empty where not computed (fields all along Z).
    pub three_axis_oriented: Vec<f64>,
}

impl BodyAxes {
    /// ⟨cos²⟩ of `axis` with Z.
    pub fn axis(&self, axis: crate::molecule::top::BodyAxis) -> &[f64] {
        match axis {
            crate::molecule::top::BodyAxis::A => &self.a,
            crate::molecule::top::BodyAxis::B => &self.b,
            crate::molecule::top::BodyAxis::C => &self.c,
        }
    }
}

/// ⟨cos²⟩ of one body axis with one lab axis at each sample.
#[derive(Debug, Clone, PartialEq)]
pub struct LabAxisSeries {
    /// The lab axis.
    pub lab: crate::basis::lab::LabAxis,
    /// The body axis (None: the axis of a linear molecule).
    pub body: Option<crate::molecule::top::BodyAxis>,
    /// Column name `cos2_<lab><body>`, e.g. `cos2_Xb` (`cos2_X` for a linear molecule).
    pub name: String,
    /// The values.
    pub values: Vec<f64>,
}

impl LabAxisSeries {
    /// The series of `body` with `lab`, named for its column.
    pub fn new(lab: crate::basis::lab::LabAxis, body: Option<crate::molecule::top::BodyAxis>, values: Vec<f64>) -> LabAxisSeries {
        let name = format!("cos2_{}{}", ["X", "Y", "Z"][lab as usize], body.map(|b| b.letter()).unwrap_or(""));
        LabAxisSeries { lab, body, name, values }
    }

    /// The series ⟨cos⟩ of `body` with `lab`, named `cos_<lab><body>` (e.g. `cos_X`).
    pub fn cosine(lab: crate::basis::lab::LabAxis, body: Option<crate::molecule::top::BodyAxis>, values: Vec<f64>) -> LabAxisSeries {
        let name = format!("cos_{}{}", ["X", "Y", "Z"][lab as usize], body.map(|b| b.letter()).unwrap_or(""));
        LabAxisSeries { lab, body, name, values }
    }
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
    /// ⟨cos²θ_2D⟩, if computed.
    pub fn cos2_2d(&self) -> Option<&[f64]> {
        self.cos2_2d.as_deref()
    }

    /// ⟨cosθ⟩, if a field oriented the molecule.
    pub fn cos(&self) -> Option<&[f64]> {
        self.orientation.as_ref().map(|o| o.cos.as_slice())
    }

    /// ⟨cos³θ⟩, if a field oriented the molecule.
    pub fn cos3(&self) -> Option<&[f64]> {
        self.orientation.as_ref().and_then(|o| o.cos3.as_deref())
    }

    /// ⟨cos²⟩ of a top's body axis with Z (None for linear molecules).
    pub fn body_axis(&self, axis: crate::molecule::top::BodyAxis) -> Option<&[f64]> {
        self.body_axes.as_ref().map(|b| b.axis(axis))
    }

    /// The three-axis series of a top (None for linear molecules).
    pub fn three_axis(&self) -> Option<&[f64]> {
        self.body_axes.as_ref().map(|b| b.three_axis.as_slice())
    }

    /// The three-axis orientation series of a polar top (None where not computed).
    pub fn three_axis_oriented(&self) -> Option<&[f64]> {
        self.body_axes.as_ref().map(|b| b.three_axis_oriented.as_slice()).filter(|s| !s.is_empty())
    }

    /// Every sampled series but the times, mutably (for weighted sums of traces).
    fn series_mut(&mut self) -> Vec<&mut Vec<f64>> {
        let mut out = vec![&mut self.cos2];
        out.extend(self.cos2_2d.as_mut());
        if let Some(o) = self.orientation.as_mut() {
            out.push(&mut o.cos);
            out.extend(o.cos3.as_mut());
        }
        if let Some(b) = self.body_axes.as_mut() {
            out.extend([&mut b.a, &mut b.b, &mut b.c, &mut b.three_axis, &mut b.three_axis_oriented]);
        }
        out.extend(self.lab_axes.iter_mut().map(|s| &mut s.values));
        out.extend(self.lab_cos.iter_mut().map(|s| &mut s.values));
        out
    }

    /// Multiply every series by `w`.
    pub fn scale(&mut self, w: f64) {
        for series in self.series_mut() {
            series.iter_mut().for_each(|v| *v *= w);
        }
    }

    /// Every sampled series but the times, in the order of [`Trace::series_mut`].
    fn series(&self) -> Vec<&Vec<f64>> {
        let mut out = vec![&self.cos2];
        out.extend(self.cos2_2d.as_ref());
        if let Some(o) = self.orientation.as_ref() {
            out.push(&o.cos);
            out.extend(o.cos3.as_ref());
        }
        if let Some(b) = self.body_axes.as_ref() {
            out.extend([&b.a, &b.b, &b.c, &b.three_axis, &b.three_axis_oriented]);
        }
        out.extend(self.lab_axes.iter().map(|s| &s.values));
        out.extend(self.lab_cos.iter().map(|s| &s.values));
        out
    }

    /// Add `w` times `other` (a trace of the same kind of run on the same times) to every series.
    pub fn add_scaled(&mut self, w: f64, other: &Trace) {
        for (a, b) in self.series_mut().into_iter().zip(other.series()) {
            a.iter_mut().zip(b).for_each(|(x, y)| *x += w * y);
        }
    }

    /// ⟨cosθ⟩ of a linear molecule's axis, or of a top's dipole axis, with `lab` (None when the run did not
    /// compute it).
    pub fn lab_cos(&self, lab: crate::basis::lab::LabAxis) -> Option<&[f64]> {
        // One oriented axis per run: the molecular axis, or a top's dipole axis.
        self.lab_cos.iter().find(|s| s.lab == lab).map(|s| s.values.as_slice())
    }

    /// ⟨cos²⟩ of `body` with `lab` (None when the run did not compute it).
    pub fn lab_axis(&self, lab: crate::basis::lab::LabAxis, body: Option<crate::molecule::top::BodyAxis>) -> Option<&[f64]> {
        self.lab_axes.iter().find(|s| s.lab == lab && s.body == body).map(|s| s.values.as_slice())
    }

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

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn dense_sums_equal_the_trace_of_the_evolved_density_matrix() {
        // Independent value: ⟨O⟩(t) = Σ_ij ρ_ij(t) O_ji with ρ_ij(t) = ρ_ij e^{−i(ε_i − ε_j)τ} (free evolution of
        // ρ = Σ_k p_k |ψ_k⟩⟨ψ_k|, common practice), summed directly in complex arithmetic. Covers a state
        // below the trim threshold (left out), uniform grids longer than one chunk, a non-uniform grid, a
        // single time and no times at all.
        use num_complex::Complex64 as C;
        let n = 6;
        let eps = [0.0, 1.3, 2.9, 4.4, 7.1, 9.0];
        let psi =
            |k: f64| -> Vec<C> { (0..n).map(|i| C::new((0.3 * i as f64 + k).cos(), (0.7 * i as f64 - k).sin()) * if i == 5 { 0.0 } else { 1.0 }).collect() };
        let states = [(0.6, psi(0.2)), (0.4, psi(1.1))];
        let mut rho = vec![vec![C::new(0.0, 0.0); n]; n];
        for (p, v) in &states {
            let norm: f64 = v.iter().map(|c| c.norm_sqr()).sum();
            for i in 0..n {
                for j in 0..n {
                    rho[i][j] += p * v[i] * v[j].conj() / norm;
                }
            }
        }
        let ops: Vec<nalgebra::DMatrix<f64>> =
            (0..2).map(|o| nalgebra::DMatrix::from_fn(n, n, |i, j| ((i + j + o) as f64 * 0.37).cos() + if i == j { 0.5 * o as f64 } else { 0.0 })).collect();
        let (re, im) = (nalgebra::DMatrix::from_fn(n, n, |i, j| rho[i][j].re), nalgebra::DMatrix::from_fn(n, n, |i, j| rho[i][j].im));
        let t0 = 0.25;
        let sums = DenseSums::new(&re, &im, &ops, &eps, t0);
        let direct = |t: f64, o: usize| -> f64 {
            let mut v = C::new(0.0, 0.0);
            for i in 0..n {
                for j in 0..n {
                    v += rho[i][j] * C::from_polar(1.0, -(eps[i] - eps[j]) * (t - t0)) * ops[o][(j, i)];
                }
            }
            assert!(v.im.abs() < 1e-12);
            v.re
        };
        let uniform: Vec<f64> = (0..600).map(|k| t0 + 0.013 * k as f64).collect();
        let scattered = [0.1, 0.3, 0.31, 2.0, 5.5];
        for times in [&uniform[..], &scattered[..], &[3.3][..]] {
            let mut seen = 0;
            sums.eval_series(times, |k, vals| {
                seen += 1;
                for (o, v) in vals.iter().enumerate() {
                    assert!((v - direct(times[k], o)).abs() < 1e-11, "t = {}, observable {o}: {v} vs {}", times[k], direct(times[k], o));
                }
            });
            assert_eq!(seen, times.len());
        }
        let mut none = 0;
        sums.eval_series(&[], |_, _| none += 1);
        assert_eq!(none, 0);
    }

    /// Level sums with ⟨cos²θ⟩ = 0.4 + Σ_j 2 Re(C_j e^{i(ω_j+2 − ω_j)τ}) for a few made-up coherences.
    fn sample() -> LevelSums {
        let omega: Vec<f64> = (0..12u32).map(|j| 0.37 * (j * (j + 1)) as f64 - 1e-4 * ((j * (j + 1)) as f64).powi(2)).collect();
        let mut s = LevelSums::new(omega, 1.5, false);
        s.cos2_static = 0.4;
        for j in 0..10 {
            s.c2[j] = (0.01 * (j as f64 + 1.0), -0.004 * j as f64);
        }
        s
    }

    /// The closed form above, term by term with the standard library's cos and sin.
    fn closed_form(s: &LevelSums, t: f64) -> f64 {
        let tau = t - s.t0_ps;
        0.4 + (0..10)
            .map(|j| {
                let d = s.omega[j + 2] - s.omega[j];
                2.0 * (s.c2[j].0 * (d * tau).cos() - s.c2[j].1 * (d * tau).sin())
            })
            .sum::<f64>()
    }

    #[test]
    fn trace_series_and_single_times_match_the_closed_form() {
        // Reference: the closed form evaluated directly (exact for these coefficients).
        let s = sample();
        let times: Vec<f64> = (0..700).map(|i| 1.5 + 0.013 * i as f64).collect();
        s.eval_series(&times, |i, (v, _)| assert!((v - closed_form(&s, times[i])).abs() < 1e-12, "series at {}", times[i]));
        for &t in &times[..50] {
            assert!((s.eval(t).0 - closed_form(&s, t)).abs() < 1e-13);
        }
    }

    #[test]
    fn derivatives_match_finite_differences_and_newton_finds_the_golden_section_peak() {
        // Reference: central differences of the closed form (steps 1e-5 ps for the first derivative,
        // 1e-4 ps for the second: their truncation errors stay below the tolerances), and the
        // golden-section search on the closed form.
        let s = sample();
        for t in [1.6, 2.3, 4.05] {
            let (f, f1, f2) = s.cos2_derivatives(t);
            let fd = |h: f64| (closed_form(&s, t - h), closed_form(&s, t), closed_form(&s, t + h));
            let (a, b, c) = fd(1e-5);
            assert!((f - b).abs() < 1e-13);
            assert!((f1 - (c - a) / 2e-5).abs() < 1e-7 * f1.abs().max(1.0), "f' {f1} vs {}", (c - a) / 2e-5);
            let (a, b, c) = fd(1e-4);
            assert!((f2 - (c - 2.0 * b + a) / 1e-8).abs() < 1e-3 * f2.abs().max(1.0), "f'' {f2} vs {}", (c - 2.0 * b + a) / 1e-8);
        }
        // Bracket the largest value on a grid, then compare the two refinements.
        let grid: Vec<f64> = (0..400).map(|i| 1.5 + 0.02 * i as f64).collect();
        let best = grid.iter().copied().fold(grid[0], |a, t| if closed_form(&s, t) > closed_form(&s, a) { t } else { a });
        let (tn, vn) = crate::numeric::newton_max(|t| s.cos2_derivatives(t), 1.0, best, best - 0.02, best + 0.02).expect("concave near the peak");
        let (tg, vg) = crate::numeric::golden_max(|t| closed_form(&s, t), best - 0.02, best + 0.02, 1e-9);
        assert!((tn - tg).abs() < 1e-6 && (vn - vg).abs() < 1e-12, "newton ({tn}, {vn}) vs golden ({tg}, {vg})");
        assert!(vn >= closed_form(&s, best));
        // A minimum is found with sense −1.
        let worst = grid.iter().copied().fold(grid[0], |a, t| if closed_form(&s, t) < closed_form(&s, a) { t } else { a });
        let (_, vm) = crate::numeric::newton_max(|t| s.cos2_derivatives(t), -1.0, worst, worst - 0.02, worst + 0.02).expect("convex near the dip");
        assert!(-vm <= closed_form(&s, worst));
    }
}
