//! Physical constants and unit conversions: the only place unit factors live.
//!
//! Internal units: time in picoseconds (ps), angular frequency in rad/ps, energies given by users
//! as wavenumbers in cm⁻¹, polarizability volumes in Å³ and intensities in W/cm².

/// Planck constant h in J s (CODATA exact).
pub const H_PLANCK: f64 = 6.626_070_15e-34;
/// Reduced Planck constant ħ = h / 2π in J s.
pub const HBAR: f64 = H_PLANCK / (2.0 * std::f64::consts::PI);
/// Speed of light c in m/s (exact).
pub const C_LIGHT: f64 = 299_792_458.0;
/// Boltzmann constant k_B in J/K (CODATA exact).
pub const K_BOLTZMANN: f64 = 1.380_649e-23;
/// Vacuum permittivity ε0 in F/m (CODATA 2018).
pub const EPSILON_0: f64 = 8.854_187_812_8e-12;
/// Speed of light in cm/ps.
pub const C_CM_PER_PS: f64 = C_LIGHT * 100.0 * 1e-12;
/// Femtoseconds per picosecond.
pub const FS_PER_PS: f64 = 1000.0;

/// Angular frequency (rad/ps) of an energy given as a wavenumber in cm⁻¹: ω = 2π c ν̃.
pub fn cm_to_rad_per_ps(wavenumber_cm: f64) -> f64 {
    2.0 * std::f64::consts::PI * C_CM_PER_PS * wavenumber_cm
}

/// Energy in J of a wavenumber in cm⁻¹: E = h c ν̃.
pub fn cm_to_joule(wavenumber_cm: f64) -> f64 {
    H_PLANCK * C_LIGHT * 100.0 * wavenumber_cm
}

/// Thermal energy k_B T expressed as a wavenumber in cm⁻¹ (T in K).
pub fn kt_in_cm(temperature_k: f64) -> f64 {
    K_BOLTZMANN * temperature_k / (H_PLANCK * C_LIGHT * 100.0)
}

/// Coupling rate (rad/ps) per unit of polarizability volume (Å³) times intensity (W/cm²):
/// U = 2π α' I / (c ħ) for the cycle-averaged interaction −¼ E0² Δα cos²θ.
pub fn coupling_rad_per_ps_per_a3_wcm2() -> f64 {
    2.0 * std::f64::consts::PI * 1e-30 * 1e4 / (C_LIGHT * HBAR) * 1e-12
}

/// Rotational revival period (ps) of a linear rotor with rotational constant B in cm⁻¹: T = 1/(2 B c).
pub fn revival_period_ps(b_cm: f64) -> f64 {
    1.0 / (2.0 * b_cm * C_CM_PER_PS)
}

/// Peak electric field (V/m) of a linearly polarized beam of intensity I (W/cm²): E0 = sqrt(2 I / (c ε0)).
pub fn peak_field_v_per_m(intensity_wcm2: f64) -> f64 {
    (2.0 * intensity_wcm2 * 1e4 / (C_LIGHT * EPSILON_0)).sqrt()
}

/// One atomic unit of first hyperpolarizability in C³ m³ J⁻².
pub const BETA_AU: f64 = 3.206_361_3e-53;

/// One debye in C m.
pub const DEBYE: f64 = 3.335_640_952e-30;

/// Dipole coupling rate μE/ħ in rad/ps for a dipole in debye and a field in kV/cm (1 kV/cm = 1e5 V/m).
pub fn dipole_rate_rad_per_ps(dipole_debye: f64, field_kv_cm: f64) -> f64 {
    dipole_debye * DEBYE * field_kv_cm * 1e5 / HBAR * 1e-12
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn wavenumber_to_frequency() {
        // 1 cm⁻¹ = c × 1 cm⁻¹ = 2.99792458e10 cm/s × 1 cm⁻¹ = 29.9792458 GHz (exact: c is defined,
        // CODATA 2018, Tiesinga et al., Rev. Mod. Phys. 93, 025010 (2021)).
        let f_ghz = cm_to_rad_per_ps(1.0) / (2.0 * std::f64::consts::PI) * 1e3;
        assert!((f_ghz - 29.979_245_8).abs() < 1e-9);
    }

    #[test]
    fn field_of_one_tw_per_cm2() {
        // 1 TW/cm² gives E0 ≈ 2.74e9 V/m (common practice: E0 = sqrt(2I/(c ε0)), I = ½ c ε0 E0² for a linearly
        // polarized wave). With CODATA 2018 c = 299 792 458 m/s and ε0 = 8.854 187 8128e-12 F/m:
        // sqrt(2 × 1e16 W/m² / (2.654 419e-3 S)) = 2.744 92e9 V/m.
        let e0 = peak_field_v_per_m(1e12);
        assert!((e0 / 2.745e9 - 1.0).abs() < 1e-3, "{e0}");
    }

    #[test]
    fn kt_room_temperature() {
        // k_B T at 300 K is 208.5 cm⁻¹: k_B/(h c) = 1.380 649e-23 J/K / (6.626 070 15e-34 J s × 2.997 924 58e10
        // cm/s) = 0.695 034 80 cm⁻¹/K (CODATA 2018, Tiesinga et al., Rev. Mod. Phys. 93, 025010 (2021); all
        // three constants exact), × 300 K = 208.510 44 cm⁻¹.
        assert!((kt_in_cm(300.0) - 208.5103).abs() < 1e-3);
    }

    #[test]
    fn dipole_energy_scale() {
        // μE for 1 D in 1 kV/cm is 1.680e-2 cm⁻¹ (0.0168 cm⁻¹ per D·kV/cm, common practice); as a rate in rad/ps
        // that is 2πc × 0.0168 cm⁻¹. Derivation: 1 D = 1e-18 statC·cm = 1e-21/c C·m = 3.335 640 95e-30 C·m;
        // μE/(hc) = 3.335 640 95e-30 C·m × 1e5 V/m / (6.626 070 15e-34 J s × 2.997 924 58e10 cm/s)
        // = 0.016 792 005 cm⁻¹ (CODATA 2018 h and c, both exact).
        let want = cm_to_rad_per_ps(DEBYE * 1e5 / (H_PLANCK * C_LIGHT * 100.0));
        assert!((dipole_rate_rad_per_ps(1.0, 1.0) / want - 1.0).abs() < 1e-12);
        assert!((DEBYE * 1e5 / (H_PLANCK * C_LIGHT * 100.0) - 0.016792).abs() < 1e-5);
    }

    #[test]
    fn revival_of_nitrogen() {
        // T_rev = 1/(2Bc): E_J = hcB J(J+1) and J(J+1) is always even, so every Bohr frequency is a multiple
        // of 2Bc (derived here; common practice, e.g. Stapelfeldt & Seideman, Rev. Mod. Phys. 75, 543 (2003)).
        // For B = 1.98958 cm⁻¹: 1/(2 × 1.98958 cm⁻¹ × 2.997 924 58e-2 cm/ps) = 8.382 78 ps.
        assert!((revival_period_ps(1.98958) - 8.3827).abs() < 1e-3);
    }
}
