//! How the fields couple to a linear rotor or a top's figure axis: the rates (rad/ps) of the cosθ,
//! cos²θ and cos³θ terms of the interaction at one time, from the field model and the molecule's
//! dipole, polarizability anisotropy and hyperpolarizability. The solver's polar kernels read them.

use crate::field::FieldModel;
use crate::molecule::{Molecule, RotorKind};
use crate::units::coupling_rad_per_ps_per_a3_wcm2;

/// The molecular axis that fields symmetric about Z act on through cosθ, cos²θ and cos³θ, with the
/// constants of that coupling: a linear molecule's axis; a symmetric top's figure axis (K is conserved,
/// so only that axis's angle to Z enters, and its J ladder is that of the constant B perpendicular to it,
/// the K-dependent part being constant in a block); an asymmetric top's dipole axis (whose oriented path
/// scales the polarizability operator by the largest anisotropy).
#[derive(Debug, Clone, PartialEq)]
pub struct CoupledAxis {
    /// Rotational constant of the axis's J ladder, cm⁻¹.
    pub b_cm: f64,
    /// Quartic distortion constant of that ladder, cm⁻¹ (0 for tops).
    pub d_cm: f64,
    /// Polarizability anisotropy along minus across the axis (signed), Å³.
    pub delta_alpha_a3: f64,
    /// Dipole along the axis, debye.
    pub dipole_debye: f64,
    /// β∥ along the axis, atomic units (0 if not known).
    pub beta_parallel_au: f64,
    /// β⊥ across the axis, atomic units (0 if not known).
    pub beta_perpendicular_au: f64,
}

impl CoupledAxis {
    /// The axis the fields couple to on `molecule`.
    pub fn of(molecule: &Molecule) -> CoupledAxis {
        let mut axis = CoupledAxis {
            b_cm: molecule.revival_b_cm(),
            d_cm: molecule.as_linear().map(|l| l.d_cm).unwrap_or(0.0),
            delta_alpha_a3: molecule.delta_alpha_a3(),
            dipole_debye: molecule.dipole_debye,
            beta_parallel_au: molecule.beta_parallel_au.unwrap_or(0.0),
            beta_perpendicular_au: molecule.beta_perpendicular_au.unwrap_or(0.0),
        };
        if let (RotorKind::SymmetricTop, Some(t)) = (molecule.kind(), molecule.as_top()) {
            let frame = t.frame(true);
            axis.b_cm = t.b_cm;
            axis.d_cm = 0.0;
            // β∥ and β⊥ of a symmetric top are given along and across its figure axis.
            axis.delta_alpha_a3 = t.alpha(frame[0]) - t.alpha(frame[1]);
        }
        axis
    }

    /// Energy of level J of the axis's ladder, cm⁻¹: B J(J+1) − D J²(J+1)².
    pub fn energy_cm(&self, j: u32) -> f64 {
        let x = (j as f64) * (j as f64 + 1.0);
        self.b_cm * x - self.d_cm * x * x
    }
}

/// Coupling rates (rad/ps) of all fields at one time: H = H0 − u1 cosθ − u2 cos²θ − u3 cos³θ.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct Rates {
    /// Coefficient of cosθ (dipole and hyperpolarizability terms).
    pub u1: f64,
    /// Coefficient of cos²θ (polarizability terms).
    pub u2: f64,
    /// Coefficient of cos³θ (hyperpolarizability term).
    pub u3: f64,
    /// Two-colour rate per atomic unit of hyperpolarizability, ⅛ E1² E2 cosφ (1 a.u.)/ħ: the coefficient of
    /// −Σ β_ijk Φ_Zi Φ_Zj Φ_Zk (β in a.u.), which a top's kernel builds from its own tensor.
    pub g3: f64,
}

/// All coupling rates at time t (ps) on an axis: static and terahertz fields on the dipole,
/// cycle-averaged laser and two-colour terms on the polarizability and hyperpolarizability, and the
/// non-averaged −½Δα E² term of terahertz fields.
pub fn rates(field: &FieldModel, t_ps: f64, mol: &CoupledAxis) -> Rates {
    use crate::units::{BETA_AU, EPSILON_0, HBAR, dipole_rate_rad_per_ps, peak_field_v_per_m};
    let da = mol.delta_alpha_a3;
    let mut r = Rates { u2: field.alignment_rate(t_ps, da), ..Default::default() };
    if let Some(sf) = &field.static_field {
        r.u1 += dipole_rate_rad_per_ps(mol.dipole_debye, sf.along_z_at(t_ps));
    }
    let kappa = coupling_rad_per_ps_per_a3_wcm2() * da;
    for tc in &field.two_colour {
        let f = tc.envelope_pulse().envelope(t_ps);
        if f == 0.0 {
            continue;
        }
        r.u2 += kappa * (tc.fundamental_intensity_wcm2 + tc.second_harmonic_intensity_wcm2) * f;
        // −⅛ E1² E2 cosφ [(β∥ − 3β⊥) cos³θ + 3β⊥ cosθ], fields from the peak intensities.
        let e1 = peak_field_v_per_m(tc.fundamental_intensity_wcm2);
        let e2 = peak_field_v_per_m(tc.second_harmonic_intensity_wcm2);
        let g = 0.125 * e1 * e1 * e2 * f.powf(1.5) * tc.phase_rad.cos() * BETA_AU / HBAR * 1e-12;
        let (bp, bt) = (mol.beta_parallel_au, mol.beta_perpendicular_au);
        r.u3 += g * (bp - 3.0 * bt);
        r.u1 += g * 3.0 * bt;
        r.g3 += g;
    }
    for th in &field.terahertz {
        let e_kv = th.field_kv_cm(t_ps);
        r.u1 += dipole_rate_rad_per_ps(mol.dipole_debye, e_kv);
        // −½ Δα E² cos²θ with Δα = 4π ε0 Δα' (SI), E in V/m.
        let e = e_kv * 1e5;
        r.u2 += 0.5 * 4.0 * std::f64::consts::PI * EPSILON_0 * da * 1e-30 * e * e / HBAR * 1e-12;
    }
    r
}
