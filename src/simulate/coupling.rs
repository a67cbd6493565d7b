//! How the fields couple to a linear rotor or a top's figure axis: the rates (rad/ps) of the cosθ,
//! cos²θ and cos³θ terms of the interaction at one time, from the field model and the molecule's
//! dipole, polarizability anisotropy and hyperpolarizability. The solver's polar kernels read them.

use crate::field::FieldModel;
use crate::units::coupling_rad_per_ps_per_a3_wcm2;
use crate::molecule::Molecule;

/// Coupling rates (rad/ps) of all fields at one time: H = H0 − u1 cosθ − u2 cos²θ − u3 cos³θ.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct Rates {
    /// Coefficient of cosθ (dipole and hyperpolarizability terms).
    pub u1: f64,
    /// Coefficient of cos²θ (polarizability terms).
    pub u2: f64,
    /// Coefficient of cos³θ (hyperpolarizability term).
    pub u3: f64,
}

/// All coupling rates at time t (ps) for a molecule: static and terahertz fields on the dipole,
/// cycle-averaged laser and two-colour terms on the polarizability and hyperpolarizability, and the
/// non-averaged −½Δα E² term of terahertz fields.
pub fn rates(field: &FieldModel, t_ps: f64, mol: &Molecule) -> Rates {
    use crate::units::{BETA_AU, EPSILON_0, HBAR, dipole_rate_rad_per_ps, peak_field_v_per_m};
    let da = mol.delta_alpha_a3();
    let mut r = Rates { u2: field.alignment_rate(t_ps, da), ..Default::default() };
    if let Some(sf) = &field.static_field {
        r.u1 += dipole_rate_rad_per_ps(mol.dipole_debye, sf.strength_at(t_ps));
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
        let (bp, bt) = (mol.beta_parallel_au.unwrap_or(0.0), mol.beta_perpendicular_au.unwrap_or(0.0));
        r.u3 += g * (bp - 3.0 * bt);
        r.u1 += g * 3.0 * bt;
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
