//! Coherence sums labelled by pairs of field-free levels, for rotors whose levels are not labelled by J
//! alone (symmetric and asymmetric tops). Blocks of different M share levels, so their coherences
//! between the same two levels add into one coefficient before any time is evaluated.

use nalgebra::DMatrix;
use std::collections::HashMap;

/// A coherence coefficient between two states of a block: (state a, state b, (Re, Im) of ρ_ab O_ba).
pub type StatePair = (usize, usize, (f64, f64));

/// Populations below this are treated as empty when collecting coherences.
const TRIM: f64 = 1e-22;

/// Ensemble coherence sums over level pairs for several observables:
/// ⟨O⟩(t) = S_O + 2 Re Σ_{i<j} C_{O,ij} exp(−i(ω_i − ω_j)(t − t0)); each observable keeps its own pairs.
#[derive(Debug, Clone)]
pub struct PairSums {
    /// Time at which the states were taken, ps.
    pub t0_ps: f64,
    /// Angular frequency of each level, rad/ps (NaN for levels never seen).
    omega: Vec<f64>,
    /// Σ_i ρ_ii O_ii per observable.
    diag: Vec<f64>,
    obs: Vec<ObservablePairs>,
}

/// The coherence coefficients of one observable.
#[derive(Debug, Clone, Default)]
struct ObservablePairs {
    pairs: Vec<(u32, u32)>,
    coeffs: Vec<(f64, f64)>,
    index: HashMap<(u32, u32), usize>,
}

impl ObservablePairs {
    /// Add C to the ordered pair (la, lb), conjugating when the order flips.
    fn add(&mut self, la: u32, lb: u32, c: (f64, f64)) {
        let (key, c) = if la < lb { ((la, lb), c) } else { ((lb, la), (c.0, -c.1)) };
        let slot = match self.index.get(&key) {
            Some(&s) => s,
            None => {
                self.pairs.push(key);
                self.coeffs.push((0.0, 0.0));
                self.index.insert(key, self.pairs.len() - 1);
                self.pairs.len() - 1
            }
        };
        self.coeffs[slot].0 += c.0;
        self.coeffs[slot].1 += c.1;
    }
}

impl PairSums {
    /// Empty sums for `observables` observables at time `t0_ps`.
    pub fn new(observables: usize, t0_ps: f64) -> PairSums {
        PairSums { t0_ps, omega: vec![], diag: vec![0.0; observables], obs: vec![ObservablePairs::default(); observables] }
    }

    /// Number of observables.
    pub fn observables(&self) -> usize {
        self.obs.len()
    }

    /// Number of level pairs carried, over all observables.
    pub fn pair_count(&self) -> usize {
        self.obs.iter().map(|o| o.pairs.len()).sum()
    }

    /// Make sure level `id` exists with frequency `omega` (rad/ps).
    fn level(&mut self, id: u32, omega: f64) {
        if self.omega.len() <= id as usize {
            self.omega.resize(id as usize + 1, f64::NAN);
        }
        self.omega[id as usize] = omega;
    }

    /// Add one block with weight `g`: density matrix ρ = (re, im) and dense observables in the block's
    /// eigenbasis, whose states are levels `level_of` with frequencies `omega` (rad/ps).
    pub fn add_block(&mut self, g: f64, rho: (&DMatrix<f64>, &DMatrix<f64>), observables: &[&DMatrix<f64>], level_of: &[u32], omega: &[f64]) {
        let (re, im) = rho;
        let n = level_of.len();
        let keep: Vec<usize> = (0..n).filter(|&i| re[(i, i)] > TRIM).collect();
        for &i in &keep {
            self.level(level_of[i], omega[i]);
        }
        for (o, op) in observables.iter().enumerate() {
            for (a, &i) in keep.iter().enumerate() {
                self.diag[o] += g * re[(i, i)] * op[(i, i)];
                for &j in &keep[a + 1..] {
                    let v = op[(j, i)];
                    if v != 0.0 {
                        // ρ_ij O_ji for the pair (i, j).
                        self.obs[o].add(level_of[i], level_of[j], (g * re[(i, j)] * v, g * im[(i, j)] * v));
                    }
                }
            }
        }
    }

    /// Add one block's coefficients with weight `g`: diagonal sums per observable and, per observable, the
    /// coefficients ρ_ab O_ba of pairs of the block's states (a < b); states are levels `level_of` with
    /// frequencies `omega` (rad/ps).
    pub fn add_pairs(&mut self, g: f64, diag: &[f64], pairs: &[Vec<StatePair>], level_of: &[u32], omega: &[f64]) {
        for (o, d) in diag.iter().enumerate() {
            self.diag[o] += g * d;
        }
        for (o, list) in pairs.iter().enumerate() {
            for &(a, b, c) in list {
                self.level(level_of[a], omega[a]);
                self.level(level_of[b], omega[b]);
                self.obs[o].add(level_of[a], level_of[b], (g * c.0, g * c.1));
            }
        }
    }

    /// Add Σ over one level's own sublevels (a time-independent term) to observable `o`.
    pub fn add_diagonal(&mut self, o: usize, value: f64) {
        self.diag[o] += value;
    }

    /// Add the coefficient C = ρ_ab O_ba of levels a and b (ids with angular frequencies, rad/ps) to observable `o`.
    pub fn add_level_pair(&mut self, o: usize, a: (u32, f64), b: (u32, f64), c: (f64, f64)) {
        self.level(a.0, a.1);
        self.level(b.0, b.1);
        self.obs[o].add(a.0, b.0, c);
    }

    /// Values of every observable at time t (ps).
    pub fn eval(&self, t_ps: f64) -> Vec<f64> {
        let z = self.phases(t_ps);
        self.eval_with(&z)
    }

    /// Values at many times (ascending); on a uniform grid the phases advance by one complex product per
    /// level and step, re-synchronized every 64 steps.
    pub fn eval_series(&self, times_ps: &[f64], mut out: impl FnMut(usize, Vec<f64>)) {
        let n = times_ps.len();
        if !super::is_uniform_grid(times_ps) {
            for (i, &t) in times_ps.iter().enumerate() {
                out(i, self.eval(t));
            }
            return;
        }
        let dt = (times_ps[n - 1] - times_ps[0]) / (n - 1) as f64;
        let step = self.phases(self.t0_ps + dt);
        let mut z = vec![];
        for i in 0..n {
            if i % 64 == 0 {
                z = self.phases(times_ps[0] + i as f64 * dt);
            } else {
                for (zk, sk) in z.iter_mut().zip(&step) {
                    *zk = (zk.0 * sk.0 - zk.1 * sk.1, zk.0 * sk.1 + zk.1 * sk.0);
                }
            }
            out(i, self.eval_with(&z));
        }
    }

    /// Exact means of every observable over [a, b] (ps).
    pub fn mean_over(&self, a_ps: f64, b_ps: f64) -> Vec<f64> {
        let len = b_ps - a_ps;
        if len <= 0.0 {
            return self.eval(a_ps);
        }
        let (ta, tb) = (a_ps - self.t0_ps, b_ps - self.t0_ps);
        let mut out = self.diag.clone();
        for (o, op) in self.obs.iter().enumerate() {
            for (&(i, j), c) in op.pairs.iter().zip(&op.coeffs) {
                let d = self.omega[i as usize] - self.omega[j as usize];
                // Mean of exp(−iD τ) over [ta, tb].
                let (pr, pi) = if (d * len).abs() < 1e-9 {
                    let (s, c) = (-d * 0.5 * (ta + tb)).sin_cos();
                    (c, s)
                } else {
                    let (sb, cb) = (-d * tb).sin_cos();
                    let (sa, ca) = (-d * ta).sin_cos();
                    (-(sb - sa) / (d * len), (cb - ca) / (d * len))
                };
                out[o] += 2.0 * (c.0 * pr - c.1 * pi);
            }
        }
        out
    }

    /// Exact infinite-time averages: the diagonal plus coherences between degenerate levels.
    pub fn statics(&self) -> Vec<f64> {
        let mut out = self.diag.clone();
        for (o, op) in self.obs.iter().enumerate() {
            for (&(i, j), c) in op.pairs.iter().zip(&op.coeffs) {
                if (self.omega[i as usize] - self.omega[j as usize]).abs() < 1e-12 {
                    out[o] += 2.0 * c.0;
                }
            }
        }
        out
    }

    fn phases(&self, t_ps: f64) -> Vec<(f64, f64)> {
        let tau = t_ps - self.t0_ps;
        self.omega
            .iter()
            .map(|w| {
                if w.is_nan() {
                    return (0.0, 0.0);
                }
                let (s, c) = (-w * tau).sin_cos();
                (c, s)
            })
            .collect()
    }

    fn eval_with(&self, z: &[(f64, f64)]) -> Vec<f64> {
        let mut out = self.diag.clone();
        for (o, op) in self.obs.iter().enumerate() {
            let mut acc = 0.0;
            for (&(i, j), c) in op.pairs.iter().zip(&op.coeffs) {
                let (a, b) = (z[i as usize], z[j as usize]);
                // z_i conj(z_j)
                let (pr, pi) = (a.0 * b.0 + a.1 * b.1, a.1 * b.0 - a.0 * b.1);
                acc += c.0 * pr - c.1 * pi;
            }
            out[o] += 2.0 * acc;
        }
        out
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn two_level_beat_matches_the_closed_form() {
        // A superposition (|0⟩ + |1⟩)/√2 with O = σx has ⟨O⟩(t) = cos((ω1 − ω0) t) (exact two-level result);
        // its mean over [0, T] is sin(ΔT)/(ΔT).
        let rho_re = DMatrix::from_row_slice(2, 2, &[0.5, 0.5, 0.5, 0.5]);
        let rho_im = DMatrix::zeros(2, 2);
        let o = DMatrix::from_row_slice(2, 2, &[0.0, 1.0, 1.0, 0.0]);
        let omega = [0.0, 3.0];
        // The same block added as two halves with swapped level labels must give the same sums.
        let mut s = PairSums::new(1, 0.0);
        s.add_block(0.5, (&rho_re, &rho_im), &[&o], &[4, 7], &omega);
        let swapped_omega = [3.0, 0.0];
        s.add_block(0.5, (&rho_re, &rho_im), &[&o], &[7, 4], &swapped_omega);
        for t in [0.0, 0.3, 1.7] {
            assert!((s.eval(t)[0] - (3.0 * t).cos()).abs() < 1e-14);
        }
        let m = s.mean_over(0.0, 2.0)[0];
        assert!((m - (6.0f64).sin() / 6.0).abs() < 1e-14);
        assert_eq!(s.statics(), vec![0.0]);
        let times: Vec<f64> = (0..200).map(|i| i as f64 * 0.05).collect();
        s.eval_series(&times, |i, v| assert!((v[0] - (3.0 * times[i]).cos()).abs() < 1e-12));
    }
}
