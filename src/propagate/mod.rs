//! Time propagation of all initial states of one (|M|, parity) block together.
//!
//! H = H0 − u(t) cos²θ with H0 diagonal in |J M⟩. Field-free evolution is exact (phases); a kick
//! exp(iθ cos²θ) is exact through the precomputed eigendecomposition of the block's cos²θ matrix
//! (a discrete-variable representation in which the kick is diagonal); finite pulses use a
//! fourth-order symmetric splitting built from these two exact pieces.

use crate::basis::Block;

pub mod local_frame;
pub mod polar;
pub mod sparse;
use crate::molecule::LinearRotor;
use nalgebra::{DMatrix, SymmetricEigen};

/// Precomputed operators of one block: frequencies, cos²θ, its eigendecomposition and |cosθ|.
#[derive(Debug, Clone)]
pub struct BlockOps {
    /// The block.
    pub block: Block,
    /// Field-free angular frequencies E_J/ħ, rad/ps.
    pub omega: Vec<f64>,
    /// Diagonal of cos²θ.
    pub cos2_diag: Vec<f64>,
    /// First off-diagonal of cos²θ (⟨J+2|cos²θ|J⟩).
    pub cos2_off: Vec<f64>,
    /// Eigenvalues of cos²θ in the block.
    pub cos2_eigenvalues: Vec<f64>,
    /// Eigenvectors of cos²θ as columns (J basis × eigenbasis).
    pub cos2_eigenvectors: DMatrix<f64>,
    /// Transpose of `cos2_eigenvectors`, kept so that both products run through the fast kernel.
    cos2_eigenvectors_t: DMatrix<f64>,
    /// |cosθ| matrix (for ⟨cos²θ_2D⟩), computed on demand.
    pub abscos: Option<DMatrix<f64>>,
}

impl BlockOps {
    /// Build the operators of `block` for `mol`; `with_abscos` also builds the |cosθ| matrix.
    pub fn new(block: Block, mol: &LinearRotor, with_abscos: bool) -> BlockOps {
        let omega = block.frequencies(mol);
        let (d, e) = block.cos2_tridiagonal();
        let eig = SymmetricEigen::new(block.cos2_dense());
        BlockOps {
            block,
            omega,
            cos2_diag: d,
            cos2_off: e,
            cos2_eigenvalues: eig.eigenvalues.iter().copied().collect(),
            cos2_eigenvectors_t: eig.eigenvectors.transpose(),
            cos2_eigenvectors: eig.eigenvectors,
            abscos: if with_abscos { Some(block.abscos_dense()) } else { None },
        }
    }

    /// Number of basis states.
    pub fn size(&self) -> usize {
        self.block.size
    }

    /// Transpose of the cos²θ eigenvectors (eigenbasis × J basis).
    pub fn cos2_eigenvectors_t(&self) -> &DMatrix<f64> {
        &self.cos2_eigenvectors_t
    }
}

/// All propagated states of a block: column k is the state that started in initial level k.
/// Stored as one real matrix [Re | Im] of shape N × 2K so that real operators act with one product.
#[derive(Debug, Clone)]
pub struct BlockState {
    /// [Re ψ_1..ψ_K | Im ψ_1..ψ_K], N × 2K.
    pub psi: DMatrix<f64>,
    work: DMatrix<f64>,
    /// Number of states K.
    pub k: usize,
    /// Current time, ps.
    pub t_ps: f64,
    /// Start levels while every state is still a single (phased) basis level: lets the first kick skip a product.
    single_level: Option<Vec<usize>>,
}

impl BlockState {
    /// States starting in the basis levels `start_index` (one column each) at time `t_ps`.
    pub fn new(size: usize, start_index: &[usize], t_ps: f64) -> BlockState {
        let k = start_index.len();
        let mut psi = DMatrix::zeros(size, 2 * k);
        for (c, &n) in start_index.iter().enumerate() {
            psi[(n, c)] = 1.0;
        }
        BlockState { work: DMatrix::zeros(size, 2 * k), psi, k, t_ps, single_level: Some(start_index.to_vec()) }
    }

    /// States given as real columns (e.g. field-dressed eigenstates) at time `t_ps`.
    pub fn from_columns(columns: &DMatrix<f64>, t_ps: f64) -> BlockState {
        let (n, k) = columns.shape();
        let mut psi = DMatrix::zeros(n, 2 * k);
        psi.columns_mut(0, k).copy_from(columns);
        BlockState { work: DMatrix::zeros(n, 2 * k), psi, k, t_ps, single_level: None }
    }

    /// Exact field-free evolution by `dt_ps`: ψ_n ← exp(−i ω_n dt) ψ_n.
    pub fn free(&mut self, ops: &BlockOps, dt_ps: f64) {
        if dt_ps == 0.0 {
            return;
        }
        self.free_with(&FreePhases::new(ops, dt_ps));
    }

    /// Field-free evolution with precomputed phases.
    pub fn free_with(&mut self, ph: &FreePhases) {
        let n = self.psi.nrows();
        rotate_rows(self.psi.as_mut_slice(), self.k, n, &ph.c, &ph.s);
        self.t_ps += ph.dt_ps;
    }

    /// Exact kick ψ ← exp(iθ cos²θ) ψ (θ = ∫u dt, radians), through the eigenbasis of cos²θ.
    pub fn kick(&mut self, ops: &BlockOps, theta: f64) {
        if theta == 0.0 {
            return;
        }
        let angles: Vec<f64> = ops.cos2_eigenvalues.iter().map(|a| theta * a).collect();
        self.rotate_in_basis(&ops.cos2_eigenvectors, &ops.cos2_eigenvectors_t, &angles);
    }

    /// ψ ← V diag(exp(i angle_q)) Vᵀ ψ for an orthogonal V (columns: the basis in which the operator
    /// is diagonal) and its transpose `vt`.
    pub fn rotate_in_basis(&mut self, v: &DMatrix<f64>, vt: &DMatrix<f64>, angles: &[f64]) {
        let n = self.psi.nrows();
        let k = self.k;
        if let Some(start) = self.single_level.take() {
            // Each state is z_c e_{start_c}: Vᵀψ is row start_c of V times z_c, no product needed.
            for (c, &r) in start.iter().enumerate() {
                let (zr, zi) = (self.psi[(r, c)], self.psi[(r, c + k)]);
                for q in 0..n {
                    self.work[(q, c)] = v[(r, q)] * zr;
                    self.work[(q, c + k)] = v[(r, q)] * zi;
                }
            }
        } else {
            self.work.gemm(1.0, vt, &self.psi, 0.0);
        }
        let (c, s): (Vec<f64>, Vec<f64>) = angles
            .iter()
            .map(|a| {
                let (s, c) = a.sin_cos();
                (c, s)
            })
            .unzip();
        rotate_rows(self.work.as_mut_slice(), k, n, &c, &s);
        self.psi.gemm(1.0, v, &self.work, 0.0);
    }

    /// Largest population (over the K states) in the top `levels` basis states.
    pub fn edge_population(&self, levels: usize) -> f64 {
        let n = self.psi.nrows();
        let mut worst: f64 = 0.0;
        for c in 0..self.k {
            let mut p = 0.0;
            for r in n.saturating_sub(levels)..n {
                p += self.psi[(r, c)].powi(2) + self.psi[(r, c + self.k)].powi(2);
            }
            worst = worst.max(p);
        }
        worst
    }

    /// Norm of each state (1 for exact unitary evolution).
    pub fn norms(&self) -> Vec<f64> {
        (0..self.k).map(|c| (self.psi.column(c).norm_squared() + self.psi.column(c + self.k).norm_squared()).sqrt()).collect()
    }

    /// Σ_k p_k ⟨ψ_k|O|ψ_k⟩ for a real symmetric tridiagonal O (diagonal `d`, off-diagonal `e`).
    pub fn expect_tridiagonal(&self, pops: &[f64], d: &[f64], e: &[f64]) -> f64 {
        let n = self.psi.nrows();
        let mut total = 0.0;
        for (c, p) in pops.iter().enumerate() {
            for col in [c, c + self.k] {
                let x = self.psi.column(col);
                let mut s = 0.0;
                for r in 0..n {
                    s += d[r] * x[r] * x[r];
                    if r + 1 < n {
                        s += 2.0 * e[r] * x[r] * x[r + 1];
                    }
                }
                total += p * s;
            }
        }
        total
    }

    /// Σ_k p_k ⟨ψ_k|O|ψ_k⟩ for a real symmetric dense O.
    pub fn expect_dense(&self, pops: &[f64], o: &DMatrix<f64>) -> f64 {
        let y = o * &self.psi;
        pops.iter().enumerate().map(|(c, p)| p * (self.psi.column(c).dot(&y.column(c)) + self.psi.column(c + self.k).dot(&y.column(c + self.k)))).sum()
    }

    /// Density matrix ρ = Σ_k p_k |ψ_k⟩⟨ψ_k| as (Re ρ, Im ρ).
    pub fn density(&self, pops: &[f64]) -> (DMatrix<f64>, DMatrix<f64>) {
        let n = self.psi.nrows();
        let k = self.k;
        let mut re_s = DMatrix::zeros(n, k);
        let mut im_s = DMatrix::zeros(n, k);
        for c in 0..k {
            let w = pops[c].sqrt();
            for r in 0..n {
                re_s[(r, c)] = w * self.psi[(r, c)];
                im_s[(r, c)] = w * self.psi[(r, c + k)];
            }
        }
        let re = &re_s * re_s.transpose() + &im_s * im_s.transpose();
        let y = &im_s * re_s.transpose();
        let im = &y - y.transpose();
        (re, im)
    }
}

/// Field-free phase factors exp(−i ω_n dt) for one time step.
#[derive(Debug, Clone)]
pub struct FreePhases {
    c: Vec<f64>,
    s: Vec<f64>,
    dt_ps: f64,
}

impl FreePhases {
    /// Phases of the block's levels for a step of `dt_ps`.
    pub fn new(ops: &BlockOps, dt_ps: f64) -> FreePhases {
        FreePhases::from_omega(&ops.omega, dt_ps)
    }

    /// Phases exp(−i ω_n dt) for angular frequencies ω (rad/ps) and a step of `dt_ps`.
    pub fn from_omega(omega: &[f64], dt_ps: f64) -> FreePhases {
        let (c, s) = omega
            .iter()
            .map(|w| {
                let (s, c) = (-w * dt_ps).sin_cos();
                (c, s)
            })
            .unzip();
        FreePhases { c, s, dt_ps }
    }

    /// Phases of the block's levels taken from a table of all levels J (cos, sin of −ω_J dt), computing
    /// any level beyond the table directly.
    pub fn from_table(ops: &BlockOps, dt_ps: f64, table: &[(f64, f64)]) -> FreePhases {
        let (c, s) = (0..ops.size())
            .map(|n| {
                let j = ops.block.j(n) as usize;
                match table.get(j) {
                    Some(&cs) => cs,
                    None => {
                        let (s, c) = (-ops.omega[n] * dt_ps).sin_cos();
                        (c, s)
                    }
                }
            })
            .unzip();
        FreePhases { c, s, dt_ps }
    }
}

crate::numeric::wide_simd! {
/// Multiply row r of the complex matrix [Re | Im] (K columns each, column-major, N rows) by c_r + i s_r.
pub(crate) fn rotate_rows(data: &mut [f64], k: usize, n: usize, c: &[f64], s: &[f64]) {
    let (re, im) = data.split_at_mut(n * k);
    let (c, s) = (&c[..n], &s[..n]);
    for (rc, ic) in re.chunks_exact_mut(n).zip(im.chunks_exact_mut(n)) {
        for r in 0..n {
            let (a, b) = (rc[r], ic[r]);
            rc[r] = a * c[r] - b * s[r];
            ic[r] = a * s[r] + b * c[r];
        }
    }
}
}

/// Substep weights of the fourth-order symmetric composition (Suzuki 1990, five Strang steps).
/// Measured on nitrogen at 300 K it is about ten times more accurate than the three-step
/// (Yoshida 1990) composition at equal cost.
fn composition_weights() -> [f64; 5] {
    let p = 1.0 / (4.0 - 4f64.powf(1.0 / 3.0));
    [p, p, 1.0 - 4.0 * p, p, p]
}

/// The time grid of one finite interval: where it ends, the longest step, the sample times (sorted,
/// strictly inside the interval) and the times where the field is not smooth.
#[derive(Debug, Clone, Copy)]
pub struct FiniteSpan<'a> {
    /// End of the interval, ps.
    pub end_ps: f64,
    /// Longest step, ps.
    pub max_step_ps: f64,
    /// Sample times, sorted, strictly inside the interval (ps).
    pub stops: &'a [f64],
    /// Times where the field is not smooth (ps).
    pub breaks: &'a [f64],
}

/// Propagate `state` from its current time to `span.end_ps` under H = H0 + V(t), with H0 diagonal
/// (angular frequencies `omega`, rad/ps) and `kick(state, t, h)` applying exp(−i V(t) h) exactly (t the
/// midpoint of a substep of length h), with steps no longer than `span.max_step_ps`. The step grid lands
/// exactly on every time in `span.stops`, where `at_stop(i, state)` is called with the index of the stop,
/// and on every time in `span.breaks`, so that no step straddles a kink.
pub fn propagate_finite(
    state: &mut BlockState,
    omega: &[f64],
    kick: &mut dyn FnMut(&mut BlockState, f64, f64),
    span: FiniteSpan,
    mut at_stop: impl FnMut(usize, &BlockState),
) {
    let max_step_ps = span.max_step_ps;
    let w = composition_weights();
    let marks = span_marks(state.t_ps, &span);
    for (t_mark, stop) in marks {
        let len = t_mark - state.t_ps;
        if len > 0.0 {
            let nsteps = (len / max_step_ps).ceil().max(1.0) as usize;
            let h = len / nsteps as f64;
            // Strang substeps (half free step, kick at the midpoint, half free step); the free half
            // steps of neighbouring substeps are merged, so only a few distinct free steps occur.
            let first = FreePhases::from_omega(omega, 0.5 * w[0] * h);
            let inner: Vec<FreePhases> = (0..w.len() - 1).map(|i| FreePhases::from_omega(omega, 0.5 * (w[i] + w[i + 1]) * h)).collect();
            let joint = FreePhases::from_omega(omega, 0.5 * (w[w.len() - 1] + w[0]) * h);
            state.free_with(&first);
            for step in 0..nsteps {
                for (i, wi) in w.iter().enumerate() {
                    let hi = wi * h;
                    let t = state.t_ps;
                    kick(state, t, hi);
                    if i + 1 < w.len() {
                        state.free_with(&inner[i]);
                    } else if step + 1 < nsteps {
                        state.free_with(&joint);
                    }
                }
            }
            state.free_with(&first);
            state.t_ps = t_mark;
        }
        if let Some(i) = stop {
            at_stop(i, state);
        }
    }
}

/// The stops and breaks of `span` after `t_ps` and its end, in time order: (time, index of the stop, or
/// None for a break or the end).
fn span_marks(t_ps: f64, span: &FiniteSpan) -> Vec<(f64, Option<usize>)> {
    let mut marks: Vec<(f64, Option<usize>)> = span.stops.iter().enumerate().map(|(i, &t)| (t, Some(i))).collect();
    marks.extend(span.breaks.iter().filter(|&&t| t > t_ps && t < span.end_ps).map(|&t| (t, None)));
    marks.sort_by(|a, b| a.0.total_cmp(&b.0));
    marks.push((span.end_ps, None));
    marks
}

/// Propagate `state` to `span.end_ps` by whole steps `step(state, max)` that each move the state's time
/// by at most `max` (and return how far they moved it), landing on every stop (`at_stop`) and break;
/// `span.max_step_ps` bounds every step.
pub fn propagate_stepwise(
    state: &mut BlockState,
    mut step: impl FnMut(&mut BlockState, f64) -> f64,
    span: FiniteSpan,
    mut at_stop: impl FnMut(usize, &BlockState),
) {
    for (t_mark, stop) in span_marks(state.t_ps, &span) {
        while t_mark - state.t_ps > 1e-12 * t_mark.abs().max(1.0) {
            let max = (t_mark - state.t_ps).min(span.max_step_ps);
            let taken = step(state, max);
            assert!(taken > 0.0 && taken <= max * (1.0 + 1e-12), "propagate_stepwise: a step of {taken} ps where at most {max} ps was allowed");
        }
        state.t_ps = t_mark;
        if let Some(i) = stop {
            at_stop(i, state);
        }
    }
}

/// Slow, independent cross-check: classical fourth-order Runge–Kutta in the interaction picture
/// with fixed step `step_ps`, for one block, from `t0_ps` to `t1_ps`. Returns the final states
/// (Schrödinger picture) as [Re | Im].
pub fn propagate_rk4_reference(ops: &BlockOps, start_index: &[usize], rate: &dyn Fn(f64) -> f64, t0_ps: f64, t1_ps: f64, step_ps: f64) -> DMatrix<f64> {
    use num_complex::Complex64 as C;
    let n = ops.size();
    let nsteps = ((t1_ps - t0_ps) / step_ps).ceil() as usize;
    let h = (t1_ps - t0_ps) / nsteps as f64;
    // i dc/dt = −u(t) Ã(t) c,  Ã_nm = A_nm exp(i(ω_n − ω_m)(t − t0)).
    let deriv = |t: f64, c: &[C]| -> Vec<C> {
        let u = rate(t);
        let ph: Vec<C> = ops.omega.iter().map(|w| C::from_polar(1.0, w * (t - t0_ps))).collect();
        let mut out = vec![C::new(0.0, 0.0); n];
        for r in 0..n {
            let mut acc = ops.cos2_diag[r] * c[r];
            if r + 1 < n {
                acc += ops.cos2_off[r] * ph[r + 1].conj() * c[r + 1] * ph[r];
            }
            if r > 0 {
                acc += ops.cos2_off[r - 1] * ph[r - 1].conj() * c[r - 1] * ph[r];
            }
            out[r] = C::new(0.0, u) * acc;
        }
        out
    };
    let k = start_index.len();
    let mut result = DMatrix::zeros(n, 2 * k);
    for (col, &s) in start_index.iter().enumerate() {
        let mut c = vec![C::new(0.0, 0.0); n];
        c[s] = C::new(1.0, 0.0);
        let mut t = t0_ps;
        for _ in 0..nsteps {
            let k1 = deriv(t, &c);
            let y2: Vec<C> = c.iter().zip(&k1).map(|(a, b)| a + b * (0.5 * h)).collect();
            let k2 = deriv(t + 0.5 * h, &y2);
            let y3: Vec<C> = c.iter().zip(&k2).map(|(a, b)| a + b * (0.5 * h)).collect();
            let k3 = deriv(t + 0.5 * h, &y3);
            let y4: Vec<C> = c.iter().zip(&k3).map(|(a, b)| a + b * h).collect();
            let k4 = deriv(t + h, &y4);
            for r in 0..n {
                c[r] += (k1[r] + 2.0 * k2[r] + 2.0 * k3[r] + k4[r]) * (h / 6.0);
            }
            t += h;
        }
        for r in 0..n {
            // Back to the Schrödinger picture: ψ_n = exp(−i ω_n (t1 − t0)) c_n.
            let z = c[r] * C::from_polar(1.0, -ops.omega[r] * (t1_ps - t0_ps));
            result[(r, col)] = z.re;
            result[(r, col + k)] = z.im;
        }
    }
    result
}
