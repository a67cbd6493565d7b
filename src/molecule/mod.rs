//! Molecules: rotational constants, polarizabilities and nuclear-spin weights, plus the built-in
//! library (every number with its source). No numerical method lives here.

mod library;
pub mod top;
mod top_library;

pub use library::{LibraryEntry, Sourced, library};
pub use top_library::{TopEntry, top_library};

use crate::error::{Error, Result, edit_distance, require_non_negative, require_positive};

/// A molecule as the solver sees it: its rotor (a linear molecule's constants or a top's) and what
/// every kind of rotor may carry (dipole, hyperpolarizability, ionization energy).
#[derive(Debug, Clone, PartialEq)]
pub struct Molecule {
    /// Display name (library key or user label).
    pub name: String,
    /// The rotational constants and polarizabilities, by the kind of rotor.
    pub rotor: Rotor,
    /// Permanent dipole moment, debye (0 for non-polar molecules): along the axis of a linear molecule,
    /// along `Top::dipole_axis` of a top.
    pub dipole_debye: f64,
    /// First hyperpolarizability β∥ = β_zzz in atomic units (Taylor convention), along the axis of a linear
    /// molecule or the figure axis of a symmetric top, if known.
    pub beta_parallel_au: Option<f64>,
    /// First hyperpolarizability β⊥ = β_zxx in atomic units (Taylor convention), if known.
    pub beta_perpendicular_au: Option<f64>,
    /// An asymmetric top's first hyperpolarizability components β_dgg (atomic units, Taylor convention) for
    /// g = a, b, c, with d its dipole axis (β_ddd is the entry of the dipole axis), if known: the components a
    /// two-colour field along Z couples to when the dipole axis is a two-fold symmetry axis (C2v molecules).
    pub beta_by_axis_au: Option<[f64; 3]>,
    /// First ionization energy, eV (for the tunnel-ionization estimate), if known.
    pub ionization_energy_ev: Option<f64>,
}

/// The rotational constants and polarizabilities of a molecule, by the kind of rotor.
#[derive(Debug, Clone, PartialEq)]
pub enum Rotor {
    /// A linear molecule.
    Linear(LinearRotor),
    /// A symmetric or asymmetric top.
    Top(top::Top),
}

/// The constants of a linear molecule.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LinearRotor {
    /// Rotational constant B in cm⁻¹.
    pub b_cm: f64,
    /// Quartic centrifugal distortion constant D in cm⁻¹ (E = B J(J+1) − D J²(J+1)²).
    pub d_cm: f64,
    /// Polarizability volume parallel to the molecular axis, α∥ in Å³.
    pub alpha_parallel_a3: f64,
    /// Polarizability volume perpendicular to the molecular axis, α⊥ in Å³.
    pub alpha_perpendicular_a3: f64,
    /// Nuclear-spin statistical weights `[even_J, odd_J]` (relative, ≥ 0, not both zero).
    pub spin_weights: [f64; 2],
}

impl LinearRotor {
    /// Polarizability anisotropy Δα = α∥ − α⊥ in Å³.
    pub fn delta_alpha_a3(&self) -> f64 {
        self.alpha_parallel_a3 - self.alpha_perpendicular_a3
    }

    /// Rotational energy of level J in cm⁻¹: B J(J+1) − D J²(J+1)².
    pub fn energy_cm(&self, j: u32) -> f64 {
        let x = (j as f64) * (j as f64 + 1.0);
        self.b_cm * x - self.d_cm * x * x
    }

    /// Largest J the solver may use: below the distortion turnover (where the energy ladder stops
    /// rising) and never above `MAX_BASIS_J`.
    pub fn max_physical_j(&self) -> u32 {
        if self.d_cm <= 0.0 {
            return MAX_BASIS_J;
        }
        // dE/dx = B − 2 D x = 0 at x = B / 2D with x = J(J+1); keep well below the turnover.
        let x = self.b_cm / (2.0 * self.d_cm);
        let j = ((-1.0 + (1.0 + 4.0 * x).sqrt()) / 2.0 * 0.7).floor();
        (j as u32).min(MAX_BASIS_J)
    }

    /// Check every constant; errors name the field (prefixed by `path`) and the expected unit.
    fn validate(&self, path: &str) -> Result<()> {
        require_positive(&format!("{path}.b_cm"), self.b_cm, "cm⁻¹")?;
        if !(1e-4..=100.0).contains(&self.b_cm) {
            return Err(Error::input(format!("{path}.b_cm"), format!("expected a rotational constant between 1e-4 and 100 cm⁻¹, got {}", self.b_cm)));
        }
        require_non_negative(&format!("{path}.d_cm"), self.d_cm, "cm⁻¹")?;
        if self.d_cm > 1e-2 * self.b_cm {
            return Err(Error::input(format!("{path}.d_cm"), format!("expected D much smaller than B (got D = {} cm⁻¹, B = {} cm⁻¹)", self.d_cm, self.b_cm)));
        }
        require_non_negative(&format!("{path}.alpha_parallel_a3"), self.alpha_parallel_a3, "Å³")?;
        require_non_negative(&format!("{path}.alpha_perpendicular_a3"), self.alpha_perpendicular_a3, "Å³")?;
        for (name, a) in [("alpha_parallel_a3", self.alpha_parallel_a3), ("alpha_perpendicular_a3", self.alpha_perpendicular_a3)] {
            if a > 1000.0 {
                return Err(Error::input(format!("{path}.{name}"), format!("expected a molecular polarizability volume below 1000 Å³, got {a}")));
            }
        }
        let [e, o] = self.spin_weights;
        for (i, w) in [e, o].iter().enumerate() {
            if !w.is_finite() || *w < 0.0 || *w > 1e6 {
                return Err(Error::input(format!("{path}.spin_weights[{i}]"), format!("expected a relative weight from 0 to 1e6, got {w}")));
            }
        }
        if e + o <= 0.0 {
            return Err(Error::input(format!("{path}.spin_weights"), "expected [even_J, odd_J] not both zero"));
        }
        Ok(())
    }
}

/// The kind of rotor, which decides what the field-free Hamiltonian conserves: J and M always; K
/// (the projection on the figure axis) for linear molecules (K = 0) and symmetric tops; only the D2
/// symmetry of the inertia ellipsoid for asymmetric tops.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum RotorKind {
    /// A linear molecule.
    Linear,
    /// A prolate or oblate symmetric top.
    SymmetricTop,
    /// An asymmetric top.
    AsymmetricTop,
}

/// Largest rotational quantum number any basis may reach (beyond it the run is refused, not truncated).
pub const MAX_BASIS_J: u32 = 600;

impl Molecule {
    /// A non-polar linear molecule from its rotational constants (cm⁻¹), polarizabilities (Å³) and spin weights.
    pub fn linear(name: &str, b_cm: f64, d_cm: f64, alpha_parallel_a3: f64, alpha_perpendicular_a3: f64, spin_weights: [f64; 2]) -> Molecule {
        Molecule {
            name: name.to_string(),
            rotor: Rotor::Linear(LinearRotor { b_cm, d_cm, alpha_parallel_a3, alpha_perpendicular_a3, spin_weights }),
            dipole_debye: 0.0,
            beta_parallel_au: None,
            beta_perpendicular_au: None,
            beta_by_axis_au: None,
            ionization_energy_ev: None,
        }
    }

    /// A symmetric or asymmetric top: its constants, dipole (debye, along `top.dipole_axis`) and
    /// ionization energy (eV).
    pub fn from_top(name: &str, top: top::Top, dipole_debye: f64, ionization_energy_ev: Option<f64>) -> Molecule {
        Molecule {
            name: name.to_string(),
            rotor: Rotor::Top(top),
            dipole_debye,
            beta_parallel_au: None,
            beta_perpendicular_au: None,
            beta_by_axis_au: None,
            ionization_energy_ev,
        }
    }

    /// A top's hyperpolarizability components β_dgg by body axis g = a, b, c (d the dipole axis): an
    /// asymmetric top's own, or a symmetric top's β∥ on its figure axis and β⊥ on the two others.
    pub fn top_beta_au(&self) -> Option<[f64; 3]> {
        let t = self.as_top()?;
        if self.kind() == RotorKind::SymmetricTop {
            let (bp, bt) = (self.beta_parallel_au?, self.beta_perpendicular_au?);
            let mut b = [bt; 3];
            b[t.dipole_axis.index()] = bp;
            return Some(b);
        }
        self.beta_by_axis_au
    }

    /// The constants of a linear molecule (None for tops).
    pub fn as_linear(&self) -> Option<&LinearRotor> {
        match &self.rotor {
            Rotor::Linear(l) => Some(l),
            Rotor::Top(_) => None,
        }
    }

    /// The constants of a linear molecule, to change (None for tops).
    pub fn as_linear_mut(&mut self) -> Option<&mut LinearRotor> {
        match &mut self.rotor {
            Rotor::Linear(l) => Some(l),
            Rotor::Top(_) => None,
        }
    }

    /// The constants of a top (None for linear molecules).
    pub fn as_top(&self) -> Option<&top::Top> {
        match &self.rotor {
            Rotor::Top(t) => Some(t),
            Rotor::Linear(_) => None,
        }
    }

    /// True for symmetric and asymmetric tops.
    pub fn is_top(&self) -> bool {
        self.as_top().is_some()
    }

    /// Linear molecule, symmetric top (prolate or oblate) or asymmetric top.
    pub fn kind(&self) -> RotorKind {
        match &self.rotor {
            Rotor::Linear(_) => RotorKind::Linear,
            Rotor::Top(t) if t.kind() == top::TopKind::Asymmetric => RotorKind::AsymmetricTop,
            Rotor::Top(_) => RotorKind::SymmetricTop,
        }
    }

    /// True if the molecule has a permanent dipole moment.
    pub fn is_polar(&self) -> bool {
        self.dipole_debye != 0.0
    }

    /// The rotational constant that sets the time scale of revivals, cm⁻¹: B of a linear molecule or of a
    /// symmetric top (perpendicular to its figure axis), (B + C)/2 of an asymmetric top.
    pub fn revival_b_cm(&self) -> f64 {
        match &self.rotor {
            Rotor::Linear(l) => l.b_cm,
            Rotor::Top(t) if t.kind() == top::TopKind::Asymmetric => 0.5 * (t.b_cm + t.c_cm),
            Rotor::Top(t) => t.b_cm,
        }
    }

    /// Largest polarizability anisotropy, Å³: α∥ − α⊥ of a linear molecule, the largest minus the
    /// smallest principal polarizability of a top.
    pub fn delta_alpha_a3(&self) -> f64 {
        match &self.rotor {
            Rotor::Linear(l) => l.delta_alpha_a3(),
            Rotor::Top(t) => t.delta_alpha_a3(),
        }
    }

    /// Largest J the solver may use (see [`LinearRotor::max_physical_j`]; `MAX_BASIS_J` for tops, whose
    /// own paths cap their bases).
    pub fn max_physical_j(&self) -> u32 {
        match &self.rotor {
            Rotor::Linear(l) => l.max_physical_j(),
            Rotor::Top(_) => MAX_BASIS_J,
        }
    }

    /// Check every constant; errors name the field (prefixed by `path`) and the expected unit.
    pub fn validate(&self, path: &str) -> Result<()> {
        match &self.rotor {
            Rotor::Linear(l) => l.validate(path)?,
            Rotor::Top(t) => t.validate(path)?,
        }
        crate::error::require_finite(&format!("{path}.dipole_debye"), self.dipole_debye, "debye")?;
        if self.dipole_debye.abs() > 50.0 {
            return Err(Error::input(format!("{path}.dipole_debye"), format!("expected a molecular dipole below 50 D, got {}", self.dipole_debye)));
        }
        if let Some(ip) = self.ionization_energy_ev
            && (!ip.is_finite() || !(3.0..=30.0).contains(&ip))
        {
            return Err(Error::input(format!("{path}.ionization_energy_ev"), format!("expected an ionization energy from 3 to 30 eV, got {ip}")));
        }
        for (name, b) in [("beta_parallel_au", self.beta_parallel_au), ("beta_perpendicular_au", self.beta_perpendicular_au)] {
            if let Some(b) = b {
                crate::error::require_finite(&format!("{path}.{name}"), b, "atomic units")?;
                // Small molecules have |β| of tens of a.u., large push–pull chromophores ~1e4 (common practice).
                if b.abs() > 1e5 {
                    return Err(Error::input(format!("{path}.{name}"), format!("expected |β| ≤ 1e5 atomic units (Taylor convention), got {b:e}")));
                }
                // β∥ and β⊥ are taken along and across a symmetry axis: a linear molecule's or a symmetric
                // top's figure axis. An asymmetric top needs the full tensor, which kicktrain does not take.
                if self.kind() == RotorKind::AsymmetricTop {
                    return Err(Error::input(
                        format!("{path}.{name}"),
                        format!(
                            "{} is an asymmetric top; β∥ and β⊥ are taken only for linear molecules and symmetric tops (along the figure axis); expected beta_au (β_dgg along a, b, c)",
                            self.name
                        ),
                    ));
                }
            }
        }
        if let Some(b) = self.beta_by_axis_au {
            let at = format!("{path}.beta_au");
            for (v, axis) in b.iter().zip(["a", "b", "c"]) {
                crate::error::require_finite(&format!("{at}.{axis}"), *v, "atomic units")?;
                if v.abs() > 1e5 {
                    return Err(Error::input(format!("{at}.{axis}"), format!("expected |β| ≤ 1e5 atomic units (Taylor convention), got {v:e}")));
                }
            }
            if self.kind() != RotorKind::AsymmetricTop {
                return Err(Error::input(
                    at,
                    format!("beta_au is for asymmetric tops; give {} beta_parallel_au and beta_perpendicular_au (along and across its axis)", self.name),
                ));
            }
            if self.dipole_debye == 0.0 {
                return Err(Error::input(
                    at,
                    format!("the components β_dgg are taken along the dipole axis d, but {} has no dipole; expected dipole_debye and dipole_axis", self.name),
                ));
            }
        }
        Ok(())
    }

    /// Look up a built-in molecule by name (case-insensitive, aliases allowed); the error suggests near names.
    pub fn from_library(name: &str, field: &str) -> Result<Molecule> {
        let key = name.trim().to_ascii_lowercase();
        for entry in library() {
            if entry.name.to_ascii_lowercase() == key || entry.aliases.iter().any(|a| a.to_ascii_lowercase() == key) {
                return Ok(entry.molecule());
            }
        }
        let tops = top_library();
        for entry in &tops {
            if entry.name.to_ascii_lowercase() == key || entry.aliases.iter().any(|a| a.to_ascii_lowercase() == key) {
                return Ok(entry.molecule());
            }
        }
        let mut near: Vec<(usize, &str)> =
            library().iter().map(|e| e.name).chain(tops.iter().map(|e| e.name)).map(|n| (edit_distance(&key, &n.to_ascii_lowercase()), n)).collect();
        near.sort();
        let suggestions: Vec<&str> = near.iter().filter(|(d, _)| *d <= 2).map(|(_, n)| *n).take(3).collect();
        let hint =
            if suggestions.is_empty() { "run `kicktrain molecules` for the list".to_string() } else { format!("did you mean {}?", suggestions.join(", ")) };
        Err(Error::input(field, format!("unknown molecule '{name}'; {hint}")))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn library_entries_are_valid_and_sourced() {
        assert!(library().len() >= 8);
        for e in library() {
            e.molecule().validate(e.name).unwrap();
            for s in [&e.b_cm, &e.d_cm, &e.alpha_parallel_a3, &e.alpha_perpendicular_a3] {
                assert!(!s.source.trim().is_empty(), "{} lacks a source", e.name);
            }
            assert!(!e.spin_weights_source.trim().is_empty());
            for b in [&e.beta_parallel_au, &e.beta_perpendicular_au].into_iter().flatten() {
                assert!(b.source.contains("β_z") && b.source.contains("frame z along the dipole"), "{}: β source names its component and frame", e.name);
            }
            // β needs a dipole (it sets the frame) and comes in pairs.
            assert_eq!(e.beta_parallel_au.is_some(), e.beta_perpendicular_au.is_some(), "{}", e.name);
            assert!(e.beta_parallel_au.is_none() || e.dipole_debye.is_some(), "{}", e.name);
        }
    }

    #[test]
    fn library_tops_with_hyperpolarizabilities_are_polar_asymmetric_and_valid() {
        // β_dgg is taken along the dipole axis of an asymmetric top (the input rules); benzonitrile's and
        // iodobenzene's come from tools/top_beta_finite_field.md, whose vector parts (3/5)Σβ_dgg are −7.14 and
        // 75.40 a.u. (that note's table).
        for (name, vector) in [("C6H5CN", -7.14), ("C6H5I", 75.40)] {
            let m = Molecule::from_library(name, "molecule").unwrap();
            let b = m.top_beta_au().expect("β_dgg");
            assert!(m.kind() == RotorKind::AsymmetricTop && m.dipole_debye > 0.0, "{name}");
            m.validate("molecule").unwrap();
            assert!((0.6 * b.iter().sum::<f64>() - vector).abs() < 0.01, "{name}: {b:?}");
        }
    }

    #[test]
    fn polar_molecules_of_the_library_carry_hyperpolarizabilities() {
        // Two-colour orientation needs β∥, β⊥ for the polar molecules (CO, OCS, N2O, HCl at least).
        for name in ["CO", "OCS", "N2O", "HCl"] {
            let m = Molecule::from_library(name, "molecule").unwrap();
            assert!(m.beta_parallel_au.is_some() && m.beta_perpendicular_au.is_some(), "{name}");
        }
        // HCl: the mean first hyperpolarizability β̄ = (3/5)(β_zzz + 2β_zxx) of the stored components
        // against the published value β̄ = −6.8 ± 0.3 a.u. (G. Maroulis, "A systematic study of basis set,
        // electron correlation, and geometry effects on the electric multipole moments, polarizability, and
        // hyperpolarizability of HCl", J. Chem. Phys. 108, 5432 (1998), abstract; β̄ = (3/5)(β_zzz + 2β_zxx)
        // for a linear molecule is the usual mean, common practice). Ours is −7.74; the 14 % gap is most likely
        // our smaller basis set. A swapped sign, a swapped pair or a factor-2 convention slip would all fail.
        let hcl = Molecule::from_library("HCl", "molecule").unwrap();
        let mean = 0.6 * (hcl.beta_parallel_au.unwrap() + 2.0 * hcl.beta_perpendicular_au.unwrap());
        assert!((mean - (-6.8)).abs() < 1.2, "β̄ = {mean}");
    }

    #[test]
    fn library_names_and_aliases_are_unique() {
        let mut seen = std::collections::HashSet::new();
        let tops = top_library();
        let names = library()
            .iter()
            .flat_map(|e| std::iter::once(&e.name).chain(e.aliases.iter()))
            .chain(tops.iter().flat_map(|e| std::iter::once(&e.name).chain(e.aliases.iter())));
        {
            for n in names {
                assert!(seen.insert(n.to_ascii_lowercase()), "name or alias {n} appears twice");
            }
        }
    }

    #[test]
    fn unknown_name_suggests() {
        let err = Molecule::from_library("N3", "molecule").unwrap_err().to_string();
        assert!(err.contains("N2"), "{err}");
        assert!(err.starts_with("molecule:"));
    }

    #[test]
    fn edit_distance_basics() {
        // Levenshtein distance: kitten → sitting needs 3 edits (k→s, e→i, insert g), the classic textbook example
        // (common practice); from the empty string it is the other string's length.
        assert_eq!(edit_distance("kitten", "sitting"), 3);
        assert_eq!(edit_distance("", "abc"), 3);
    }
}
