//! The adiabatic (pendular) limit: field-dressed eigenstates of H0 − U0 cos²θ − μE cosθ for a
//! constant laser intensity and static field, each labelled by the field-free level it connects to
//! adiabatically, and thermal averages over them. Linear molecules here, with the static field along
//! the laser polarization or (`tilted`) at an angle to it; tops through the blocks of their oriented path
//! (`simulate::oriented_top::top_pendular`), which rank levels within every exact symmetry class.

mod tilted;

use crate::basis::{BOTH_PARITIES, Block};
use crate::ensemble::ThermalEnsemble;
use crate::error::{Error, Result};
use crate::molecule::{LinearRotor, Molecule};
use crate::units::{cm_to_rad_per_ps, coupling_rad_per_ps_per_a3_wcm2, dipole_rate_rad_per_ps};
use nalgebra::SymmetricEigen;
use serde::Serialize;

/// One field-dressed (pendular) state.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct DressedState {
    /// Field-free J this state connects to adiabatically.
    pub j: u32,
    /// |M| (conserved); in a tilted static field |M_f| about the static field's axis, which the state had
    /// before the laser came on.
    pub m: u32,
    /// Energy relative to the field-free J = 0 level, cm⁻¹ (without the isotropic −¼α⊥E0² shift).
    pub energy_cm: f64,
    /// Energy in units of the rotational constant B.
    pub energy_b: f64,
    /// ⟨cos²θ⟩ of the state.
    pub cos2: f64,
    /// ⟨cosθ⟩ of the state.
    pub cos: f64,
    /// ⟨cosθ⟩ with the lab X axis (tilted static fields only; zero by symmetry otherwise).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub cos_x: Option<f64>,
    /// The state's class under the reflection through the XZ plane, +1 or −1 (tilted static fields only).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub reflection: Option<i32>,
    /// A top's field-free level: "J Ka Kc" (asymmetric) or "J K" (symmetric); absent for linear molecules.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub level: Option<String>,
}

/// Dressed states and thermal averages at one field strength.
#[derive(Debug, Clone, Serialize)]
pub struct PendularResult {
    /// Dressed states, by |M| then energy.
    pub states: Vec<DressedState>,
    /// Thermal average of ⟨cos²θ⟩ (field-free Boltzmann populations carried adiabatically).
    pub thermal_cos2: f64,
    /// Thermal average of ⟨cosθ⟩ (with Z, the laser polarization).
    pub thermal_cos: f64,
    /// Thermal average of ⟨cosθ⟩ with X (tilted static fields only).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub thermal_cos_x: Option<f64>,
    /// Dimensionless laser interaction strength Δω = U0 / B (the spheroidal c²).
    pub laser_strength_b: f64,
    /// Dimensionless dipole interaction strength ω = μE / B.
    pub static_strength_b: f64,
    /// Angle of the static field from Z towards X, degrees (tilted static fields only).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub static_angle_deg: Option<f64>,
}

/// The listing of `kicktrain pendular` (and the Python module's `pendular`): the molecule named from the
/// library, a temperature from 0 to 5000 K and at most J = 40 listed, then [`pendular_at_angle`].
pub fn listing(name: &str, intensity_wcm2: f64, static_kv_cm: f64, angle_deg: f64, temperature_k: f64, j_max: u32) -> Result<(Molecule, PendularResult)> {
    let mol = Molecule::from_library(name, "molecule")?;
    if !temperature_k.is_finite() || !(0.0..=5000.0).contains(&temperature_k) {
        return Err(Error::input("temperature_k", format!("expected 0 to 5000 K, got {temperature_k}")));
    }
    if j_max > 40 {
        return Err(Error::input("j_max", format!("expected at most 40 for a listing, got {j_max}")));
    }
    let r = pendular_at_angle(&mol, intensity_wcm2, static_kv_cm, angle_deg, temperature_k, j_max)?;
    Ok((mol, r))
}

/// As [`pendular`] with the static field at `angle_deg` from the laser polarization (Z) towards X. At 0°
/// and 180° (the field reversed) M is conserved and [`pendular`] answers; at other angles a linear
/// molecule's dressed states carry ⟨cosθ⟩ with X as well, and their correlation runs through the static
/// field first (module `tilted`); a top's through its tilted-field classes
/// ([`crate::simulate::tilted_top_pendular`]).
pub fn pendular_at_angle(mol: &Molecule, intensity_wcm2: f64, static_kv_cm: f64, angle_deg: f64, temperature_k: f64, j_max: u32) -> Result<PendularResult> {
    if !angle_deg.is_finite() || angle_deg.abs() > 360.0 {
        return Err(Error::input("static_angle_deg", format!("expected an angle from −360 to 360 degrees, got {angle_deg}")));
    }
    let alpha = angle_deg.to_radians();
    // Along ±Z up to rounding of the angle: the M-conserving problem.
    if static_kv_cm == 0.0 || alpha.sin().abs() < 1e-12 {
        let sign = if alpha.cos() < 0.0 { -1.0 } else { 1.0 };
        return pendular(mol, intensity_wcm2, sign * static_kv_cm, temperature_k, j_max);
    }
    check_fields(mol, intensity_wcm2, static_kv_cm)?;
    let Some(lin) = mol.as_linear() else {
        if !(0.0..=1e3).contains(&temperature_k) {
            return Err(Error::input("temperature_k", format!("expected 0 to 1000 K for a top in a tilted static field, got {temperature_k}")));
        }
        let r = crate::simulate::tilted_top_pendular::tilted_top_pendular(mol, intensity_wcm2, static_kv_cm, alpha, temperature_k)?;
        return Ok(top_result(mol, intensity_wcm2, static_kv_cm, r, Some(alpha.to_degrees())));
    };
    let u0 = coupling_rad_per_ps_per_a3_wcm2() * mol.delta_alpha_a3() * intensity_wcm2;
    let s = dipole_rate_rad_per_ps(mol.dipole_debye, static_kv_cm);
    tilted::tilted_pendular(mol, lin, u0, s, alpha, temperature_k, j_max)
}

/// The field inputs of a pendular computation, checked once for every geometry.
fn check_fields(mol: &Molecule, intensity_wcm2: f64, static_kv_cm: f64) -> Result<()> {
    if !intensity_wcm2.is_finite() || !(0.0..=1e15).contains(&intensity_wcm2) {
        return Err(Error::input("intensity_wcm2", format!("expected 0 to 1e15 W/cm², got {intensity_wcm2}")));
    }
    if !static_kv_cm.is_finite() || static_kv_cm.abs() > 1e4 {
        return Err(Error::input("static_kv_cm", format!("expected at most 1e4 kV/cm in magnitude, got {static_kv_cm}")));
    }
    if static_kv_cm != 0.0 && !mol.is_polar() {
        return Err(Error::input("molecule.dipole_debye", format!("a static field needs a polar molecule; {} has no permanent dipole", mol.name)));
    }
    Ok(())
}

/// Dressed states of one |M| block (both parities of J) with `size` basis states, in rad/ps and
/// sorted by energy; returns (eigen-frequencies, eigenvectors, block).
fn dressed_block(mol: &LinearRotor, m: u32, size: usize, u0: f64, s: f64) -> (Vec<f64>, nalgebra::DMatrix<f64>, Block) {
    let block = Block { m, parity: BOTH_PARITIES, size };
    let omega = block.frequencies(mol);
    let c2 = block.matrix_of(|x| x * x, 2);
    let c1 = block.matrix_of(|x| x, 1);
    let mut h = -u0 * c2 - s * c1;
    for n in 0..size {
        h[(n, n)] += omega[n];
    }
    let eig = SymmetricEigen::new(h);
    let mut order: Vec<usize> = (0..size).collect();
    order.sort_by(|&a, &b| eig.eigenvalues[a].total_cmp(&eig.eigenvalues[b]));
    let vals = order.iter().map(|&i| eig.eigenvalues[i]).collect();
    let vecs = nalgebra::DMatrix::from_fn(size, size, |r, c| eig.eigenvectors[(r, order[c])]);
    (vals, vecs, block)
}

/// Dressed states for |M| = 0..=m_max and field-free J up to `j_max` at a laser intensity (W/cm²,
/// cycle-averaged) and a static field (kV/cm) along the same axis; thermal averages at `temperature_k`.
/// Without a static field the parity of J is conserved and states are labelled within each parity;
/// the basis is enlarged until the reported energies change by less than 1e-10 B.
pub fn pendular(mol: &Molecule, intensity_wcm2: f64, static_kv_cm: f64, temperature_k: f64, j_max: u32) -> Result<PendularResult> {
    check_fields(mol, intensity_wcm2, static_kv_cm)?;
    let Some(lin) = mol.as_linear() else {
        return top_pendular(mol, intensity_wcm2, static_kv_cm, temperature_k);
    };
    let ensemble = ThermalEnsemble::new(mol, temperature_k, 1e-8)?;
    let j_top = j_max.max(ensemble.j_max);
    let b = cm_to_rad_per_ps(lin.b_cm);
    let u0 = coupling_rad_per_ps_per_a3_wcm2() * mol.delta_alpha_a3() * intensity_wcm2;
    let s = dipole_rate_rad_per_ps(mol.dipole_debye, static_kv_cm);
    let mut states = vec![];
    let (mut t_cos2, mut t_cos) = (0.0, 0.0);
    for m in 0..=j_top {
        // Grow the basis until the wanted eigenvalues converge.
        let wanted = (j_top - m + 1) as usize;
        let mut size = wanted + 20 + (3.0 * ((u0 + s.abs()) / b).sqrt()).ceil() as usize;
        let (vals, vecs, block) = loop {
            let a = dressed_block(lin, m, size, u0, s);
            let c = dressed_block(lin, m, size + 10, u0, s);
            let worst = (0..wanted).map(|i| (a.0[i] - c.0[i]).abs()).fold(0.0, f64::max);
            if worst < 1e-10 * b {
                break c;
            }
            size += 20;
            if block_too_big(m, size, mol) {
                return Err(Error::Numerical(format!("dressed states of |M| = {m} did not converge below J = {}", mol.max_physical_j())));
            }
        };
        let c2 = block.matrix_of(|x| x * x, 2);
        let c1 = block.matrix_of(|x| x, 1);
        // Without a static field, label within each parity (the two ladders may cross).
        let labels: Vec<u32> = if s == 0.0 {
            let mut lab = vec![];
            let (mut next_even, mut next_odd) = (first_with_parity(m, 0), first_with_parity(m, 1));
            for i in 0..vals.len() {
                let v = vecs.column(i);
                let even_weight: f64 = (0..block.size).filter(|&n| block.j(n) % 2 == 0).map(|n| v[n] * v[n]).sum();
                if even_weight > 0.5 {
                    lab.push(next_even);
                    next_even += 2;
                } else {
                    lab.push(next_odd);
                    next_odd += 2;
                }
            }
            lab
        } else {
            (0..vals.len() as u32).map(|i| m + i).collect()
        };
        for i in 0..vals.len() {
            if labels[i] > j_top {
                continue;
            }
            let v = vecs.column(i).clone_owned();
            let cos2 = (v.transpose() * &c2 * &v)[(0, 0)];
            let cos = (v.transpose() * &c1 * &v)[(0, 0)];
            let e = vals[i] / cm_to_rad_per_ps(1.0);
            states.push(DressedState { j: labels[i], m, energy_cm: e, energy_b: e / lin.b_cm, cos2, cos, cos_x: None, reflection: None, level: None });
            // Thermal weight of the field-free level (J, M), both signs of M.
            let g = if m == 0 { 1.0 } else { 2.0 };
            let p = ensemble.blocks.iter().filter(|bp| bp.m == m).flat_map(|bp| bp.levels.iter()).find(|l| l.0 == labels[i]).map(|l| l.1).unwrap_or(0.0);
            t_cos2 += g * p * cos2;
            t_cos += g * p * cos;
        }
    }
    states.sort_by(|a, b| (a.m, a.energy_cm).partial_cmp(&(b.m, b.energy_cm)).expect("finite energies"));
    Ok(PendularResult {
        states,
        thermal_cos2: t_cos2,
        thermal_cos: t_cos,
        thermal_cos_x: None,
        laser_strength_b: u0 / b,
        static_strength_b: s / b,
        static_angle_deg: None,
    })
}

/// Pendular states of a symmetric or asymmetric top: the dressed states of its populated field-free
/// levels (⟨cos²θ⟩ of the alignment axis, ⟨cosθ⟩ of the dipole axis).
fn top_pendular(mol: &Molecule, intensity_wcm2: f64, static_kv_cm: f64, temperature_k: f64) -> Result<PendularResult> {
    let r = crate::simulate::oriented_top::top_pendular(mol, intensity_wcm2, static_kv_cm, temperature_k)?;
    Ok(top_result(mol, intensity_wcm2, static_kv_cm, r, None))
}

/// A top's dressed states as a pendular result (`angle_deg` for a tilted static field).
fn top_result(mol: &Molecule, intensity_wcm2: f64, static_kv_cm: f64, r: crate::simulate::oriented_top::TopPendular, angle_deg: Option<f64>) -> PendularResult {
    let b = mol.revival_b_cm();
    let tilted = angle_deg.is_some();
    let states = r
        .states
        .iter()
        .map(|d| DressedState {
            j: d.j as u32,
            m: d.m as u32,
            energy_cm: d.energy_cm,
            energy_b: d.energy_cm / b,
            cos2: d.cos2,
            cos: d.cos,
            cos_x: tilted.then_some(d.cos_x),
            reflection: d.reflection.map(|s| s as i32),
            level: Some(d.label.clone()),
        })
        .collect();
    let per_cm = cm_to_rad_per_ps(1.0);
    PendularResult {
        states,
        thermal_cos2: r.thermal_cos2,
        thermal_cos: r.thermal_cos,
        thermal_cos_x: r.thermal_cos_x,
        laser_strength_b: coupling_rad_per_ps_per_a3_wcm2() * mol.delta_alpha_a3() * intensity_wcm2 / per_cm / b,
        static_strength_b: dipole_rate_rad_per_ps(mol.dipole_debye, static_kv_cm) / per_cm / b,
        static_angle_deg: angle_deg,
    }
}

fn first_with_parity(m: u32, parity: u32) -> u32 {
    if m % 2 == parity { m } else { m + 1 }
}

fn block_too_big(m: u32, size: usize, mol: &Molecule) -> bool {
    m as usize + size > mol.max_physical_j() as usize
}
