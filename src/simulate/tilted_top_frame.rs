//! Tops in a tilted static field under slow pulses (tens of picoseconds to nanoseconds, the pulses of
//! mixed-field orientation experiments): each class's field-free eigenstates below an energy cut, every
//! step taken in the frame of the Hamiltonian at its midpoint ([`crate::propagate::local_frame`]).
//!
//! The splitting steps of [`super::tilted_top`] must resolve the fastest transition the basis holds (tens
//! of femtoseconds for a top with every K up to J ≈ 20), so a nanosecond pulse costs days. Here the step
//! follows how fast the fields change instead, and the basis is cut by energy rather than by J: states a
//! slow pulse never reaches (high K of a prolate top) are left out, and the population of the states just
//! below the cut is watched as the edge of the basis (the cut grows when it fills). Each step costs one
//! dense eigendecomposition of the class, shared by every initial state of the class.

use super::Event;
use super::driver::Kernel;
use super::tilted::laser_angles;
use super::tilted_top::{DIP_X, DIP_Z, OBSERVABLES, TiltedTopOps, TiltedTopRun, XX, XZ, ZZ};
use crate::basis::top::TopFrame;
use crate::propagate::local_frame::{Coefficient, step};
use crate::propagate::sparse::Csr;
use crate::propagate::{BlockState, FreePhases};
use crate::units::cm_to_rad_per_ps;
use nalgebra::{DMatrix, SymmetricEigen};
use std::cell::Cell;

/// Weight of the residual's Magnus term each step aims at (the step adapts to it). Measured on SO2 at
/// 0.1 K (a 15 ps pulse in 50 kV/cm at 45°, against the splitting steps): 1e-3 leaves 1.0e-7 in every
/// trace, 4e-3 4.3e-7, 1.6e-2 1.9e-6; the steps of a nanosecond pulse grow as the cube root of it.
pub(crate) const FRAME_WEIGHT: f64 = 2e-3;

/// Pulses whose envelope time scale is at least this long (ps) are stepped in the instantaneous frame.
pub(crate) const FRAME_MIN_TIME_SCALE_PS: f64 = 5.0;

/// Fraction of the energy cut above which a state counts as the basis edge.
const EDGE_FRACTION: f64 = 0.85;

/// One class's operators in its field-free eigenstates below an energy cut, dense, by rising energy.
pub(super) struct FrameOps {
    /// Indices of the kept states among the eigenstates of `full`.
    selected: Vec<usize>,
    /// Field-free angular frequencies of the kept states, rad/ps (ascending).
    pub omega: Vec<f64>,
    /// H0 (diagonal), then the coupling parts ZZ, XX, XZ, dipole Z, dipole X.
    pub parts: Vec<DMatrix<f64>>,
    /// The observables of [`super::tilted_top`], in the same order.
    pub observables: Vec<DMatrix<f64>>,
    edge_states: usize,
}

/// The eigenstates `selected` of `full`, each as (first function index of its group, its coefficients on
/// the group's functions): a column of the function basis that is zero outside one (J, M) group.
fn kept_columns(full: &TiltedTopOps, selected: &[usize]) -> Vec<(usize, Vec<f64>)> {
    selected
        .iter()
        .map(|&i| {
            let &(start, _, slot) = full.groups.iter().find(|g| i >= g.0 && i < g.0 + g.1).expect("every eigenstate lies in a group");
            (start, full.vectors[slot].column(i - start).iter().copied().collect())
        })
        .collect()
}

/// Eᵀ·op·E for the kept columns E of a symmetric `op`, symmetrized (this removes rounding). Both products
/// run over each column's own group only: the cost is the kept count squared times a group's length,
/// not the full basis size.
fn symmetric_part(kept: &[(usize, Vec<f64>)], op: &Csr) -> DMatrix<f64> {
    let n = kept.len();
    // Y = op·E, column by column (op symmetric: its row r is its column r).
    let mut y = DMatrix::<f64>::zeros(op.n, n);
    for (c, (start, v)) in kept.iter().enumerate() {
        let mut yc = y.column_mut(c);
        for (k, &a) in v.iter().enumerate() {
            if a != 0.0 {
                for (col, x) in op.row(start + k) {
                    yc[col] += x * a;
                }
            }
        }
    }
    let m = DMatrix::from_fn(n, n, |r, c| {
        let (start, v) = &kept[r];
        v.iter().enumerate().map(|(k, a)| a * y[(start + k, c)]).sum::<f64>()
    });
    (&m + m.transpose()) * 0.5
}

/// The field-free levels of J, cm⁻¹.
pub(super) fn levels_of_j(frame: &TopFrame, j: i64) -> nalgebra::DVector<f64> {
    let n = (2 * j + 1) as usize;
    let h = DMatrix::from_fn(n, n, |r, c| frame.h0(j, r as i64 - j, c as i64 - j));
    h.symmetric_eigenvalues()
}

/// The smallest J whose lowest field-free level lies above `cut_cm` (every level below the cut has a
/// smaller J).
pub(super) fn j_above(frame: &TopFrame, cut_cm: f64) -> i64 {
    (0..).find(|&j| levels_of_j(frame, j).min() > cut_cm).expect("levels grow without bound")
}

/// The number of field-free states |J τ M⟩ (every M counted) below `cut_cm`, all classes together.
pub(super) fn states_below(frame: &TopFrame, cut_cm: f64) -> usize {
    (0..j_above(frame, cut_cm)).map(|j| levels_of_j(frame, j).iter().filter(|&&e| e < cut_cm).count() * (2 * j as usize + 1)).sum()
}

impl FrameOps {
    pub(super) fn new(full: &TiltedTopOps, cut_cm: f64) -> FrameOps {
        let cut = cm_to_rad_per_ps(cut_cm);
        let mut selected: Vec<usize> = (0..full.omega.len()).filter(|&i| full.omega[i] < cut).collect();
        selected.sort_by(|&a, &b| full.omega[a].total_cmp(&full.omega[b]).then(a.cmp(&b)));
        let e = kept_columns(full, &selected);
        let dense = |op: &Csr| symmetric_part(&e, op);
        let omega: Vec<f64> = selected.iter().map(|&i| full.omega[i]).collect();
        let mut parts = vec![DMatrix::from_diagonal(&nalgebra::DVector::from_vec(omega.clone()))];
        parts.extend([ZZ, XX, XZ, DIP_Z, DIP_X].iter().map(|&p| dense(&full.parts[p])));
        let observables = full.observables.iter().map(dense).collect();
        let edge_states = omega.iter().filter(|&&w| w >= EDGE_FRACTION * cut).count().max(1);
        FrameOps { selected, omega, parts, observables, edge_states }
    }

    pub(super) fn size(&self) -> usize {
        self.selected.len()
    }

    /// M (≥ 0) of each kept state.
    pub(super) fn m_values(&self, full: &TiltedTopOps) -> Vec<i64> {
        self.selected.iter().map(|&i| full.m_of(i)).collect()
    }

    /// `op` (given in the function basis of `full`, the operators this was built from) in the kept states.
    pub(super) fn project(&self, full: &TiltedTopOps, op: &Csr) -> DMatrix<f64> {
        symmetric_part(&kept_columns(full, &self.selected), op)
    }

    /// The kept rows of unit-norm states given in every eigenstate of `full`, and the largest norm² left
    /// out (counting any part beyond the J of `full`, which `all` no longer holds).
    pub(super) fn restrict(&self, all: &DMatrix<f64>) -> (DMatrix<f64>, f64) {
        let kept = DMatrix::from_fn(self.size(), all.ncols(), |r, c| all[(self.selected[r], c)]);
        let lost = (0..all.ncols()).map(|c| 1.0 - kept.column(c).norm_squared()).fold(0.0, f64::max);
        (kept, lost)
    }
}

/// What the classes of one run share: the tilted-top run and the longest step.
pub(super) struct FrameRun<'a> {
    pub base: &'a TiltedTopRun<'a>,
    /// Longest step, ps (a fraction of the shortest envelope time scale).
    pub max_step_ps: f64,
}

pub(super) struct FrameKernel<'a> {
    pub ops: &'a FrameOps,
    pub run: &'a FrameRun<'a>,
    pub pops: Vec<f64>,
    /// The step the next step tries (adapted to the residual's weight).
    next: Cell<f64>,
}

impl<'a> FrameKernel<'a> {
    pub(super) fn new(ops: &'a FrameOps, run: &'a FrameRun<'a>, pops: Vec<f64>) -> FrameKernel<'a> {
        FrameKernel { ops, run, pops, next: Cell::new(run.max_step_ps.min(1.0)) }
    }

    /// The coefficients of H0, the laser parts and the dipole parts at `t` (rad/ps).
    fn coefficients(&self, pulses: &[usize], t: f64) -> [f64; 6] {
        let run = self.run.base;
        let (laser, _) = laser_angles(run.field, pulses, run.delta_alpha_a3, t, 1.0);
        let s = run.static_rate(t);
        let (sn, cs) = run.angle_rad.sin_cos();
        [1.0, -laser[0], -laser[1], -laser[2], -s * cs, -s * sn]
    }
}

impl Kernel for FrameKernel<'_> {
    type Item = Event;
    type Stretch = BlockState;

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
        for (o, x) in self.ops.observables.iter().zip(out.iter_mut()) {
            *x = st.expect_dense(&self.pops, o);
        }
    }

    fn stretch(&self, st: &BlockState) -> BlockState {
        st.clone()
    }

    fn free(&self, st: &mut BlockState, _index: usize, dt: f64) {
        st.free_with(&FreePhases::from_omega(&self.ops.omega, dt));
    }

    fn instant(&self, st: &mut BlockState, item: &Event) {
        // Only slow pulses come here, and a slow pulse is never a kick; a kick is applied exactly anyway.
        if let Event::Kick { pulse, strength, .. } = item {
            let w = super::tilted::laser_weights(&self.run.base.field.pulses[*pulse].polarization);
            let mut a = DMatrix::<f64>::zeros(self.ops.size(), self.ops.size());
            for (p, x) in self.ops.parts[1..4].iter().zip(w) {
                a += p * (x * strength);
            }
            let eig = SymmetricEigen::new(a);
            let angles: Vec<f64> = eig.eigenvalues.iter().copied().collect();
            st.rotate_in_basis(&eig.eigenvectors, &eig.eigenvectors.transpose(), &angles);
        }
    }

    fn finite_kick(&self, index: usize, item: &Event, st: &mut BlockState, _t: f64, h: f64) {
        let _ = self.own_step(index, item, st, h);
    }

    fn breaks(&self, _item: &Event) -> Vec<f64> {
        self.run.base.breaks.clone()
    }

    fn step(&self, _step_ps: f64) -> f64 {
        // The splitting's step rule does not bind here; the weight of the residual does.
        self.run.base.settings.step_fs.map(|fs| fs / 1000.0).unwrap_or(self.run.max_step_ps)
    }

    fn steps_itself(&self) -> bool {
        true
    }

    fn own_step(&self, _index: usize, item: &Event, st: &mut BlockState, max_ps: f64) -> f64 {
        let Event::Finite { pulses, .. } = item else {
            // Only finite intervals are stepped; anything else passes without a field.
            self.free(st, 0, max_ps);
            return max_ps;
        };
        let parts: Vec<&DMatrix<f64>> = self.ops.parts.iter().collect();
        let fixed = self.run.base.settings.step_fs.map(|fs| fs / 1000.0);
        let mut h = fixed.unwrap_or_else(|| self.next.get()).min(max_ps);
        loop {
            let t0 = st.t_ps;
            // The ends are read just inside the step: a switch of the static field (or the edge of a
            // truncated pulse) falls on a step boundary, and its value belongs to one side only.
            let inside = 1e-9 * h;
            let (a, m, b) = (self.coefficients(pulses, t0 + inside), self.coefficients(pulses, t0 + 0.5 * h), self.coefficients(pulses, t0 + h - inside));
            let g: Vec<Coefficient> = (0..6).map(|i| Coefficient::through(a[i], m[i], b[i], h)).collect();
            let saved = (fixed.is_none()).then(|| st.psi.clone());
            let weight = step(st, &parts, &g, h);
            if let Some(psi) = saved {
                if weight > 4.0 * FRAME_WEIGHT && h > 1e-3 {
                    // Too coarse: undo and halve.
                    st.psi = psi;
                    st.t_ps = t0;
                    h *= 0.5;
                    continue;
                }
                let grow = if weight > 0.0 { (FRAME_WEIGHT / weight).cbrt().clamp(0.5, 2.0) } else { 2.0 };
                self.next.set((h * grow).min(self.run.max_step_ps).max(1e-3));
            }
            return h;
        }
    }
}
