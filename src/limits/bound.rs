//! An upper bound on ⟨cos²θ⟩ (or a lower bound, for anti-alignment) that no pulse train under a given
//! intensity ceiling can pass, for linear molecules in pulses polarized along Z.
//!
//! Why it holds (the argument, written out in docs/physics.md, "The ceiling no train can pass"):
//! 1. Pulses along Z conserve M and the parity of J, so the ensemble evolves block by block, each block
//!    (|M|, parity) by its own unitary U.
//! 2. The laser coupling is −u(t) cos²θ with u(t) ≥ 0 (rad/ps) and ∫u dt = P, the kick strength; a train
//!    of n pulses at the ceiling has at most P_total = n P_max. In the interaction picture of the
//!    J-diagonal part (free rotation plus the diagonal of cos²θ), only the part of cos²θ that changes J
//!    by ±2 is left; its norm is at most c u(t), with c the largest Gershgorin row sum of that part
//!    (about 0.554, reached at J = 2, M = 0). Reaching n steps (2n in J) takes at least n factors of
//!    it in the Dyson series, so the amplitude beyond n steps is at most ε = Σ_{k≥n} x^k/k!, x = c P_total,
//!    whatever the pulse shapes and delays.
//! 3. Let Π project on J ≤ J_cut (J_cut = highest populated J of the block + 2n). Then
//!    ⟨cos²θ⟩ ≤ Tr(UρU† ΠCΠ) + 2ε (Cauchy–Schwarz on the two cross terms, ‖C‖ ≤ 1), and by von Neumann's
//!    trace inequality Tr(UρU† ΠCΠ) ≤ Σ_k p_k↓ μ_k↓: the populations sorted down against the sorted
//!    eigenvalues of ΠCΠ (J. von Neumann, "Some matrix-inequalities and metrization of matric-space",
//!    Tomsk Univ. Rev. 1, 286 (1937); for quantum control the same pairing is the "kinematic bound" of
//!    M. D. Girardeau et al., Phys. Rev. A 58, 2684 (1998), from memory).
//! 4. Levels the thermal cut left out (their share of the partition function, δ) can add at most δ.
//! 5. Every number of steps n and every thermal cut (levels below it left out, their population added)
//!    gives a valid bound; `BoundTable::bound` tries up to 16 step counts and nine cuts and keeps the
//!    smallest. Only the extreme eigenvalues are needed: Sturm bisection finds them, rounded outwards.
//!
//! The bound is rigorous but not tight: it ignores that the free evolution between kicks cannot be
//! chosen at will. It answers "how far could any train under this ceiling get", not "what will mine do".

use crate::basis::{cos2_diag, cos2_up2};
use crate::ensemble::ThermalEnsemble;
use crate::molecule::Molecule;

/// Amplitude allowed to leak past the cut (adds 2ε to the bound).
pub const LEAK_AMPLITUDE: f64 = 1e-4;

/// Thermal cut of the ensemble the bound uses (its discarded population is added to the bound).
const THERMAL_CUT: f64 = 1e-10;

/// Largest J ever used for the cut (a bound beyond it would be of no practical use).
const MAX_CUT_J: u32 = 4000;

/// The bound and how it was made.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct KinematicBound {
    /// The bound on ⟨cos²θ⟩: an upper bound when maximizing, a lower bound when minimizing.
    pub value: f64,
    /// Total kick strength P_total allowed (rad): the number of pulses times the strongest pulse's.
    pub total_kick: f64,
    /// Steps of ΔJ = 2 beyond the highest populated J kept inside the bound's J levels.
    pub steps: u32,
    /// Highest J of the levels the bound pairs (over all blocks).
    pub j_cut: u32,
    /// Amplitude bound ε beyond the cut (the bound includes 2ε).
    pub leak: f64,
    /// Thermal population the ensemble left out (the bound includes it).
    pub discarded: f64,
}

/// Σ_{k≥n} x^k/k!, the tail of the exponential series (x ≥ 0), summed from its largest term down to
/// below 1e-17 of the running sum.
pub fn exponential_tail(x: f64, n: u32) -> f64 {
    if x == 0.0 {
        return if n == 0 { 1.0 } else { 0.0 };
    }
    // log of the first term x^n/n!.
    let log_first = n as f64 * x.ln() - (1..=n).map(|k| (k as f64).ln()).sum::<f64>();
    let mut term = 1.0;
    let mut sum = 0.0;
    let mut k = n;
    loop {
        sum += term;
        k += 1;
        term *= x / k as f64;
        if term < 1e-17 * sum && (k as f64) > x {
            break;
        }
    }
    (log_first + sum.ln()).exp()
}

/// Largest Gershgorin row sum of the ΔJ = ±2 part of cos²θ over the ladder (|M| = m, parity of J),
/// for J up to `j_top` (the row sums fall towards 1/2 as J grows; see the tests).
pub fn step_norm(m: u32, parity: u32, j_top: u32) -> f64 {
    let j0 = if m % 2 == parity { m } else { m + 1 };
    let mut best: f64 = 0.0;
    let mut below = 0.0;
    let mut j = j0;
    while j <= j_top {
        let up = cos2_up2(j, m);
        best = best.max(below + up);
        below = up;
        j += 2;
    }
    best
}

/// Σ_k p_k↓ μ_k↓ (or, `maximize` false, the populations against the eigenvalues sorted up) for the
/// populations `pops` of one (|M| = m, parity) block and the eigenvalues of cos²θ on its J ≤ `j_cut`.
pub fn block_bound(pops: &[f64], m: u32, parity: u32, j_cut: u32, maximize: bool) -> f64 {
    if pops.iter().all(|&p| p == 0.0) {
        return 0.0;
    }
    pair_sorted(pops, &cos2_extreme_eigenvalues(m, parity, j_cut, pops.len(), maximize))
}

/// Thermal cuts the bound tries: levels below the cut are left out and their population added to the
/// bound (a smaller cut J_top lowers the J levels the kicks can reach).
const CUTS: [f64; 9] = [1e-2, 3e-3, 1e-3, 3e-4, 1e-4, 1e-5, 1e-6, 1e-8, THERMAL_CUT];

/// Extreme eigenvalues of cos²θ keyed by (|M|, parity, J cut, largest or smallest).
type EigenCache = std::collections::HashMap<(u32, u32, u32, bool), std::sync::Arc<Vec<f64>>>;

/// One (|M|, parity) block of a thermal cut.
struct CutBlock {
    m: u32,
    parity: u32,
    /// 1 for M = 0, 2 for ±M.
    weight: f64,
    /// Highest J kept.
    top: u32,
    /// Populations of one M sublevel of the levels kept.
    pops: Vec<f64>,
}

/// The bound for one rotor at one temperature, for any total kick strength: eigenvalues of cos²θ per
/// (block, J cut) are computed once and kept.
pub struct BoundTable {
    /// Per thermal cut: the population left out and the blocks kept.
    cuts: Vec<(f64, Vec<CutBlock>)>,
    /// Norm constant c of the ΔJ = ±2 part of cos²θ.
    c: f64,
    eigen: std::sync::Mutex<EigenCache>,
}

impl BoundTable {
    /// The table for `molecule` (linear) at `temperature_k`.
    pub fn new(molecule: &Molecule, temperature_k: f64) -> crate::Result<BoundTable> {
        let ens = ThermalEnsemble::new(molecule, temperature_k, THERMAL_CUT)?;
        let mut cuts = vec![];
        for &cut in &CUTS {
            // A level stays when its whole J multiplet holds at least `cut` of the population.
            let mut dropped = ens.discarded_population;
            let mut blocks = vec![];
            for b in &ens.blocks {
                let g = if b.m == 0 { 1.0 } else { 2.0 };
                let mut pops = vec![];
                let mut top = None;
                for &(j, p) in &b.levels {
                    if p * (2 * j + 1) as f64 >= cut || cut == THERMAL_CUT {
                        pops.push(p);
                        top = Some(j);
                    } else {
                        dropped += g * p;
                    }
                }
                if let Some(top) = top {
                    blocks.push(CutBlock { m: b.m, parity: b.parity, weight: g, top, pops });
                }
            }
            cuts.push((dropped, blocks));
        }
        let c = step_norm(0, 0, 2 * MAX_CUT_J).max(step_norm(0, 1, 2 * MAX_CUT_J));
        Ok(BoundTable { cuts, c, eigen: Default::default() })
    }

    /// The extreme eigenvalues of cos²θ a block of any cut needs (as many as the block has levels at
    /// the finest cut) for J ≤ j_cut, kept for later calls.
    fn eigenvalues(&self, b: &CutBlock, j_cut: u32, maximize: bool) -> std::sync::Arc<Vec<f64>> {
        let key = (b.m, b.parity, j_cut, maximize);
        if let Some(e) = self.eigen.lock().expect("lock").get(&key) {
            return e.clone();
        }
        let count = self.cuts.last().and_then(|(_, bs)| bs.iter().find(|x| x.m == b.m && x.parity == b.parity)).map(|x| x.pops.len()).unwrap_or(b.pops.len());
        let e = std::sync::Arc::new(cos2_extreme_eigenvalues(b.m, b.parity, j_cut, count, maximize));
        self.eigen.lock().expect("lock").insert(key, e.clone());
        e
    }

    /// The bound under trains whose summed kick strength is at most `total_kick`; `maximize` false gives
    /// the lower bound for anti-alignment. Every (thermal cut, number of ΔJ steps) gives a valid bound;
    /// the smallest is returned (see the module notes).
    pub fn bound(&self, total_kick: f64, maximize: bool) -> crate::Result<KinematicBound> {
        let x = self.c * total_kick.abs();
        // The step counts worth trying: from the first with ε < ½ to two past ε < LEAK_AMPLITUDE (beyond,
        // the pairing only grows with the cut while 2ε is already below 2e-4); at most 16 of them, evenly
        // spread (every one gives a valid bound, so any subset does).
        let mut first = 0;
        while exponential_tail(x, first) >= 0.5 {
            first += 1;
        }
        let mut last = first;
        while exponential_tail(x, last) >= LEAK_AMPLITUDE {
            last += 1;
        }
        last += 2;
        let stride = (last - first).div_ceil(15).max(1);
        let tried: Vec<u32> = (first..last).step_by(stride as usize).chain(std::iter::once(last)).collect();
        let mut best: Option<KinematicBound> = None;
        for steps in tried {
            let leak = exponential_tail(x, steps);
            for (dropped, blocks) in &self.cuts {
                let mut value = 0.0;
                let mut j_cut = 0;
                for b in blocks {
                    let cut = b.top + 2 * steps;
                    if cut > MAX_CUT_J {
                        return Err(crate::Error::input(
                            "ceiling",
                            format!("the kick strength {total_kick:.1} is too large for a useful bound (J levels beyond {MAX_CUT_J})"),
                        ));
                    }
                    j_cut = j_cut.max(cut);
                    value += b.weight * pair_sorted(&b.pops, &self.eigenvalues(b, cut, maximize));
                }
                let slack = 2.0 * leak + dropped;
                let v = if maximize { (value + slack).min(1.0) } else { (value - slack).max(0.0) };
                if best.is_none_or(|b| if maximize { v < b.value } else { v > b.value }) {
                    best = Some(KinematicBound { value: v, total_kick: total_kick.abs(), steps, j_cut, leak, discarded: *dropped });
                }
            }
        }
        Ok(best.expect("at least one cut"))
    }
}

/// The `count` largest eigenvalues of cos²θ on the (|M| = m, parity) levels with J ≤ j_cut, sorted down
/// and each rounded up (`maximize`), or the `count` smallest sorted up and rounded down: Sturm-sequence
/// bisection on the tridiagonal matrix (W. Barth, R. S. Martin and J. H. Wilkinson, Numer. Math. 9, 386
/// (1967), from memory), about n log(1/ε) operations per eigenvalue. The rounding keeps the bound on
/// its safe side.
pub fn cos2_extreme_eigenvalues(m: u32, parity: u32, j_cut: u32, count: usize, maximize: bool) -> Vec<f64> {
    let js: Vec<u32> = (m..=j_cut).filter(|j| j % 2 == parity).collect();
    let n = js.len();
    let d: Vec<f64> = js.iter().map(|&j| cos2_diag(j, m)).collect();
    let e2: Vec<f64> = js.iter().take(n.saturating_sub(1)).map(|&j| cos2_up2(j, m).powi(2)).collect();
    // Eigenvalues below x.
    let below = |x: f64| -> usize {
        let mut k = 0;
        let mut q = 1.0;
        for i in 0..n {
            q = d[i] - x - if i > 0 { e2[i - 1] / q } else { 0.0 };
            if q == 0.0 {
                q = -1e-300;
            }
            if q < 0.0 {
                k += 1;
            }
        }
        k
    };
    let pad = 1e-12;
    (0..count.min(n))
        .map(|r| {
            // The i-th smallest (0-based): for the largest ones i = n − 1 − r.
            let i = if maximize { n - 1 - r } else { r };
            let (mut lo, mut hi) = (-pad, 1.0 + pad);
            for _ in 0..64 {
                let mid = 0.5 * (lo + hi);
                if below(mid) > i {
                    hi = mid;
                } else {
                    lo = mid;
                }
            }
            if maximize { hi + pad } else { lo - pad }
        })
        .collect()
}

/// Populations sorted down against eigenvalues in the order given (largest first to maximize, smallest
/// first to minimize).
fn pair_sorted(pops: &[f64], mu: &[f64]) -> f64 {
    let mut p: Vec<f64> = pops.to_vec();
    p.sort_by(|a, b| b.total_cmp(a));
    assert!(p.len() <= mu.len(), "more populated levels than J levels below the cut");
    p.iter().zip(mu).map(|(a, b)| a * b).sum()
}

/// The bound for `molecule` (linear) at `temperature_k` under trains whose summed kick strength is at
/// most `total_kick` (a [`BoundTable`] used once).
pub fn kinematic_bound(molecule: &Molecule, temperature_k: f64, total_kick: f64, maximize: bool) -> crate::Result<KinematicBound> {
    BoundTable::new(molecule, temperature_k)?.bound(total_kick, maximize)
}

#[cfg(test)]
mod tests {
    use super::*;
    use nalgebra::{DMatrix, SymmetricEigen};

    /// Every eigenvalue of cos²θ (nalgebra's dense symmetric solver, the reference) on the (|M| = m, parity) levels with J ≤ j_cut, sorted down.
    fn dense_eigenvalues(m: u32, parity: u32, j_cut: u32) -> Vec<f64> {
        let js: Vec<u32> = (m..=j_cut).filter(|j| j % 2 == parity).collect();
        let n = js.len();
        let c = DMatrix::from_fn(n, n, |a, b| {
            if a == b {
                cos2_diag(js[a], m)
            } else if b == a + 1 {
                cos2_up2(js[a], m)
            } else if a == b + 1 {
                cos2_up2(js[b], m)
            } else {
                0.0
            }
        });
        let mut mu: Vec<f64> = SymmetricEigen::new(c).eigenvalues.iter().copied().collect();
        mu.sort_by(|a, b| b.total_cmp(a));
        mu
    }

    /// The bisection against a general-purpose dense eigensolver, for blocks with and without M and of
    /// both parities; it may only err on the bound's safe side, and by no more than 1e-11.
    #[test]
    fn bisection_eigenvalues_match_the_dense_solver_on_the_safe_side() {
        for (m, parity, j_cut, count) in [(0, 0, 2, 2), (0, 1, 61, 12), (3, 0, 80, 20), (7, 1, 140, 30)] {
            let all = dense_eigenvalues(m, parity, j_cut);
            let top = cos2_extreme_eigenvalues(m, parity, j_cut, count, true);
            let bottom = cos2_extreme_eigenvalues(m, parity, j_cut, count, false);
            for r in 0..count.min(all.len()) {
                let (hi, lo) = (all[r], all[all.len() - 1 - r]);
                assert!(top[r] >= hi && top[r] - hi < 1e-11, "m {m} p {parity}: {} vs {hi}", top[r]);
                assert!(bottom[r] <= lo && lo - bottom[r] < 1e-11, "m {m} p {parity}: {} vs {lo}", bottom[r]);
            }
        }
    }

    /// A two-level block worked by hand: M = 0, even J, cut at J = 2. With the textbook elements
    /// ⟨0|cos²θ|0⟩ = 1/3, ⟨2|cos²θ|2⟩ = 11/21, ⟨2|cos²θ|0⟩ = 2/(3√5) (cos²θ = 1/3 + (2/3)P₂, e.g. Zare,
    /// "Angular Momentum", the Gaunt integral of three Legendre polynomials), the eigenvalues of
    /// [[a, c], [c, d]] are (a + d)/2 ± sqrt(((a − d)/2)² + c²), and the bound pairs the larger population
    /// with the larger eigenvalue.
    #[test]
    fn a_two_level_block_pairs_populations_with_eigenvalues_by_hand() {
        let (a, d, c): (f64, f64, f64) = (1.0 / 3.0, 11.0 / 21.0, 2.0 / (3.0 * 5f64.sqrt()));
        let r = (((a - d) / 2.0).powi(2) + c * c).sqrt();
        let (hi, lo) = ((a + d) / 2.0 + r, (a + d) / 2.0 - r);
        let (p0, p2) = (0.7, 0.3);
        // Equal up to the 1e-12 the eigenvalues are rounded by towards the safe side.
        let up = block_bound(&[p2, p0], 0, 0, 2, true);
        let exact_up = p0 * hi + p2 * lo;
        assert!(up >= exact_up && up - exact_up < 1e-11, "{up} vs {exact_up}");
        let down = block_bound(&[p0, p2], 0, 0, 2, false);
        let exact_down = p0 * lo + p2 * hi;
        assert!(down <= exact_down && exact_down - down < 1e-11, "{down} vs {exact_down}");
        // An empty block (a spin weight of zero) adds nothing.
        assert_eq!(block_bound(&[0.0, 0.0], 0, 1, 3, true), 0.0);
    }

    /// The exponential tail against closed forms: Σ_{k≥0} = e^x, Σ_{k≥2} 1/k! = e − 2, Σ_{k≥3} 2^k/k! = e² − 5.
    #[test]
    fn the_exponential_tail_matches_closed_forms() {
        assert!((exponential_tail(1.0, 0) - 1f64.exp()).abs() < 1e-15);
        assert!((exponential_tail(1.0, 2) - (1f64.exp() - 2.0)).abs() < 1e-15);
        assert!((exponential_tail(2.0, 3) - (2f64.exp() - 5.0)).abs() < 1e-14);
        assert_eq!(exponential_tail(0.0, 1), 0.0);
        // Far tail: x^n/n! dominates (x = 1, n = 30: 1/30! · (1 + 1/31 + 1/(31·32) + …)).
        let first = (1..=30).map(|k| 1.0 / k as f64).product::<f64>();
        assert!((exponential_tail(1.0, 30) / first - 1.0 - 1.0 / 31.0 - 1.0 / (31.0 * 32.0)).abs() < 1e-4);
    }

    /// The step norm: the row sums approach 1/2 from above (each element tends to 1/4), the largest is
    /// the row J = 2 of M = 0, b(0) + b(2) with b(0) = 2/(3√5), b(2) = 12/(7√45).
    #[test]
    fn the_step_norm_is_largest_at_the_bottom_of_the_m0_ladder() {
        let expect = 2.0 / (3.0 * 5f64.sqrt()) + 12.0 / (7.0 * 45f64.sqrt());
        assert!((step_norm(0, 0, 10_000) - expect).abs() < 1e-14);
        assert!(step_norm(0, 1, 10_000) < expect);
        assert!(step_norm(3, 1, 10_000) < expect);
        assert!((cos2_up2(100_000, 0) - 0.25).abs() < 1e-6);
    }
}
