//! Thermal ensembles of symmetric and asymmetric tops: Boltzmann populations of the field-free levels
//! with nuclear-spin weights by rotational symmetry, truncated at a stated tolerance and grouped into
//! (M, symmetry) blocks.

use crate::basis::top::{TopBlock, TopBlockBasis, TopFrame, TopSym};
use crate::error::{Error, Result};
use crate::molecule::top::{Top, TopKind};
use crate::units::kt_in_cm;

/// Largest J a top's thermal ensemble may reach (beyond it the temperature is refused).
pub const MAX_TOP_THERMAL_J: i64 = 120;

/// Initial populations of one (M, symmetry) block of a top.
#[derive(Debug, Clone, PartialEq)]
pub struct TopBlockPopulation {
    /// M (≥ 0: blocks with −M are identical and counted through `weight`).
    pub m: i64,
    /// Symmetry label (for symmetric tops K ≥ 0: −K is identical and counted through `weight`).
    pub sym: TopSym,
    /// How many identical blocks this one stands for (±M, ±K).
    pub weight: f64,
    /// (J, index of the level within J in the block, population of one sublevel), J ascending.
    pub levels: Vec<(i64, usize, f64)>,
}

/// A thermal ensemble of a top.
#[derive(Debug, Clone, PartialEq)]
pub struct TopEnsemble {
    /// Temperature, K.
    pub temperature_k: f64,
    /// Highest J kept.
    pub j_max: i64,
    /// Population left out by the truncation: the dropped levels' share of the converged partition
    /// function plus a bound on the levels never listed.
    pub discarded_population: f64,
    /// Rotational partition function Σ (g/g_max) exp(−(E − E_0)/kT) over every existing sublevel
    /// (each M and, for symmetric tops, each sign of K), summed to convergence; spin weights g scaled to
    /// the largest, energies from the lowest existing level E_0; at T = 0 the ground level's weighted
    /// degeneracy.
    pub partition_function: f64,
    /// Populated blocks.
    pub blocks: Vec<TopBlockPopulation>,
}

/// One field-free level: symmetry, J, index within J in its block, energy (cm⁻¹), spin weight, and
/// how many identical symmetry blocks it stands for (2 for ±K of a symmetric top).
struct Level {
    sym: TopSym,
    j: i64,
    index: usize,
    energy_cm: f64,
    weight: f64,
    multiplicity: f64,
}

impl TopEnsemble {
    /// Boltzmann ensemble of `top` at `temperature_k` in `frame`, keeping levels until the left-out
    /// population is below `tolerance`; the kept populations are renormalized to 1.
    pub fn new(top: &Top, frame: &TopFrame, temperature_k: f64, tolerance: f64) -> Result<TopEnsemble> {
        let syms: Vec<TopSym> = match top.kind() {
            TopKind::Asymmetric => [(0, 1), (0, -1), (1, 1), (1, -1)].iter().map(|&(k_parity, p)| TopSym::Wang { k_parity, p }).collect(),
            _ => (0..=MAX_TOP_THERMAL_J).map(TopSym::K).collect(),
        };
        let kt = if temperature_k > 0.0 { kt_in_cm(temperature_k) } else { 0.0 };
        // Levels J by J until the lowest level of a J is far above the ground level.
        let mut levels: Vec<Level> = vec![];
        let mut e_ground = f64::INFINITY;
        // The largest spin weight and multiplicity any level can have: the stopping rule bounds what
        // a whole J could hold with them, never with the weights of its own levels, which may be zero.
        let w_top = match &top.spin_weights {
            crate::molecule::top::TopSpinWeights::Equal => 1.0,
            crate::molecule::top::TopSpinWeights::ByK(w) => w.iter().copied().fold(0.0, f64::max),
            crate::molecule::top::TopSpinWeights::ByKaKc(w) => w.iter().copied().fold(0.0, f64::max),
        };
        // Bound on the population of every level of J (all its (2J+1) levels and (2J+1) values of M).
        let j_bound = |j: i64, e_min: f64, e_ground: f64| w_top * ((2 * j + 1) as f64).powi(2) * (-(e_min - e_ground) / kt).exp();
        let mut previous_bound = f64::INFINITY;
        let mut unlisted = 0.0;
        let mut j = 0i64;
        loop {
            let mut e_min_j = f64::INFINITY;
            for &sym in &syms {
                if let TopSym::K(k) = sym
                    && k > j
                {
                    continue;
                }
                let blk = TopBlockBasis::new(frame, TopBlock { m: 0, sym, j_max: j });
                let (kabs, parity) = match sym {
                    TopSym::K(k) => (k as u32, (0, 0)),
                    _ => (0, sym.ka_kc_parity(frame).expect("Wang block")),
                };
                let weight = top.spin_weight(kabs, parity);
                let multiplicity = if matches!(sym, TopSym::K(k) if k > 0) { 2.0 } else { 1.0 };
                let mut index = 0;
                for n in 0..blk.size() {
                    if blk.j(n) != j {
                        continue;
                    }
                    let e = blk.energies_cm[n];
                    e_min_j = e_min_j.min(e);
                    if weight > 0.0 {
                        e_ground = e_ground.min(e);
                        levels.push(Level { sym, j, index, energy_cm: e, weight, multiplicity });
                    }
                    index += 1;
                }
            }
            let done = if kt == 0.0 {
                e_ground.is_finite() && j >= 2
            } else if e_ground.is_finite() {
                // Past the Boltzmann peak the bounds of successive J fall faster than a geometric series
                // of ratio r, so all levels above J hold at most bound(J) r / (1 − r).
                let b = j_bound(j, e_min_j, e_ground);
                let r = if previous_bound > 0.0 { b / previous_bound } else { 0.0 };
                previous_bound = b;
                let rest = b * r / (1.0 - r);
                let listed: f64 = levels.iter().map(|l| l.weight * l.multiplicity * (2 * l.j + 1) as f64 * (-(l.energy_cm - e_ground) / kt).exp()).sum();
                let settled = j >= 2 && e_min_j - e_ground > 5.0 * kt && r < 0.9 && rest < 1e-20 * listed;
                if settled {
                    unlisted = rest;
                }
                settled
            } else {
                false
            };
            if done {
                break;
            }
            j += 1;
            if j > MAX_TOP_THERMAL_J {
                return Err(Error::input(
                    "temperature_k",
                    format!("{temperature_k} K populates levels beyond J = {MAX_TOP_THERMAL_J} for this top; expected a lower temperature"),
                ));
            }
        }
        // Boltzmann factor per sublevel, times sublevel count (2J+1 values of M, ± K multiplicity).
        let boltz = |l: &Level| -> f64 {
            if kt == 0.0 {
                if (l.energy_cm - e_ground).abs() < 1e-12 * e_ground.abs().max(1e-12) { l.weight } else { 0.0 }
            } else {
                l.weight * (-(l.energy_cm - e_ground) / kt).exp()
            }
        };
        let total: f64 = levels.iter().map(|l| boltz(l) * (2 * l.j + 1) as f64 * l.multiplicity).sum();
        let mut order: Vec<usize> = (0..levels.len()).collect();
        order.sort_by(|&a, &b| boltz(&levels[b]).total_cmp(&boltz(&levels[a])).then(a.cmp(&b)));
        // Keep the most populated levels until the rest is below the tolerance.
        let mut kept = vec![];
        let mut covered = 0.0;
        for &i in &order {
            if covered >= (1.0 - tolerance) * total {
                break;
            }
            let l = &levels[i];
            let share = boltz(l) * (2 * l.j + 1) as f64 * l.multiplicity;
            if share <= 0.0 {
                break;
            }
            covered += share;
            kept.push(i);
        }
        // What the truncation leaves out: the listed levels not kept, and the bound on the unlisted ones.
        let discarded = (1.0 - covered / total).max(0.0) + unlisted / total;
        if discarded > tolerance.max(1e-15) {
            return Err(Error::Numerical(format!(
                "the thermal ensemble at {temperature_k} K leaves out {discarded:.1e} of the population, more than solver.thermal_tolerance = {tolerance:.1e}"
            )));
        }
        let j_max = kept.iter().map(|&i| levels[i].j).max().unwrap_or(0);
        let mut blocks = vec![];
        for &sym in &syms {
            let mut of_sym: Vec<&Level> = kept.iter().map(|&i| &levels[i]).filter(|l| l.sym == sym).collect();
            if of_sym.is_empty() {
                continue;
            }
            of_sym.sort_by_key(|l| (l.j, l.index));
            for m in 0..=j_max {
                let lv: Vec<(i64, usize, f64)> = of_sym.iter().filter(|l| l.j >= m).map(|l| (l.j, l.index, boltz(l) / covered)).collect();
                if lv.is_empty() {
                    continue;
                }
                let mult = of_sym[0].multiplicity;
                blocks.push(TopBlockPopulation { m, sym, weight: mult * if m > 0 { 2.0 } else { 1.0 }, levels: lv });
            }
        }
        Ok(TopEnsemble { temperature_k, j_max, discarded_population: discarded, partition_function: total / w_top, blocks })
    }

    /// Number of initially populated |J τ M⟩ sublevels (counting ±M and ±K).
    pub fn state_count(&self) -> usize {
        self.blocks.iter().map(|b| (b.weight as usize) * b.levels.len()).sum()
    }

    /// Total population (1 up to rounding).
    pub fn total(&self) -> f64 {
        self.blocks.iter().map(|b| b.weight * b.levels.iter().map(|l| l.2).sum::<f64>()).sum()
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::basis::top::TopFrame;
    use crate::molecule::Molecule;

    fn ensemble(name: &str, t: f64) -> (TopEnsemble, TopFrame) {
        let m = Molecule::from_library(name, "molecule").unwrap();
        let top = m.as_top().unwrap().clone();
        let frame = TopFrame::new(&top, false);
        (TopEnsemble::new(&top, &frame, t, 1e-7).unwrap(), frame)
    }

    #[test]
    fn water_ortho_para_ratio_reaches_three_to_one() {
        // Ortho (Ka + Kc odd) : para = 3 : 1 in nuclear-spin weight for H2O (two equivalent protons, I = ½:
        // Townes & Schawlow, "Microwave Spectroscopy" (1955); G. Herzberg, "Molecular Spectra and Molecular
        // Structure II" (1945)); at high temperature the rotational partition functions of the two classes
        // become equal, so the ortho fraction → 3/4. At 300 K water is within a few 1e-3 of that limit (common
        // practice): its lowest para level 0_00 lies B + C = 14.512 + 9.285 = 23.8 cm⁻¹ (the J = 1 closed form,
        // library constants) below the lowest ortho one, 1_01, against kT = 208.5 cm⁻¹.
        let (e, frame) = ensemble("H2O", 300.0);
        let ortho: f64 = e
            .blocks
            .iter()
            .filter(|b| b.sym.ka_kc_parity(&frame).map(|(a, c)| (a + c) % 2 == 1).unwrap_or(false))
            .map(|b| b.weight * b.levels.iter().map(|l| l.2).sum::<f64>())
            .sum();
        assert!((e.total() - 1.0).abs() < 1e-9);
        assert!((ortho - 0.75).abs() < 5e-3, "ortho fraction {ortho}");
        // At T = 0 only the lowest level (0_00, para) is populated.
        let (e0, frame0) = ensemble("H2O", 0.0);
        assert_eq!(e0.blocks.len(), 1);
        assert_eq!(e0.blocks[0].sym.ka_kc_parity(&frame0), Some((0, 0)));
    }

    #[test]
    fn zero_spin_weights_remove_symmetry_classes() {
        // SO2: ¹⁶O nuclei are spinless bosons, so only Ka + Kc even levels exist (derived by character
        // projection; G. Herzberg, "Molecular Spectra and Molecular Structure II" (1945), nuclear-spin
        // statistics of C2v molecules).
        let (e, frame) = ensemble("SO2", 5.0);
        assert!(!e.blocks.is_empty());
        for b in &e.blocks {
            let (a, c) = b.sym.ka_kc_parity(&frame).unwrap();
            assert_eq!((a + c) % 2, 0, "{:?}", b.sym);
        }
        // A symmetric top counts ±K once per level with weight 2 and keeps every K class.
        let (e, _) = ensemble("CH3F", 20.0);
        assert!((e.total() - 1.0).abs() < 1e-9);
        assert!(e.blocks.iter().any(|b| matches!(b.sym, TopSym::K(k) if k % 3 == 0 && k > 0)));
        assert!(e.blocks.iter().any(|b| matches!(b.sym, TopSym::K(k) if k % 3 != 0)));
    }
}
