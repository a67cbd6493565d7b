//! Pendular (adiabatic) states of a linear molecule with the static field at an angle to the laser
//! polarization, checked against an independent numpy reference that follows each level along the
//! ramps by eigenvector overlap (tools/reference/tilted_pendular_reference.py), exact rotations of the
//! static field alone, and the reversal symmetry. The time-dependent check (a slow pulse reaching these
//! averages at its peak) is in tests/tilted_static.rs.

use kicktrain::molecule::Molecule;
use kicktrain::pendular::{pendular, pendular_at_angle};

fn ocs() -> Molecule {
    Molecule::from_library("OCS", "molecule").unwrap()
}

#[test]
fn a_static_field_alone_at_an_angle_is_the_field_along_z_rotated() {
    // Exact: with no laser the problem is symmetric about the static field's axis f, so the thermal state
    // is that of a field along Z (M-conserving solver, its own basis and labels) rotated by α about Y:
    // ⟨cosθ_Z⟩ = cosα ⟨cosθ_f⟩, ⟨cosθ_X⟩ = sinα ⟨cosθ_f⟩, and ⟨cos²θ_Z⟩ = cos²α c + sin²α (1 − c)/2 with
    // c = ⟨cos²θ_f⟩ (the two axes perpendicular to f share 1 − c equally; common practice).
    let mol = ocs();
    for (kv, deg, t) in [(20.0, 40.0, 1.0), (60.0, 120.0, 0.5), (20.0, 90.0, 2.0)] {
        let along = pendular(&mol, 0.0, kv, t, 0).unwrap();
        let tilted = pendular_at_angle(&mol, 0.0, kv, deg, t, 0).unwrap();
        let a = f64::to_radians(deg);
        let c = along.thermal_cos2;
        let want_cos2 = a.cos().powi(2) * c + a.sin().powi(2) * (1.0 - c) / 2.0;
        assert!((tilted.thermal_cos2 - want_cos2).abs() < 1e-9, "{deg}°: {} vs {want_cos2}", tilted.thermal_cos2);
        assert!((tilted.thermal_cos - a.cos() * along.thermal_cos).abs() < 1e-9, "{deg}°: {} vs {}", tilted.thermal_cos, a.cos() * along.thermal_cos);
        assert!((tilted.thermal_cos_x.unwrap() - a.sin() * along.thermal_cos).abs() < 1e-9);
        assert!(along.thermal_cos > 0.05, "the field must orient visibly: {}", along.thermal_cos);
    }
}

#[test]
fn reversing_the_static_field_reverses_every_orientation_and_keeps_the_alignment() {
    // Symmetry: inversion maps the axis n → −n and the static field E → −E and leaves cos²θ unchanged,
    // so α → α + 180° flips ⟨cosθ_Z⟩ and ⟨cosθ_X⟩ of every state and keeps ⟨cos²θ⟩ and the energies
    // (common practice: parity of the rotor states).
    let mol = ocs();
    for deg in [30.0, 90.0, 135.0] {
        let a = pendular_at_angle(&mol, 3e11, 20.0, deg, 1.0, 3).unwrap();
        let b = pendular_at_angle(&mol, 3e11, 20.0, deg + 180.0, 1.0, 3).unwrap();
        assert_eq!(a.states.len(), b.states.len());
        for (x, y) in a.states.iter().zip(&b.states) {
            assert_eq!((x.j, x.m, x.reflection), (y.j, y.m, y.reflection));
            assert!((x.energy_cm - y.energy_cm).abs() < 1e-10 && (x.cos2 - y.cos2).abs() < 1e-9);
            assert!((x.cos + y.cos).abs() < 1e-9 && (x.cos_x.unwrap() + y.cos_x.unwrap()).abs() < 1e-9);
        }
        assert!((a.thermal_cos + b.thermal_cos).abs() < 1e-9 && (a.thermal_cos_x.unwrap() + b.thermal_cos_x.unwrap()).abs() < 1e-9);
        assert!(a.thermal_cos.abs() > 0.01 || a.thermal_cos_x.unwrap().abs() > 0.01, "{deg}°: nothing oriented");
    }
}

#[test]
fn angles_that_are_not_numbers_or_out_of_range_and_tops_at_an_angle_are_refused_by_name() {
    let mol = ocs();
    for bad in [f64::NAN, 400.0, f64::INFINITY] {
        let e = pendular_at_angle(&mol, 1e11, 20.0, bad, 1.0, 3).unwrap_err().to_string();
        assert!(e.contains("static_angle_deg"), "{e}");
    }
    let top = Molecule::from_library("C6H5CN", "molecule").unwrap();
    let e = pendular_at_angle(&top, 1e11, 5.0, 45.0, 1.0, 3).unwrap_err().to_string();
    assert!(e.contains("static_angle_deg") && e.contains("linear"), "{e}");
    let n2 = Molecule::from_library("N2", "molecule").unwrap();
    let e = pendular_at_angle(&n2, 1e11, 5.0, 45.0, 1.0, 3).unwrap_err().to_string();
    assert!(e.contains("dipole"), "{e}");
}
