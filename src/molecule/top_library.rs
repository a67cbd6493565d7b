//! Built-in symmetric and asymmetric tops. Every number carries its source; values recalled without a
//! checked reference say "from memory". Polarizability tensors of polyatomic molecules were not found in
//! a readable source: benzonitrile's and iodobenzene's come from our own computation
//! (tools/polar_top_constants.md, about ±5 %); the others are estimates: give your own when they matter.
//! Their hyperpolarizability components β_dgg are our own computation too (tools/top_beta_finite_field.md,
//! about ±20 %).

use super::Molecule;
use super::library::Sourced;
use super::top::{BodyAxis, Top, TopSpinWeights};

/// One library top with sourced constants (cm⁻¹, Å³, debye, eV).
#[derive(Debug, Clone)]
pub struct TopEntry {
    /// Library key, e.g. "CH3F".
    pub name: &'static str,
    /// Other accepted spellings.
    pub aliases: &'static [&'static str],
    /// A few words on what it is.
    pub description: &'static str,
    /// Rotational constants A, B, C (cm⁻¹), ground vibrational state.
    pub constants_cm: [Sourced; 3],
    /// Distortion D_J, D_JK (cm⁻¹) for symmetric tops (zero for asymmetric tops).
    pub distortion_cm: [Sourced; 2],
    /// Principal polarizability volumes along a, b, c (Å³).
    pub polarizability_a3: [Sourced; 3],
    /// Permanent dipole (debye) and its axis, None for non-polar molecules.
    pub dipole: Option<(Sourced, BodyAxis)>,
    /// Nuclear-spin weights by rotational symmetry.
    pub spin_weights: TopSpinWeights,
    /// Why those weights.
    pub spin_weights_source: &'static str,
    /// First ionization energy, eV.
    pub ionization_energy_ev: Option<Sourced>,
    /// Hyperpolarizability components β_dgg (atomic units, Taylor convention) along a, b, c, d the dipole
    /// axis (two-colour pulses), where computed.
    pub beta_au: Option<[Sourced; 3]>,
}

const fn s(value: f64, source: &'static str) -> Sourced {
    Sourced { value, source }
}

/// MHz to cm⁻¹ (1 cm⁻¹ = 29 979.2458 MHz, exact from c).
const MHZ: f64 = 1.0 / 29_979.245_8;

const METHYL_HALIDES: &str =
    "W. J. Orville-Thomas, J. T. Cox and W. Gordy, millimeter-wave spectra and centrifugal stretching constants of the methyl halides (1954)";
const C3V_SPIN: &str = "three equivalent I = 1/2 nuclei about the C3 axis: K = 3n states weigh twice the others (Herzberg, Molecular Spectra II; Bunker & Jensen, Molecular Symmetry and Spectroscopy; derived by character projection)";
/// Principal polarizabilities from our own computation (tools/polar_top_constants.md).
const COMPUTED_ALPHA: &str = "our computation: static CAM-B3LYP/aug-cc-pVDZ (aug-cc-pVDZ-PP on I) at a B3LYP/def2-SVP geometry, principal inertia axes (tools/polar_top_constants.md; about ±5 %)";
/// Ground-state constants and dipole of benzonitrile.
const BENZONITRILE: &str = "K. Wohlfart, M. Schnell, J.-U. Grabow, J. Küpper, \"Precise dipole moment and quadrupole coupling constants of benzonitrile\", J. Mol. Spectrosc. 247, 119 (2008) (arXiv:0709.2984)";
const BETA_BENZONITRILE: &str = "β_aaa, β_abb, β_acc (β_dgg, d = a along the dipole, from N into the ring): static electronic values, CAM-B3LYP/aug-cc-pVDZ finite-field dipoles (fields 0.001/0.002/0.004 a.u., Richardson, finite-field error ±0.01) at the B3LYP/def2-SVP geometry, computed for kicktrain with PySCF 2.14.0 by tools/top_beta_finite_field.py (stencils and sign checked against PySCF's analytic HF hyperpolarizability of water to 1.5e-3 a.u.); Taylor convention; method and basis uncertainty about ±20 % (CAM-B3LYP is 3–9 % below CCSD(T) for OCS and N2O in the same basis); no published value found";
const BETA_IODOBENZENE: &str = "β_aaa, β_abb, β_acc (β_dgg, d = a along the dipole, from I into the ring): static electronic values, CAM-B3LYP/aug-cc-pVDZ (aug-cc-pVDZ-PP with its 28-electron pseudopotential on I) finite-field dipoles (fields 0.001/0.002 a.u., finite-field error ±0.03) at the B3LYP/def2-SVP geometry, computed for kicktrain with PySCF 2.14.0 by tools/top_beta_finite_field.py (stencils and sign checked against PySCF's analytic HF hyperpolarizability of water to 1.5e-3 a.u.); Taylor convention; method and basis uncertainty about ±20 %; no published value found";
const NO_DATA: &str = "from memory (no readable source found; estimate)";

impl TopEntry {
    /// The solver's view of this entry.
    pub fn molecule(&self) -> Molecule {
        let p = [self.polarizability_a3[0].value, self.polarizability_a3[1].value, self.polarizability_a3[2].value];
        let top = Top {
            a_cm: self.constants_cm[0].value,
            b_cm: self.constants_cm[1].value,
            c_cm: self.constants_cm[2].value,
            d_j_cm: self.distortion_cm[0].value,
            d_jk_cm: self.distortion_cm[1].value,
            d_k_cm: 0.0,
            polarizability_a3: p,
            dipole_axis: self.dipole.map(|d| d.1).unwrap_or(BodyAxis::A),
            alignment_axis: Top::most_polarizable(&p),
            spin_weights: self.spin_weights.clone(),
        };
        let mut m = Molecule::from_top(self.name, top, self.dipole.map(|d| d.0.value).unwrap_or(0.0), self.ionization_energy_ev.map(|e| e.value));
        m.beta_by_axis_au = self.beta_au.map(|b| [b[0].value, b[1].value, b[2].value]);
        m
    }
}

/// All built-in tops.
pub fn top_library() -> Vec<TopEntry> {
    let zero = s(0.0, "not used");
    vec![
        TopEntry {
            name: "CH3F",
            aliases: &["methyl fluoride", "fluoromethane"],
            description: "prolate symmetric top, ¹²CH₃¹⁹F",
            constants_cm: [s(5.182, "A0 from infrared spectra, from memory"), s(25_536.11 * MHZ, METHYL_HALIDES), s(25_536.11 * MHZ, METHYL_HALIDES)],
            distortion_cm: [s(59.3e-3 * MHZ, METHYL_HALIDES), s(445e-3 * MHZ, METHYL_HALIDES)],
            polarizability_a3: [
                s(3.24, "α∥ from mean 2.97 Å³ (CRC Handbook) and anisotropy ≈ 0.4 Å³, from memory"),
                s(2.84, "α⊥, same estimate, from memory"),
                s(2.84, "α⊥, same estimate, from memory"),
            ],
            dipole: Some((s(1.8585, "Marshall & Muenter, J. Mol. Spectrosc. 83, 279 (1980), from memory"), BodyAxis::A)),
            spin_weights: TopSpinWeights::ByK(vec![2.0, 1.0, 1.0]),
            spin_weights_source: C3V_SPIN,
            ionization_energy_ev: Some(s(12.47, "NIST Chemistry WebBook, from memory")),
            beta_au: None,
        },
        TopEntry {
            name: "CH3Cl",
            aliases: &["methyl chloride", "chloromethane"],
            description: "prolate symmetric top, ¹²CH₃³⁵Cl",
            constants_cm: [s(5.205, "A0 from infrared spectra, from memory"), s(13_292.86 * MHZ, METHYL_HALIDES), s(13_292.86 * MHZ, METHYL_HALIDES)],
            distortion_cm: [s(18.1e-3 * MHZ, METHYL_HALIDES), s(198e-3 * MHZ, METHYL_HALIDES)],
            polarizability_a3: [s(5.4, NO_DATA), s(4.2, NO_DATA), s(4.2, NO_DATA)],
            dipole: Some((s(1.8963, "Stark-effect measurements, from memory"), BodyAxis::A)),
            spin_weights: TopSpinWeights::ByK(vec![2.0, 1.0, 1.0]),
            spin_weights_source: C3V_SPIN,
            ionization_energy_ev: Some(s(11.26, "NIST Chemistry WebBook, from memory")),
            beta_au: None,
        },
        TopEntry {
            name: "CHF3",
            aliases: &["fluoroform", "trifluoromethane"],
            description: "oblate symmetric top (the figure axis c is least polarizable)",
            constants_cm: [
                s(10_348.9 * MHZ, "B0, from memory"),
                s(10_348.9 * MHZ, "B0, from memory"),
                s((10_348.9 - 4_673.36) * MHZ, "C0 = B0 − 4673.36(10) MHz (Meerts & Ozier 1979, avoided-crossing molecular-beam measurement of C0)"),
            ],
            distortion_cm: [zero, zero],
            polarizability_a3: [
                s(2.87, "mean ≈ 2.8 Å³ from memory; α∥ < α⊥ (sign from THz Kerr-effect measurements)"),
                s(2.87, "as α_a (symmetric top)"),
                s(2.66, NO_DATA),
            ],
            dipole: Some((s(1.65150, "Meerts & Ozier (1979): μ = 1.65150(10) D"), BodyAxis::C)),
            spin_weights: TopSpinWeights::ByK(vec![2.0, 1.0, 1.0]),
            spin_weights_source: "three equivalent ¹⁹F (I = 1/2) about the C3 axis, as for methyl halides (derived by character projection)",
            ionization_energy_ev: Some(s(13.86, "NIST Chemistry WebBook, from memory")),
            beta_au: None,
        },
        TopEntry {
            name: "SO2",
            aliases: &["sulfur dioxide"],
            description: "near-prolate asymmetric top (κ ≈ −0.94), ³²S¹⁶O₂",
            constants_cm: [s(2.02736, "NIST CCCBDB (Herzberg 1966)"), s(0.34417, "NIST CCCBDB (Herzberg 1966)"), s(0.29354, "NIST CCCBDB (Herzberg 1966)")],
            distortion_cm: [zero, zero],
            polarizability_a3: [s(5.5, NO_DATA), s(3.5, NO_DATA), s(2.7, NO_DATA)],
            dipole: Some((s(1.633, "Patel, Margolese & Dyke, J. Chem. Phys. 70, 2740 (1979), from memory"), BodyAxis::B)),
            spin_weights: TopSpinWeights::ByKaKc([1.0, 0.0, 0.0, 1.0]),
            spin_weights_source: "two ¹⁶O (I = 0) exchanged by C2(b): only Ka + Kc even levels exist (derived by character projection)",
            ionization_energy_ev: Some(s(12.35, "NIST Chemistry WebBook, from memory")),
            beta_au: None,
        },
        TopEntry {
            name: "C2H4",
            aliases: &["ethylene", "ethene"],
            description: "near-prolate asymmetric top (κ ≈ −0.91)",
            constants_cm: [s(4.828, "A0, from memory"), s(1.0012, "B0, from memory"), s(0.8282, "C0, from memory")],
            distortion_cm: [zero, zero],
            polarizability_a3: [s(5.40, NO_DATA), s(3.86, NO_DATA), s(3.40, NO_DATA)],
            dipole: None,
            spin_weights: TopSpinWeights::ByKaKc([7.0, 3.0, 3.0, 3.0]),
            spin_weights_source: "four protons, D2 rotational subgroup: 7:3:3:3 (Herzberg, Molecular Spectra II; derived by character projection)",
            ionization_energy_ev: Some(s(10.51, "NIST Chemistry WebBook, from memory")),
            beta_au: None,
        },
        TopEntry {
            name: "H2O",
            aliases: &["water"],
            description: "asymmetric top (κ ≈ −0.44), treated as rigid: use at low temperature only",
            constants_cm: [s(27.877, "NIST CCCBDB"), s(14.512, "NIST CCCBDB"), s(9.285, "NIST CCCBDB")],
            distortion_cm: [zero, zero],
            polarizability_a3: [
                s(
                    1.528,
                    "Murphy, J. Chem. Phys. 67, 5877 (1977), from memory (mean 9.83 bohr³ = 1.457 Å³ checked: Russell & Spackman, quoted in J. Chem. Phys. 149, 204303 (2018))",
                ),
                s(1.468, "Murphy (1977), from memory"),
                s(1.415, "Murphy (1977), from memory"),
            ],
            dipole: Some((s(1.8546, "Clough, Beers, Klein & Rothman, J. Chem. Phys. 59, 2254 (1973), from memory"), BodyAxis::B)),
            spin_weights: TopSpinWeights::ByKaKc([1.0, 3.0, 3.0, 1.0]),
            spin_weights_source: "ortho (Ka + Kc odd) : para = 3 : 1 (Townes & Schawlow, Microwave Spectroscopy)",
            ionization_energy_ev: Some(s(12.621, "NIST Chemistry WebBook: 12.621 ± 0.002 eV")),
            beta_au: None,
        },
        TopEntry {
            name: "C6H5I",
            aliases: &["iodobenzene"],
            description: "near-prolate asymmetric top (κ ≈ −0.97), a heavy molecule with a large polarizability",
            constants_cm: [s(5669.0 * MHZ, "microwave spectra, from memory"), s(750.4 * MHZ, "from memory"), s(662.8 * MHZ, "from memory")],
            distortion_cm: [zero, zero],
            polarizability_a3: [s(21.78, COMPUTED_ALPHA), s(15.15, COMPUTED_ALPHA), s(10.00, COMPUTED_ALPHA)],
            dipole: Some((s(1.7, "from memory (our CAM-B3LYP/aug-cc-pVDZ-PP value: 1.74 D along a)"), BodyAxis::A)),
            spin_weights: TopSpinWeights::ByKaKc([20.0, 20.0, 12.0, 12.0]),
            spin_weights_source: "C2(a) exchanges two proton pairs: Ka even : Ka odd = 20 : 12 (derived by character projection)",
            ionization_energy_ev: Some(s(8.69, "NIST Chemistry WebBook, from memory")),
            beta_au: Some([s(41.58, BETA_IODOBENZENE), s(40.48, BETA_IODOBENZENE), s(43.61, BETA_IODOBENZENE)]),
        },
        TopEntry {
            name: "C6H5CN",
            aliases: &["benzonitrile", "cyanobenzene"],
            description: "near-prolate asymmetric top (κ ≈ −0.85), strongly polar along a: a molecule oriented in mixed fields",
            constants_cm: [s(5655.2654 * MHZ, BENZONITRILE), s(1546.875864 * MHZ, BENZONITRILE), s(1214.40399 * MHZ, BENZONITRILE)],
            distortion_cm: [zero, zero],
            polarizability_a3: [s(18.18, COMPUTED_ALPHA), s(12.90, COMPUTED_ALPHA), s(7.49, COMPUTED_ALPHA)],
            dipole: Some((s(4.5152, BENZONITRILE), BodyAxis::A)),
            spin_weights: TopSpinWeights::ByKaKc([20.0, 20.0, 12.0, 12.0]),
            spin_weights_source: "C2(a) exchanges two proton pairs (H2, H6 and H3, H5): Ka even : Ka odd = 10 : 6 (derived by character projection)",
            ionization_energy_ev: Some(s(9.73, "from memory")),
            beta_au: Some([s(53.13, BETA_BENZONITRILE), s(-25.66, BETA_BENZONITRILE), s(-39.37, BETA_BENZONITRILE)]),
        },
        TopEntry {
            name: "C10H8",
            aliases: &["naphthalene"],
            description: "asymmetric top (κ ≈ −0.69), non-polar",
            constants_cm: [s(3118.6 * MHZ, "from memory"), s(1231.9 * MHZ, "from memory"), s(882.8 * MHZ, "from memory")],
            distortion_cm: [zero, zero],
            polarizability_a3: [s(24.0, NO_DATA), s(17.5, NO_DATA), s(9.5, NO_DATA)],
            dipole: None,
            spin_weights: TopSpinWeights::ByKaKc([76.0, 60.0, 60.0, 60.0]),
            spin_weights_source: "eight protons, D2 rotational subgroup: 76:60:60:60 (derived by character projection)",
            ionization_energy_ev: Some(s(8.14, "NIST Chemistry WebBook, from memory")),
            beta_au: None,
        },
        TopEntry {
            name: "C5H5N",
            aliases: &["pyridine"],
            description: "near-oblate asymmetric top (κ ≈ +0.85), polar",
            constants_cm: [s(6039.25 * MHZ, "microwave spectra, from memory"), s(5804.91 * MHZ, "from memory"), s(2959.21 * MHZ, "from memory")],
            distortion_cm: [zero, zero],
            polarizability_a3: [s(11.0, NO_DATA), s(10.5, NO_DATA), s(6.5, NO_DATA)],
            dipole: Some((s(2.19, "from memory"), BodyAxis::A)),
            spin_weights: TopSpinWeights::ByKaKc([20.0, 20.0, 12.0, 12.0]),
            spin_weights_source: "C2(a) exchanges two proton pairs: Ka even : Ka odd = 20 : 12 (derived by character projection, C2 taken along a: from memory)",
            ionization_energy_ev: Some(s(9.26, "NIST Chemistry WebBook, from memory")),
            beta_au: None,
        },
    ]
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn top_entries_are_valid_sourced_and_of_every_kind() {
        use super::super::top::TopKind;
        let lib = top_library();
        let mut kinds = [0; 3];
        for e in &lib {
            let m = e.molecule();
            m.validate(e.name).unwrap();
            for c in e.constants_cm.iter().chain(&e.polarizability_a3) {
                assert!(!c.source.trim().is_empty(), "{}", e.name);
            }
            let t = m.as_top().unwrap();
            kinds[match t.kind() {
                TopKind::Prolate | TopKind::Oblate => 0,
                TopKind::Asymmetric if t.kappa() < 0.0 => 1,
                TopKind::Asymmetric => 2,
            }] += 1;
        }
        assert!(kinds[0] >= 3 && kinds[1] + kinds[2] >= 4 && kinds[2] >= 1, "{kinds:?}");
    }
}
