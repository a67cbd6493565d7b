//! Blocks for fields that break the parity of J (static, two-colour and terahertz fields): one block
//! per |M| holding every J. Couplings that are functions of cosθ are diagonal in the eigenbasis of the
//! block's cosθ matrix (a discrete-variable representation), so a kick
//! exp(i[θ1 cosθ + θ2 cos²θ + θ3 cos³θ]) is exact there; evolution in a constant static field is exact
//! through the eigendecomposition of H0 − μE cosθ.

use crate::basis::{BOTH_PARITIES, Block};
use crate::molecule::LinearRotor;
use crate::propagate::BlockState;
use nalgebra::{DMatrix, SymmetricEigen};
use std::collections::HashMap;
use std::sync::{Arc, Mutex};

/// Number of observables carried by polar blocks: cos²θ, |cosθ|, cosθ, cos³θ.
pub const POLAR_OBSERVABLES: usize = 4;

/// Precomputed operators of one both-parity block.
#[derive(Debug)]
pub struct PolarOps {
    /// The block (parity `BOTH_PARITIES`).
    pub block: Block,
    /// Field-free angular frequencies E_J/ħ, rad/ps.
    pub omega: Vec<f64>,
    /// Eigenvalues x_q of the block's cosθ matrix (the grid of the representation).
    pub nodes: Vec<f64>,
    /// Eigenvectors of the cosθ matrix as columns.
    pub w: DMatrix<f64>,
    /// Transpose of `w`.
    pub wt: DMatrix<f64>,
    /// Matrices of cos²θ, |cosθ|, cosθ and cos³θ in the J basis (exact, by quadrature).
    pub observables: [DMatrix<f64>; POLAR_OBSERVABLES],
    /// J of the first basis state (consecutive J values follow).
    pub j_first: u32,
    /// How many identical blocks this one stands for (±M, ±K).
    pub degeneracy: f64,
    /// Label for reports ("both" for linear molecules; K and M for symmetric tops).
    pub label: crate::basis::BlockSymmetry,
    statics: Mutex<HashMap<u64, Arc<StaticEigen>>>,
}

/// Eigendecomposition of H0 − s cosθ (s = μE/ħ in rad/ps) for one block.
#[derive(Debug)]
pub struct StaticEigen {
    /// Dipole coupling rate s, rad/ps.
    pub rate: f64,
    /// Eigen-frequencies ε_i (rad/ps), ascending.
    pub eps: Vec<f64>,
    /// Eigenvectors as columns (J basis × eigenbasis).
    pub s: DMatrix<f64>,
    /// Transpose of `s`.
    pub st: DMatrix<f64>,
}

impl PolarOps {
    /// Build the operators of the |M| = m block with `size` states for `mol`.
    pub fn new(m: u32, size: usize, mol: &LinearRotor) -> PolarOps {
        let block = Block { m, parity: BOTH_PARITIES, size };
        let cos = block.matrix_of(|x| x, 1);
        let observables = [block.matrix_of(|x| x * x, 2), block.matrix_of(f64::abs, 1), cos, block.matrix_of(|x| x * x * x, 3)];
        PolarOps::from_parts(block, block.j_min(), block.m_degeneracy(), crate::basis::BlockSymmetry::EveryJ, block.frequencies(mol), observables)
    }

    /// A block from its parts: first J, degeneracy, report label, field-free frequencies (rad/ps) and the
    /// matrices of cos²θ, |cosθ|, cosθ and cos³θ (the third one defines the grid of the representation).
    pub fn from_parts(
        block: Block,
        j_first: u32,
        degeneracy: f64,
        label: crate::basis::BlockSymmetry,
        omega: Vec<f64>,
        observables: [DMatrix<f64>; POLAR_OBSERVABLES],
    ) -> PolarOps {
        let eig = SymmetricEigen::new(observables[2].clone());
        PolarOps {
            block,
            omega,
            nodes: eig.eigenvalues.iter().copied().collect(),
            wt: eig.eigenvectors.transpose(),
            w: eig.eigenvectors,
            observables,
            j_first,
            degeneracy,
            label,
            statics: Mutex::new(HashMap::new()),
        }
    }

    /// J of the last basis state.
    pub fn j_last(&self) -> u32 {
        self.j_first + self.size() as u32 - 1
    }

    /// Number of basis states.
    pub fn size(&self) -> usize {
        self.block.size
    }

    /// Eigendecomposition of H0 − rate·cosθ, cached per rate.
    pub fn static_eigen(&self, rate: f64) -> Arc<StaticEigen> {
        let key = rate.to_bits();
        if let Some(e) = self.statics.lock().expect("lock").get(&key) {
            return e.clone();
        }
        let mut h = -rate * &self.observables[2];
        for n in 0..self.size() {
            h[(n, n)] += self.omega[n];
        }
        let eig = SymmetricEigen::new(h);
        // Sort ascending so that the n-th dressed state correlates with the n-th field-free level.
        let mut order: Vec<usize> = (0..self.size()).collect();
        order.sort_by(|&a, &b| eig.eigenvalues[a].total_cmp(&eig.eigenvalues[b]));
        let eps = order.iter().map(|&i| eig.eigenvalues[i]).collect();
        let mut s = DMatrix::zeros(self.size(), self.size());
        for (c, &i) in order.iter().enumerate() {
            // Deterministic sign: the largest component positive.
            let col = eig.eigenvectors.column(i);
            let big = col.iter().cloned().fold(0.0f64, |a, b| if b.abs() > a.abs() { b } else { a });
            let sign = if big < 0.0 { -1.0 } else { 1.0 };
            for r in 0..self.size() {
                s[(r, c)] = sign * col[r];
            }
        }
        let e = Arc::new(StaticEigen { rate, eps, st: s.transpose(), s });
        let mut cache = self.statics.lock().expect("lock");
        // A search tries a new field strength at every step: keep the cache bounded.
        if cache.len() >= 16 {
            cache.clear();
        }
        cache.insert(key, e.clone());
        e
    }

    /// Kick exp(i[θ1 cosθ + θ2 cos²θ + θ3 cos³θ]) applied to all states (powers of cosθ taken as powers
    /// of the cosθ matrix, exact except at the basis edge, which the edge check keeps empty).
    pub fn kick(&self, state: &mut BlockState, theta1: f64, theta2: f64, theta3: f64) {
        if theta2 == 0.0 && theta1 == 0.0 && theta3 == 0.0 {
            return;
        }
        let angles: Vec<f64> = self.nodes.iter().map(|x| x * (theta1 + x * (theta2 + x * theta3))).collect();
        state.rotate_in_basis(&self.w, &self.wt, &angles);
    }

    /// Exact evolution for `dt_ps` in a constant static field (dipole coupling rate `rate`, rad/ps).
    pub fn evolve_static(&self, state: &mut BlockState, rate: f64, dt_ps: f64) {
        if dt_ps == 0.0 {
            return;
        }
        if rate == 0.0 {
            state.free_with(&crate::propagate::FreePhases::from_omega(&self.omega, dt_ps));
            return;
        }
        let e = self.static_eigen(rate);
        let angles: Vec<f64> = e.eps.iter().map(|w| -w * dt_ps).collect();
        state.rotate_in_basis(&e.s, &e.st, &angles);
        state.t_ps += dt_ps;
    }
}
