//! Thermal ensembles: Boltzmann populations of every |J M⟩ sublevel with nuclear-spin weights,
//! truncated at a stated tolerance and grouped into (|M|, parity) blocks.

pub mod top;

use crate::error::{Error, Result};

use crate::molecule::Molecule;
use crate::units::kt_in_cm;

/// Initial populations of one (|M|, parity) block.
#[derive(Debug, Clone, PartialEq)]
pub struct BlockPopulation {
    /// |M|.
    pub m: u32,
    /// Parity of J (0 even, 1 odd).
    pub parity: u32,
    /// (J, population of one M sublevel) for each initially populated level, J ascending.
    pub levels: Vec<(u32, f64)>,
}

impl BlockPopulation {
    /// Total population carried by the block including both signs of M.
    pub fn total(&self) -> f64 {
        let g = if self.m == 0 { 1.0 } else { 2.0 };
        g * self.levels.iter().map(|l| l.1).sum::<f64>()
    }
}

/// A thermal ensemble of a linear rotor.
#[derive(Debug, Clone, PartialEq)]
pub struct ThermalEnsemble {
    /// Temperature, K.
    pub temperature_k: f64,
    /// Highest J kept.
    pub j_max: u32,
    /// Population left out by the truncation (before renormalizing the kept states to 1): the dropped
    /// levels' share of the converged partition function plus a bound on the levels never listed.
    pub discarded_population: f64,
    /// Rotational partition function Σ (g/g_max)(2J+1) exp(−(E_J − E_0)/kT) over every existing level,
    /// summed to convergence (relative spin weights g scaled to the largest, energies from the lowest
    /// existing level E_0); at T = 0 the ground level's weighted degeneracy.
    pub partition_function: f64,
    /// Populated blocks.
    pub blocks: Vec<BlockPopulation>,
}

impl ThermalEnsemble {
    /// Boltzmann ensemble at `temperature_k`, keeping J levels until the left-out population is below
    /// `tolerance`; the kept populations are renormalized to sum to 1. T = 0 gives the lowest allowed level.
    pub fn new(molecule: &Molecule, temperature_k: f64, tolerance: f64) -> Result<ThermalEnsemble> {
        let mol = molecule
            .as_linear()
            .ok_or_else(|| crate::error::Error::input("molecule", format!("{} is a top; its thermal ensemble is a TopEnsemble", molecule.name)))?;
        // Spin weights are relative: normalize to the larger one so sums cannot overflow.
        let wmax = mol.spin_weights[0].max(mol.spin_weights[1]);
        let weight = |j: u32| mol.spin_weights[(j % 2) as usize] / wmax;
        let j_limit = mol.max_physical_j();
        let mut level_pop: Vec<f64> = vec![];
        // Bound on the population of the levels never listed (relative to the listed sum).
        let mut unlisted = 0.0;
        if temperature_k <= 0.0 {
            let j0 = if weight(0) > 0.0 { 0 } else { 1 };
            level_pop.resize(j0 as usize + 1, 0.0);
            level_pop[j0 as usize] = 1.0;
        } else {
            let kt = kt_in_cm(temperature_k);
            let e0 = (0..2u32).filter(|&j| weight(j) > 0.0).map(|j| mol.energy_cm(j)).fold(f64::INFINITY, f64::min);
            // What a level could hold with the larger spin weight (1 after normalizing): the stopping
            // rule looks at this bound, never at the level's own weight, which may be zero.
            let bound = |j: u32| (2 * j + 1) as f64 * (-(mol.energy_cm(j) - e0) / kt).exp();
            let mut total = 0.0;
            let mut j = 0u32;
            loop {
                let p = weight(j) * bound(j);
                level_pop.push(p);
                total += p;
                // Past the Boltzmann peak the level bounds fall faster than a geometric series of
                // ratio r, so everything above J is at most bound(J + 1) / (1 − r).
                // (Both bounds underflow to zero at very low temperature: nothing is left above J.)
                let r = if bound(j) > 0.0 { bound(j + 1) / bound(j) } else { 0.0 };
                if j > 2 && mol.energy_cm(j) - e0 > 5.0 * kt && r < 0.9 {
                    let rest = bound(j + 1) / (1.0 - r);
                    if rest < 1e-20 * total {
                        unlisted = rest / total;
                        break;
                    }
                }
                j += 1;
                if j > j_limit {
                    return Err(Error::input(
                        "temperature_k",
                        format!(
                            "{temperature_k} K populates levels beyond J = {j_limit}, where the centrifugal-distortion energy formula no longer holds; expected a lower temperature"
                        ),
                    ));
                }
            }
        }
        let z: f64 = level_pop.iter().sum();
        let partition_function = if temperature_k <= 0.0 {
            let j0 = level_pop.len() - 1;
            weight(j0 as u32) * (2 * j0 + 1) as f64
        } else {
            z
        };
        // Keep the smallest J range whose tail (with the unlisted bound) is below the tolerance.
        let mut tail = unlisted;
        let mut j_max = level_pop.len() as u32 - 1;
        for j in (0..level_pop.len()).rev() {
            if tail + level_pop[j] / z > tolerance {
                j_max = j as u32;
                break;
            }
            tail += level_pop[j] / z;
        }
        if tail > tolerance {
            return Err(Error::Numerical(format!(
                "the thermal ensemble at {temperature_k} K leaves out {tail:.1e} of the population, more than solver.thermal_tolerance = {tolerance:.1e}"
            )));
        }
        let kept = 1.0 - tail;
        let mut blocks = vec![];
        for m in 0..=j_max {
            for parity in 0..2u32 {
                let levels: Vec<(u32, f64)> = (m..=j_max)
                    .filter(|j| j % 2 == parity && level_pop[*j as usize] > 0.0)
                    .map(|j| (j, level_pop[j as usize] / z / (2 * j + 1) as f64 / kept))
                    .collect();
                if !levels.is_empty() {
                    blocks.push(BlockPopulation { m, parity, levels });
                }
            }
        }
        Ok(ThermalEnsemble { temperature_k, j_max, discarded_population: tail, partition_function, blocks })
    }

    /// The populations grouped by |M| only (both parities of J together), for fields that mix parities.
    pub fn merged_by_m(&self) -> Vec<BlockPopulation> {
        let mut out: Vec<BlockPopulation> = vec![];
        for b in &self.blocks {
            match out.iter_mut().find(|o| o.m == b.m) {
                Some(o) => o.levels.extend(b.levels.iter().copied()),
                None => out.push(BlockPopulation { m: b.m, parity: crate::basis::BOTH_PARITIES, levels: b.levels.clone() }),
            }
        }
        for o in &mut out {
            o.levels.sort_by_key(|l| l.0);
        }
        out
    }

    /// Number of initially populated |J M⟩ sublevels (counting ±M).
    pub fn state_count(&self) -> usize {
        self.blocks.iter().map(|b| b.levels.len() * if b.m == 0 { 1 } else { 2 }).sum()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn n2() -> Molecule {
        Molecule::from_library("N2", "m").unwrap()
    }

    #[test]
    fn populations_sum_to_one_and_follow_boltzmann() {
        let e = ThermalEnsemble::new(&n2(), 300.0, 1e-7).unwrap();
        let total: f64 = e.blocks.iter().map(|b| b.total()).sum();
        assert!((total - 1.0).abs() < 1e-12);
        assert!(e.discarded_population <= 1e-7 && e.discarded_population > 0.0);
        // Ratio of sublevel populations J=2 / J=0: exp(−E_2/kT), E_2 ≈ 6B (Boltzmann distribution, same spin
        // weight and one sublevel each; common practice). Uses the library's own E_J and kT conversion, so it
        // checks the bookkeeping, not the constants.
        let b0 = e.blocks.iter().find(|b| b.m == 0 && b.parity == 0).unwrap();
        let r = b0.levels[1].1 / b0.levels[0].1;
        let mol = n2();
        let want = (-(mol.as_linear().unwrap().energy_cm(2)) / crate::units::kt_in_cm(300.0)).exp();
        assert!((r / want - 1.0).abs() < 1e-12);
    }

    #[test]
    fn zero_temperature_is_ground_state() {
        let e = ThermalEnsemble::new(&n2(), 0.0, 1e-7).unwrap();
        assert_eq!(e.blocks.len(), 1);
        assert_eq!(e.blocks[0].levels, vec![(0, 1.0)]);
        // A molecule without even-J states (16O2-like spin weights; ¹⁶O nuclei are spinless bosons, so only odd
        // rotational levels of the ground state exist: G. Herzberg, "Molecular Spectra and Molecular Structure
        // I: Spectra of Diatomic Molecules" (1950)) starts in J = 1, three sublevels (M = −1, 0, 1).
        let mut o = n2();
        o.as_linear_mut().unwrap().spin_weights = [0.0, 1.0];
        let e = ThermalEnsemble::new(&o, 0.0, 1e-7).unwrap();
        assert_eq!(e.state_count(), 3);
        assert!(e.blocks.iter().all(|b| b.parity == 1));
    }

    #[test]
    fn nitrogen_even_odd_ratio() {
        // 14N2 at high T: even-J : odd-J total populations → 2 : 1. Spin statistics of a homonuclear diatomic
        // with nuclear spin I = 1 (bosons): g_even : g_odd = (I + 1) : I = 2 : 1 (G. Herzberg, "Molecular
        // Spectra and Molecular Structure I: Spectra of Diatomic Molecules" (1950), intensity alternation);
        // at kT ≫ B the even and odd rotational partition sums become equal, so the populations follow the
        // weights (1 % tolerance at 1000 K, where B/kT ≈ 3e-3).
        let e = ThermalEnsemble::new(&n2(), 1000.0, 1e-9).unwrap();
        let even: f64 = e.blocks.iter().filter(|b| b.parity == 0).map(|b| b.total()).sum();
        let odd: f64 = e.blocks.iter().filter(|b| b.parity == 1).map(|b| b.total()).sum();
        assert!((even / odd - 2.0).abs() < 1e-2, "{}", even / odd);
    }
}
