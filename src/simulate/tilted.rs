//! Linear molecules in a static field at an angle α to Z in the XZ plane, with laser pulses of any
//! polarization in that plane: the mixed-field orientation experiment with a tilted static field. No
//! rotation leaves both fields unchanged, so M is not conserved and the basis holds every |J M⟩ up to a
//! top J.
//!
//! One exact symmetry is left: the reflection σ through the XZ plane (φ → −φ), which leaves every field
//! in that plane unchanged. With Y_JM(θ, −φ) = (−1)^M Y_J,−M(θ, φ), σ|J M⟩ = (−1)^M |J −M⟩, so the basis
//! splits into two blocks: |J 0⟩ (σ = +1 only) and (|J M⟩ + σ(−1)^M |J −M⟩)/√2 for M > 0. Both
//! direction cosines in the plane, cosθ_X and cosθ_Z, commute with σ; cosθ_Y changes sign under it, so
//! ⟨cosθ_Y⟩ = 0 exactly.
//!
//! A static field on from the start was met adiabatically. Alone it is symmetric about its own axis f,
//! so its dressed states are those of a field along Z — one |M_f| block holding every J, in which no two
//! levels cross as the field grows (von Neumann–Wigner: a block has no further symmetry), so the n-th
//! lowest field-free level correlates with the n-th lowest dressed state — rotated by α about Y:
//! |J M_f⟩_f = Σ_M d^J_{M M_f}(α) |J M⟩. Ranking the dressed states of the tilted problem within σ alone
//! would be wrong: levels of different M_f cross freely.
//!
//! Propagation: a static field alone is exact through the eigendecomposition of H0 − s S, with
//! S = cosα cosθ_Z + sinα cosθ_X and s = μE/ħ; inside a laser pulse, the fourth-order splitting of the
//! other kernels with free phases and a Chebyshev kick of the static and laser couplings together.
//! Field-free or static stretches are sampled from the density in the eigenbasis of H0 − s S.

use super::driver::{ORIENTED_STEP, grow_basis, walk};
use super::{BlockReport, Event, RunResult};
use crate::basis::BlockSymmetry;
use crate::basis::lab::{LabAxis, LabOperator, Polarization};
use crate::basis::wigner::small_d_series;
use crate::error::{Error, Result};
use crate::field::{FieldModel, PulsePolarization};
use crate::numeric::sorted_eigen;
use crate::observe::{DenseSums, FreeSums, LabAxisSeries, LevelSums, Orientation, Trace};
use crate::propagate::polar::PolarOps;
use crate::propagate::sparse::{Csr, chebyshev_kick};
use crate::propagate::{BlockState, FreePhases};
use crate::scenario::SolverSettings;
use crate::units::{cm_to_rad_per_ps, coupling_rad_per_ps_per_a3_wcm2, dipole_rate_rad_per_ps};
use nalgebra::DMatrix;
use rayon::prelude::*;
use std::collections::HashMap;
use std::sync::{Arc, Mutex};

/// Largest J the basis may reach; beyond it the run is refused, not truncated.
pub const MAX_TILTED_J: i64 = 80;

/// Initial states propagated together (one set of products per step).
const CHUNK: usize = 32;

/// Observables of a sample, in this order.
const COS2_X: usize = 0;
const COS2_Z: usize = 1;
const COS_X: usize = 2;
const COS_Z: usize = 3;
const COS3_Z: usize = 4;
const OBSERVABLES: usize = 5;

/// Coupling parts on one sparsity pattern, in this order.
const ZZ: usize = 0;
const XX: usize = 1;
const XZ: usize = 2;
const DIP_Z: usize = 3;
const DIP_X: usize = 4;
const IDENTITY: usize = 5;

/// The states of a σ block up to `j_top`: (J, M ≥ 0), J-major (so a smaller top is a prefix).
fn sigma_states(sigma: i64, j_top: i64) -> Vec<(i64, i64)> {
    (0..=j_top).flat_map(|j| (0..=j).filter(move |&m| m > 0 || sigma > 0).map(move |m| (j, m))).collect()
}

/// Components (M, coefficient) of the σ combination of M ≥ 0.
fn combo(m: i64, sigma: i64) -> Vec<(i64, f64)> {
    if m == 0 {
        vec![(0, 1.0)]
    } else {
        let h = std::f64::consts::FRAC_1_SQRT_2;
        let ph = if m % 2 == 0 { 1.0 } else { -1.0 };
        vec![(m, h), (-m, sigma as f64 * ph * h)]
    }
}

/// A real sparse matrix as rows of (column, value).
pub(crate) type Rows = Vec<Vec<(usize, f64)>>;

/// ⟨J' M'|cosθ_F|J M⟩ between σ combinations (F = X or Z: real, σ-even).
fn direction_rows(states: &[(i64, i64)], sigma: i64, lab: LabAxis) -> Rows {
    let op = LabOperator::direction_cosine(lab, 0);
    let index: HashMap<(i64, i64), usize> = states.iter().enumerate().map(|(i, &s)| (s, i)).collect();
    states
        .iter()
        .map(|&(jp, mp)| {
            let mut row = vec![];
            for j in [jp - 1, jp + 1] {
                for m in (mp - 1).max(0)..=(mp + 1) {
                    let Some(&c) = index.get(&(j, m)) else { continue };
                    let mut v = 0.0;
                    for (a, ca) in combo(mp, sigma) {
                        for (b, cb) in combo(m, sigma) {
                            v += ca * cb * op.element((jp, 0, a), (j, 0, b)).re;
                        }
                    }
                    if v.abs() > 1e-15 {
                        row.push((c, v));
                    }
                }
            }
            row.sort_by_key(|e| e.0);
            row
        })
        .collect()
}

/// A · B for sparse rows.
fn product(a: &Rows, b: &Rows) -> Rows {
    a.iter()
        .map(|row| {
            let mut acc: HashMap<usize, f64> = HashMap::new();
            for &(k, x) in row {
                for &(j, y) in &b[k] {
                    *acc.entry(j).or_insert(0.0) += x * y;
                }
            }
            let mut r: Vec<(usize, f64)> = acc.into_iter().filter(|e| e.1.abs() > 1e-15).collect();
            r.sort_by_key(|e| e.0);
            r
        })
        .collect()
}

/// The first `n` rows and columns.
fn truncate(a: &Rows, n: usize) -> Rows {
    a[..n].iter().map(|r| r.iter().copied().filter(|e| e.0 < n).collect()).collect()
}

fn dense(a: &Rows, n: usize) -> DMatrix<f64> {
    let mut m = DMatrix::zeros(n, n);
    for (r, row) in a.iter().enumerate() {
        for &(c, v) in row {
            m[(r, c)] = v;
        }
    }
    m
}

/// Operators of one σ block up to a top J.
pub(crate) struct TiltedOps {
    sigma: i64,
    j_max: i64,
    /// (J, M ≥ 0) of each state, J-major.
    states: Vec<(i64, i64)>,
    /// Field-free angular frequencies, rad/ps.
    omega: Vec<f64>,
    /// cos²θ_Z, cos²θ_X, cosθ_X cosθ_Z + cosθ_Z cosθ_X, cosθ_Z, cosθ_X and the identity on one pattern.
    parts: Vec<Csr>,
    /// The observables (see `COS2_X` …) as dense matrices.
    observables: Vec<DMatrix<f64>>,
    /// Largest angular frequency of a transition the couplings drive, rad/ps.
    fastest: f64,
    /// States in the top two J values.
    edge_states: usize,
    /// Eigendecompositions of H0 − s S by (rate bits, angle bits), a few kept.
    statics: Mutex<HashMap<(u64, u64), Arc<StaticEigen>>>,
}

/// Eigenfrequencies (rad/ps, ascending) and eigenvectors (columns) of H0 − s S, with the transpose.
struct StaticEigen {
    eps: Vec<f64>,
    s: DMatrix<f64>,
    st: DMatrix<f64>,
}

/// Sparse operators of one σ block up to a top J, exact in the truncated basis (products of direction
/// cosines are taken through intermediate states two J values higher).
pub(crate) struct SigmaOperators {
    /// (J, M ≥ 0) of each state, J-major.
    pub states: Vec<(i64, i64)>,
    pub zz: Rows,
    pub xx: Rows,
    /// cosθ_X cosθ_Z + cosθ_Z cosθ_X.
    pub xz: Rows,
    pub z: Rows,
    pub x: Rows,
    pub zzz: Rows,
}

impl SigmaOperators {
    pub fn new(sigma: i64, j_max: i64) -> SigmaOperators {
        let big = sigma_states(sigma, j_max + 2);
        let states = sigma_states(sigma, j_max);
        let n = states.len();
        let (z, x) = (direction_rows(&big, sigma, LabAxis::Z), direction_rows(&big, sigma, LabAxis::X));
        let zz = product(&z, &z);
        let xx = product(&x, &x);
        let (xz1, zx1) = (product(&x, &z), product(&z, &x));
        let xz: Rows = xz1
            .iter()
            .zip(&zx1)
            .map(|(a, b)| {
                let mut acc: HashMap<usize, f64> = HashMap::new();
                for &(c, v) in a.iter().chain(b) {
                    *acc.entry(c).or_insert(0.0) += v;
                }
                let mut r: Vec<(usize, f64)> = acc.into_iter().filter(|e| e.1.abs() > 1e-15).collect();
                r.sort_by_key(|e| e.0);
                r
            })
            .collect();
        let zzz = product(&zz, &z);
        SigmaOperators {
            zz: truncate(&zz, n),
            xx: truncate(&xx, n),
            xz: truncate(&xz, n),
            z: truncate(&z, n),
            x: truncate(&x, n),
            zzz: truncate(&zzz, n),
            states,
        }
    }
}

/// Index of state (J, M ≥ 0) in a σ block: J-major, J(J+1)/2 states below J for σ = +1 (M = 0 … J′),
/// J(J−1)/2 for σ = −1 (M = 1 … J′).
pub(crate) fn sigma_index(sigma: i64, j: i64, m: i64) -> usize {
    (if sigma > 0 { j * (j + 1) / 2 + m } else { j * (j - 1) / 2 + m - 1 }) as usize
}

impl TiltedOps {
    fn new(mol: &crate::molecule::LinearRotor, sigma: i64, j_max: i64) -> TiltedOps {
        let SigmaOperators { states, zz, xx, xz, z, x, zzz } = SigmaOperators::new(sigma, j_max);
        let n = states.len();
        let id: Rows = (0..n).map(|i| vec![(i, 1.0)]).collect();
        let pieces: Vec<Rows> = vec![zz, xx, xz, z, x, id];
        // One pattern for all parts, so that a step's combination is one pass over the values.
        let positions: Vec<(usize, usize)> = pieces.iter().flat_map(|p| p.iter().enumerate().flat_map(|(r, row)| row.iter().map(move |e| (r, e.0)))).collect();
        let parts: Vec<Csr> = pieces
            .iter()
            .map(|p| {
                let mut t: Vec<(usize, usize, f64)> = positions.iter().map(|&(r, c)| (r, c, 0.0)).collect();
                t.extend(p.iter().enumerate().flat_map(|(r, row)| row.iter().map(move |&(c, v)| (r, c, v))));
                Csr::from_triplets(n, t)
            })
            .collect();
        let omega: Vec<f64> = states.iter().map(|&(j, _)| cm_to_rad_per_ps(mol.energy_cm(j as u32))).collect();
        let mut fastest: f64 = 0.0;
        for p in &pieces[..IDENTITY] {
            for (r, row) in p.iter().enumerate() {
                for &(c, v) in row {
                    if v.abs() > 1e-3 {
                        fastest = fastest.max((omega[r] - omega[c]).abs());
                    }
                }
            }
        }
        let observables = vec![dense(&pieces[XX], n), dense(&pieces[ZZ], n), dense(&pieces[DIP_X], n), dense(&pieces[DIP_Z], n), dense(&zzz, n)];
        let edge_states = states.iter().filter(|s| s.0 >= j_max - 1).count();
        TiltedOps { sigma, j_max, states, omega, parts, observables, fastest, edge_states, statics: Mutex::new(HashMap::new()) }
    }

    fn size(&self) -> usize {
        self.states.len()
    }

    /// Eigendecomposition of H0 − rate (cosα cosθ_Z + sinα cosθ_X), cached.
    fn static_eigen(&self, rate: f64, angle_rad: f64) -> Arc<StaticEigen> {
        let key = (rate.to_bits(), angle_rad.to_bits());
        if let Some(e) = self.statics.lock().expect("static cache").get(&key) {
            return e.clone();
        }
        let (sn, cs) = angle_rad.sin_cos();
        let mut h = (&self.observables[COS_Z] * cs + &self.observables[COS_X] * sn) * -rate;
        for i in 0..self.size() {
            h[(i, i)] += self.omega[i];
        }
        let (eps, s) = sorted_eigen(h);
        let e = Arc::new(StaticEigen { eps, st: s.transpose(), s });
        let mut cache = self.statics.lock().expect("static cache");
        if cache.len() >= 8 {
            cache.clear();
        }
        cache.insert(key, e.clone());
        e
    }

    /// Exact evolution by `dt` in a constant static field (rate in rad/ps at `angle_rad`).
    fn evolve_static(&self, st: &mut BlockState, rate: f64, angle_rad: f64, dt: f64) {
        if dt == 0.0 {
            return;
        }
        if rate == 0.0 {
            st.free_with(&FreePhases::from_omega(&self.omega, dt));
            return;
        }
        let e = self.static_eigen(rate, angle_rad);
        let angles: Vec<f64> = e.eps.iter().map(|w| -w * dt).collect();
        st.rotate_in_basis(&e.s, &e.st, &angles);
        st.t_ps += dt;
    }

    /// ψ ← exp(i(Σ w·laser parts + θ_s S)) ψ (up to a global phase), with laser weights (ZZ, XX, XZ)
    /// whose operator has spectrum in [0, Σ_laser] and a static part of spectrum in [−|θ_s|, |θ_s|].
    fn kick(&self, st: &mut BlockState, laser: [f64; 3], laser_total: f64, theta_s: f64, angle_rad: f64, combined: &mut Csr) {
        let lo = laser_total.min(0.0) - theta_s.abs();
        let hi = laser_total.max(0.0) + theta_s.abs();
        let width = hi - lo;
        if width == 0.0 {
            return;
        }
        let (sn, cs) = angle_rad.sin_cos();
        combined.set_combination(&[
            (&self.parts[ZZ], laser[0] / width),
            (&self.parts[XX], laser[1] / width),
            (&self.parts[XZ], laser[2] / width),
            (&self.parts[DIP_Z], theta_s * cs / width),
            (&self.parts[DIP_X], theta_s * sn / width),
            (&self.parts[IDENTITY], -lo / width),
        ]);
        chebyshev_kick(combined, width, &mut st.psi);
    }
}

/// The laser weights (ZZ, XX, XZ + ZX) of a polarization (spectrum of the coupling in [0, 1]).
pub(crate) fn laser_weights(p: &PulsePolarization) -> [f64; 3] {
    let w = Polarization { angle_rad: p.angle_deg.to_radians(), ellipticity: p.ellipticity }.coupling_weights();
    [w[0].2, w[1].2, w[2].2]
}

/// The laser angles of a substep `h` at `t` (ps) of the pulses `pulses` of `field` on an anisotropy Δα:
/// the weights (ZZ, XX, XZ + ZX) and their total (the spectrum of the coupling lies in [0, total]).
pub(crate) fn laser_angles(field: &FieldModel, pulses: &[usize], delta_alpha_a3: f64, t: f64, h: f64) -> ([f64; 3], f64) {
    let mut laser = [0.0; 3];
    let mut total = 0.0;
    for &i in pulses {
        let p = &field.pulses[i];
        let r = coupling_rad_per_ps_per_a3_wcm2() * delta_alpha_a3 * p.peak_intensity_wcm2 * p.envelope(t);
        total += h * r;
        for (x, w) in laser.iter_mut().zip(laser_weights(&p.polarization)) {
            *x += h * r * w;
        }
    }
    (laser, total)
}

/// One element of the schedule: a laser event or a static-field switch.
pub(crate) enum TiltedItem {
    Laser(Event),
    Switch(f64),
}

impl super::driver::Scheduled for TiltedItem {
    fn span(&self) -> (f64, f64) {
        match self {
            TiltedItem::Laser(e) => e.span(),
            TiltedItem::Switch(t) => (*t, *t),
        }
    }

    fn finite_step(&self) -> Option<f64> {
        match self {
            TiltedItem::Laser(Event::Finite { step_ps, .. }) => Some(*step_ps),
            _ => None,
        }
    }

    fn is_switch(&self) -> bool {
        matches!(self, TiltedItem::Switch(_))
    }
}

/// What the chunks of one run share.
struct TiltedRun<'a> {
    field: &'a FieldModel,
    dipole_debye: f64,
    delta_alpha_a3: f64,
    angle_rad: f64,
    settings: &'a SolverSettings,
}

impl TiltedRun<'_> {
    /// Static dipole rate (rad/ps) at time t.
    fn static_rate(&self, t_ps: f64) -> f64 {
        self.field.static_field.map(|s| dipole_rate_rad_per_ps(self.dipole_debye, s.strength_at(t_ps))).unwrap_or(0.0)
    }
}

struct TiltedKernel<'a> {
    ops: &'a TiltedOps,
    run: &'a TiltedRun<'a>,
    pops: Vec<f64>,
    breaks: Vec<f64>,
    combined: std::cell::RefCell<Csr>,
}

impl TiltedKernel<'_> {
    fn rate_after(&self, st: &BlockState) -> f64 {
        self.run.static_rate(st.t_ps + 1e-9 * (1.0 + st.t_ps.abs()))
    }

    fn sums_at(&self, st: &BlockState, rate: f64) -> DenseSums {
        let (re, im) = st.density(&self.pops);
        let e = self.ops.static_eigen(rate, self.run.angle_rad);
        let to_eig = |m: &DMatrix<f64>| &e.st * m * &e.s;
        let obs: Vec<DMatrix<f64>> = self.ops.observables.iter().map(to_eig).collect();
        DenseSums::new(&to_eig(&re), &to_eig(&im), &obs, &e.eps, st.t_ps)
    }
}

impl super::driver::Kernel for TiltedKernel<'_> {
    type Item = TiltedItem;
    type Stretch = DenseSums;

    fn observables(&self) -> usize {
        OBSERVABLES
    }

    fn omega(&self) -> &[f64] {
        &self.ops.omega
    }

    fn edge(&self, st: &BlockState) -> f64 {
        st.edge_population(self.ops.edge_states)
    }

    fn sample(&self, st: &BlockState, out: &mut [f64]) {
        for (o, x) in out.iter_mut().enumerate() {
            *x = st.expect_dense(&self.pops, &self.ops.observables[o]);
        }
    }

    fn stretch(&self, st: &BlockState) -> DenseSums {
        self.sums_at(st, self.rate_after(st))
    }

    fn free(&self, st: &mut BlockState, _index: usize, dt: f64) {
        let rate = self.rate_after(st);
        self.ops.evolve_static(st, rate, self.run.angle_rad, dt);
    }

    fn instant(&self, st: &mut BlockState, item: &TiltedItem) {
        if let TiltedItem::Laser(Event::Kick { pulse, strength, .. }) = item {
            let w = laser_weights(&self.run.field.pulses[*pulse].polarization);
            let laser = w.map(|x| x * strength);
            self.ops.kick(st, laser, *strength, 0.0, self.run.angle_rad, &mut self.combined.borrow_mut());
        }
    }

    fn finite_kick(&self, _index: usize, item: &TiltedItem, st: &mut BlockState, t: f64, h: f64) {
        let TiltedItem::Laser(Event::Finite { pulses, .. }) = item else { return };
        let (laser, total) = laser_angles(self.run.field, pulses, self.run.delta_alpha_a3, t, h);
        let theta_s = h * self.run.static_rate(t);
        self.ops.kick(st, laser, total, theta_s, self.run.angle_rad, &mut self.combined.borrow_mut());
    }

    fn breaks(&self, _item: &TiltedItem) -> Vec<f64> {
        self.breaks.clone()
    }

    fn step(&self, step_ps: f64) -> f64 {
        let s_max = self.run.field.static_field.map(|s| dipole_rate_rad_per_ps(self.run.dipole_debye, s.strength_kv_cm).abs()).unwrap_or(0.0);
        let step = ORIENTED_STEP.in_block(self.run.settings, step_ps, self.ops.fastest);
        if self.run.settings.step_fs.is_some() || s_max == 0.0 { step } else { step.min(ORIENTED_STEP.coupling / s_max) }
    }
}

/// One initial state: (M_f ≥ 0 about the static field, J, population of one sublevel).
pub(crate) type Column = (i64, i64, f64);

/// What one chunk returns: per observable the samples (weighted by population), the time averages after
/// the last field change, and its basis report.
struct ChunkOutcome {
    values: Vec<Vec<f64>>,
    statics: Vec<f64>,
    sigma: i64,
    j_max: i64,
    size: usize,
    edge: f64,
}

/// The solver for a linear molecule in a tilted static field (operators cached per σ and top J).
pub(crate) struct TiltedSolver {
    cache: Mutex<HashMap<(i64, i64), Arc<TiltedOps>>>,
}

impl TiltedSolver {
    pub fn new() -> TiltedSolver {
        TiltedSolver { cache: Mutex::new(HashMap::new()) }
    }

    fn ops(&self, mol: &crate::molecule::LinearRotor, sigma: i64, j_max: i64) -> Arc<TiltedOps> {
        if let Some(o) = self.cache.lock().expect("tilted cache").get(&(sigma, j_max)) {
            return o.clone();
        }
        let o = Arc::new(TiltedOps::new(mol, sigma, j_max));
        let mut cache = self.cache.lock().expect("tilted cache");
        if cache.len() >= 8 {
            cache.clear();
        }
        cache.insert((sigma, j_max), o.clone());
        o
    }
}

/// Everything `Solver` hands over for one run.
pub(crate) struct TiltedInput<'a> {
    pub mol: &'a crate::molecule::LinearRotor,
    pub ensemble: &'a crate::ensemble::ThermalEnsemble,
    pub dipole_debye: f64,
    pub delta_alpha_a3: f64,
    pub settings: &'a SolverSettings,
    /// Laser events (kicks or finite intervals) of the run.
    pub events: Vec<Event>,
    /// J values of room above the thermal top for the pulses and the static field.
    pub reach: i64,
    /// The input that drives `reach` most (named when the basis would be too large).
    pub reach_key: &'static str,
    pub progress: &'a super::RunProgress,
}

impl TiltedSolver {
    /// Run `field` and sample at `times` (ascending).
    pub fn run(&self, input: TiltedInput, field: &FieldModel, times: &[f64]) -> Result<RunResult> {
        if !field.two_colour.is_empty() || !field.terahertz.is_empty() {
            return Err(Error::input(
                "static_field.angle_deg",
                "a static field at an angle to Z (or pulses polarized away from Z with a static field) cannot yet be combined with two-colour or terahertz pulses; expected angle_deg 0 and pulses along Z",
            ));
        }
        let angle_rad = field.static_field.map(|s| s.angle_deg.to_radians()).unwrap_or(0.0);
        let run = TiltedRun { field, dipole_debye: input.dipole_debye, delta_alpha_a3: input.delta_alpha_a3, angle_rad, settings: input.settings };
        let mut items: Vec<TiltedItem> = input.events.iter().cloned().map(TiltedItem::Laser).collect();
        let switches: Vec<f64> = field.static_field.map(|s| s.on_ps.into_iter().chain(s.off_ps).collect()).unwrap_or_default();
        items.extend(switches.iter().map(|&t| TiltedItem::Switch(t)));
        items.sort_by(|a, b| super::driver::Scheduled::span(a).0.total_cmp(&super::driver::Scheduled::span(b).0));
        let t_first = items.first().map(|e| super::driver::Scheduled::span(e).0).into_iter().chain(times.first().copied()).fold(f64::INFINITY, f64::min);
        let t_first = if t_first.is_finite() { t_first } else { 0.0 };
        let mut breaks: Vec<f64> = field.pulses.iter().flat_map(|p| p.breakpoints_ps()).collect();
        breaks.extend(switches.iter().copied());
        // The field the molecules arrived in: on from the start (no on_ps) and not yet switched off.
        let arrived_in = field.static_field.filter(|s| s.on_ps.is_none() && s.off_ps.map(|o| o >= t_first).unwrap_or(true));
        let s0 = arrived_in.map(|s| dipole_rate_rad_per_ps(input.dipole_debye, s.strength_kv_cm)).unwrap_or(0.0);
        // Initial states: every thermal sublevel (J, M_f) as one column per σ (M_f = 0 in σ = +1 only).
        let levels: Vec<(i64, f64)> = {
            let mut l: Vec<(i64, f64)> = input.ensemble.blocks.iter().filter(|b| b.m == 0).flat_map(|b| b.levels.iter().map(|&(j, p)| (j as i64, p))).collect();
            l.sort_by_key(|x| x.0);
            l
        };
        let j_thermal = levels.last().map(|l| l.0).unwrap_or(0);
        let mut chunks: Vec<(i64, Vec<Column>)> = vec![];
        for sigma in [1i64, -1] {
            let cols: Vec<Column> = levels.iter().flat_map(|&(j, p)| (0..=j).filter(move |&m| m > 0 || sigma > 0).map(move |m| (m, j, p))).collect();
            for part in cols.chunks(CHUNK) {
                chunks.push((sigma, part.to_vec()));
            }
        }
        // Never beyond the distortion turnover of the energy ladder, nor the largest basis this path allows.
        let cap = MAX_TILTED_J.min(input.mol.max_physical_j() as i64);
        if j_thermal + input.reach > cap {
            return Err(Error::input(
                input.reach_key,
                format!("the fields and temperature would need the tilted-field basis beyond J = {cap}; expected weaker fields or a lower temperature"),
            ));
        }
        let top = j_thermal + input.reach;
        let states = sigma_states(1, top).len() as f64;
        // Dense observables and eigenvectors (about a dozen n × n matrices) per worker.
        crate::resources::check_memory(
            states * states * 8.0 * 12.0 * rayon::current_num_threads().max(1) as f64,
            "temperature_k",
            &format!("the tilted-field basis up to J = {top} ({states} states a block)"),
        )?;
        input.progress.plan(chunks.len());
        let outcomes: Vec<ChunkOutcome> = chunks
            .par_iter()
            .map(|(sigma, cols)| {
                let first = cols.last().map(|c| c.1).unwrap_or(0) + input.reach;
                let r = grow_basis(
                    first as usize,
                    cap as usize,
                    |j_max| {
                        let ops = self.ops(input.mol, *sigma, j_max as i64);
                        Ok(try_chunk(&ops, input.mol, cols, &run, &items, times, t_first, s0, &breaks))
                    },
                    || Error::Numerical(format!("tilted static field: the basis would need J > {cap}; lower the field strengths or the temperature")),
                );
                input.progress.finish_one();
                r
            })
            .collect::<Result<Vec<_>>>()?;
        let mut values = vec![vec![0.0; times.len()]; OBSERVABLES];
        let mut statics = [0.0; OBSERVABLES];
        let mut reports: Vec<BlockReport> = vec![];
        for o in &outcomes {
            for (acc, v) in values.iter_mut().zip(&o.values) {
                for (a, b) in acc.iter_mut().zip(v) {
                    *a += b;
                }
            }
            for (a, b) in statics.iter_mut().zip(&o.statics) {
                *a += b;
            }
            let label = BlockSymmetry::ReflectionXZ(o.sigma);
            match reports.iter_mut().find(|r| r.parity == label) {
                Some(r) => {
                    r.j_max = r.j_max.max(o.j_max as u32);
                    r.size = r.size.max(o.size);
                    r.edge_population = r.edge_population.max(o.edge);
                }
                None => reports.push(BlockReport { m: 0, parity: label, j_max: o.j_max as u32, size: o.size, edge_population: o.edge }),
            }
        }
        let cos2_y: Vec<f64> = values[COS2_X].iter().zip(&values[COS2_Z]).map(|(x, z)| 1.0 - x - z).collect();
        let lab_axes = vec![
            LabAxisSeries::new(LabAxis::X, None, values[COS2_X].clone()),
            LabAxisSeries::new(LabAxis::Y, None, cos2_y),
            LabAxisSeries::new(LabAxis::Z, None, values[COS2_Z].clone()),
        ];
        let lab_cos = vec![
            LabAxisSeries::cosine(LabAxis::X, None, values[COS_X].clone()),
            LabAxisSeries::cosine(LabAxis::Y, None, vec![0.0; times.len()]),
            LabAxisSeries::cosine(LabAxis::Z, None, values[COS_Z].clone()),
        ];
        let trace = Trace {
            times_ps: times.to_vec(),
            cos2: values[COS2_Z].clone(),
            cos2_2d: None,
            orientation: Some(Orientation { cos: values[COS_Z].clone(), cos3: Some(values[COS3_Z].clone()) }),
            body_axes: None,
            lab_axes,
            lab_cos,
        };
        // Coherence sums by J do not apply in a static field: goals are scored on the samples alone.
        let mut final_sums = LevelSums::new(vec![], f64::INFINITY, false);
        final_sums.cos2_static = statics[COS2_Z];
        reports.sort_by_key(|r| match r.parity {
            BlockSymmetry::ReflectionXZ(s) => -s,
            _ => 0,
        });
        Ok(RunResult {
            trace,
            permanent_cos2: statics[COS2_Z],
            permanent_cos2_2d: 0.0,
            blocks: reports,
            events: input.events,
            final_sums: FreeSums::Levels(final_sums),
            permanent_cos: Some(statics[COS_Z]),
        })
    }
}

/// The initial states of one chunk as real columns of the σ block: thermal sublevels, or, in a static
/// field on from the start, the dressed states that correlate with them, rotated onto the field axis.
pub(crate) fn initial_columns(sigma: i64, j_max: i64, mol: &crate::molecule::LinearRotor, cols: &[Column], s0: f64, angle_rad: f64) -> DMatrix<f64> {
    let n = sigma_index(sigma, j_max, j_max) + 1;
    let mut out = DMatrix::zeros(n, cols.len());
    // d^J_{M M_f}(α) for every J, per (M, M_f) used.
    let mut d_cache: HashMap<(i64, i64), Vec<f64>> = HashMap::new();
    let mut d = |m: i64, mf: i64, j: i64| -> f64 { d_cache.entry((m, mf)).or_insert_with(|| small_d_series(m, mf, angle_rad, j_max))[j as usize] };
    let mut dressed: HashMap<i64, Arc<crate::propagate::polar::StaticEigen>> = HashMap::new();
    let mut polar: HashMap<i64, PolarOps> = HashMap::new();
    for (c, &(mf, j, _)) in cols.iter().enumerate() {
        // Amplitudes over J' of the state along the field axis (|J' M_f⟩_f).
        let along: Vec<(i64, f64)> = if s0 == 0.0 {
            vec![(j, 1.0)]
        } else {
            let e = dressed
                .entry(mf)
                .or_insert_with(|| polar.entry(mf).or_insert_with(|| PolarOps::new(mf as u32, (j_max - mf + 1) as usize, mol)).static_eigen(s0))
                .clone();
            (0..e.s.nrows()).map(|r| (mf + r as i64, e.s[(r, (j - mf) as usize)])).collect()
        };
        for (jp, a) in along {
            if a == 0.0 {
                continue;
            }
            // The σ combination of ±M_f along the field axis, rotated by α about Y and projected on the
            // σ combinations along Z.
            let comps = combo(mf, sigma);
            for m in (0..=jp).filter(|&m| m > 0 || sigma > 0) {
                let mut v = 0.0;
                for (mm, cm) in combo(m, sigma) {
                    for &(mfm, cf) in &comps {
                        v += cm * cf * d(mm, mfm, jp);
                    }
                }
                out[(sigma_index(sigma, jp, m), c)] += a * v;
            }
        }
    }
    out
}

#[allow(clippy::too_many_arguments)]
fn try_chunk(
    ops: &TiltedOps,
    mol: &crate::molecule::LinearRotor,
    cols: &[Column],
    run: &TiltedRun,
    items: &[TiltedItem],
    times: &[f64],
    t_first: f64,
    s0: f64,
    breaks: &[f64],
) -> Option<ChunkOutcome> {
    let pops: Vec<f64> = cols.iter().map(|c| c.2).collect();
    let start = initial_columns(ops.sigma, ops.j_max, mol, cols, s0, run.angle_rad);
    let state = BlockState::from_columns(&start, t_first);
    let kernel = TiltedKernel { ops, run, pops: pops.clone(), breaks: breaks.to_vec(), combined: std::cell::RefCell::new(ops.parts[IDENTITY].clone()) };
    let w = walk(&kernel, state, items, times, run.settings.edge_tolerance)?;
    let mut values = w.values;
    if values.is_empty() {
        values = vec![vec![0.0; times.len()]; OBSERVABLES];
    }
    for (range, _, sums) in &w.stretches {
        sums.eval_series(&times[range.clone()], |i, v| {
            for (o, x) in v.into_iter().enumerate() {
                values[o][range.start + i] = x;
            }
        });
    }
    let state = w.state;
    let rate_end = run.static_rate(state.t_ps + 1e-9 * (1.0 + state.t_ps.abs()));
    let sums = kernel.sums_at(&state, rate_end);
    let rest = w.rest;
    sums.eval_series(&times[rest.clone()], |i, v| {
        for (o, x) in v.into_iter().enumerate() {
            values[o][rest.start + i] = x;
        }
    });
    // The edge also after the last element, in the eigenbasis where the states now stand still.
    let e = ops.static_eigen(rate_end, run.angle_rad);
    let (re, _) = state.density(&pops);
    let rho_e = &e.st * &re * &e.s;
    let n = ops.size();
    let total: f64 = pops.iter().sum();
    let mut top = 0.0;
    for i in 0..n {
        let at_edge: f64 = (n - ops.edge_states..n).map(|r| e.s[(r, i)].powi(2)).sum();
        top += rho_e[(i, i)] * at_edge;
    }
    let edge = w.edge.max(if total > 0.0 { top / total } else { 0.0 });
    if edge > run.settings.edge_tolerance {
        return None;
    }
    Some(ChunkOutcome { values, statics: sums.statics, sigma: ops.sigma, j_max: ops.j_max, size: n, edge })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::basis::lab::product_element;
    use crate::molecule::Molecule;

    /// A σ state as primitive components ((J, K = 0, M), coefficient).
    fn primitive(j: i64, m: i64, sigma: i64) -> Vec<((i64, i64, i64), f64)> {
        combo(m, sigma).into_iter().map(|(mm, c)| ((j, 0, mm), c)).collect()
    }

    #[test]
    fn block_operators_match_primitive_elements_and_states_are_indexed_in_order() {
        // Reference: LabOperator elements on primitive |J 0 M⟩ (checked against Euler-angle quadrature in
        // basis::lab) and their exact products through every intermediate J (`product_element`), expanded
        // over the σ combinations by hand. The linear molecule's ⟨J+1 M|cosθ|J M⟩ closed form,
        // sqrt(((J+1)² − M²)/((2J+1)(2J+3))) (R. N. Zare, Angular Momentum, ch. 3), checks the phases.
        let mol = Molecule::from_library("OCS", "molecule").unwrap();
        let lin = mol.as_linear().unwrap();
        let z = LabOperator::direction_cosine(LabAxis::Z, 0);
        let x = LabOperator::direction_cosine(LabAxis::X, 0);
        for sigma in [1i64, -1] {
            let ops = TiltedOps::new(lin, sigma, 5);
            for (i, &(j, m)) in ops.states.iter().enumerate() {
                assert_eq!(sigma_index(sigma, j, m), i);
            }
            assert_eq!(ops.size(), sigma_states(sigma, 5).len());
            let dense_parts: Vec<DMatrix<f64>> = ops.parts.iter().map(|p| p.to_dense()).collect();
            for (a, &(ja, ma)) in ops.states.iter().enumerate() {
                for (b, &(jb, mb)) in ops.states.iter().enumerate() {
                    let (bra, ket) = (primitive(ja, ma, sigma), primitive(jb, mb, sigma));
                    let el = |f: &dyn Fn((i64, i64, i64), (i64, i64, i64)) -> f64| -> f64 {
                        bra.iter().flat_map(|&(p, cp)| ket.iter().map(move |&(q, cq)| (p, q, cp * cq))).map(|(p, q, c)| c * f(p, q)).sum()
                    };
                    let want = [
                        el(&|p, q| product_element(&z, &z, p, q).re),
                        el(&|p, q| product_element(&x, &x, p, q).re),
                        el(&|p, q| (product_element(&x, &z, p, q) + product_element(&z, &x, p, q)).re),
                        el(&|p, q| z.element(p, q).re),
                        el(&|p, q| x.element(p, q).re),
                    ];
                    for (part, w) in want.iter().enumerate() {
                        assert!(
                            (dense_parts[part][(a, b)] - w).abs() < 1e-13,
                            "σ {sigma} part {part} ({ja},{ma}) ({jb},{mb}): {} vs {w}",
                            dense_parts[part][(a, b)]
                        );
                    }
                    if jb == ja + 1 && mb == ma {
                        let jf = ja as f64;
                        let closed = (((jf + 1.0).powi(2) - (ma * ma) as f64) / ((2.0 * jf + 1.0) * (2.0 * jf + 3.0))).sqrt();
                        assert!((ops.observables[COS_Z][(b, a)] - closed).abs() < 1e-13);
                    }
                }
            }
        }
    }

    #[test]
    fn rotated_start_states_are_normalized_and_lie_along_the_field() {
        // Exact: a rotation keeps norms, and ⟨J M_f|cosθ_f|J M_f⟩ = 0 for a single field-free level while a
        // rotated |1 0⟩ (the p_z-like state along f) has ⟨cos²θ_Z⟩ = cos²α·3/5 + sin²α·1/5 (its ⟨cos²θ_f⟩
        // is 3/5 and the perpendicular ones 1/5 each; common practice: ⟨1 0|cos²θ|1 0⟩ = 3/5).
        let mol = Molecule::from_library("OCS", "molecule").unwrap();
        let lin = mol.as_linear().unwrap();
        let alpha = 0.7f64;
        let ops = TiltedOps::new(lin, 1, 6);
        let start = initial_columns(1, 6, lin, &[(0, 1, 1.0), (1, 2, 1.0)], 0.0, alpha);
        for c in 0..2 {
            assert!((start.column(c).norm() - 1.0).abs() < 1e-13);
        }
        let v = start.column(0).clone_owned();
        let cos2_z = (v.transpose() * &ops.observables[COS2_Z] * &v)[(0, 0)];
        let want = alpha.cos().powi(2) * 0.6 + alpha.sin().powi(2) * 0.2;
        assert!((cos2_z - want).abs() < 1e-13, "{cos2_z} vs {want}");
    }
}
