//! Symmetric-top and asymmetric-top constants: rotational constants A ≥ B ≥ C, the polarizability
//! tensor in the principal-axis frame, the dipole axis and nuclear-spin weights by rotational symmetry.

use crate::error::{Error, Result, require_finite};
use serde::{Deserialize, Serialize};

/// A principal axis of inertia: a has the smallest moment (largest constant A), c the largest.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum BodyAxis {
    /// The a axis (constant A).
    A,
    /// The b axis (constant B).
    B,
    /// The c axis (constant C).
    C,
}

impl BodyAxis {
    /// Index 0, 1, 2 for a, b, c.
    pub fn index(self) -> usize {
        match self {
            BodyAxis::A => 0,
            BodyAxis::B => 1,
            BodyAxis::C => 2,
        }
    }

    /// The axis with index 0, 1, 2.
    pub fn from_index(i: usize) -> BodyAxis {
        [BodyAxis::A, BodyAxis::B, BodyAxis::C][i % 3]
    }

    /// Lower-case letter of the axis.
    pub fn letter(self) -> &'static str {
        ["a", "b", "c"][self.index()]
    }

    /// Parse "a", "b" or "c" (any case); the error names `field`.
    pub fn parse(s: &str, field: &str) -> Result<BodyAxis> {
        match s.trim().to_ascii_lowercase().as_str() {
            "a" => Ok(BodyAxis::A),
            "b" => Ok(BodyAxis::B),
            "c" => Ok(BodyAxis::C),
            _ => Err(Error::input(field, format!("expected a body axis \"a\", \"b\" or \"c\", got \"{s}\""))),
        }
    }
}

/// What kind of rotor three constants make.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum TopKind {
    /// A > B = C (cigar-like; figure axis a).
    Prolate,
    /// A = B > C (disc-like; figure axis c).
    Oblate,
    /// A > B > C.
    Asymmetric,
}

/// Nuclear-spin statistical weights of the rotational levels.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum TopSpinWeights {
    /// Every level has the same weight.
    Equal,
    /// Symmetric tops: weight of a level with projection K is `weights[|K| mod weights.len()]`
    /// (e.g. [2, 1, 1] for K = 3n vs K ≠ 3n of a C3v top with three protons).
    ByK(Vec<f64>),
    /// Asymmetric tops: weights of the four rotational symmetry classes by the parities of (Ka, Kc):
    /// [even-even, even-odd, odd-even, odd-odd].
    ByKaKc([f64; 4]),
}

/// Rotational and electric constants of a symmetric or asymmetric top.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Top {
    /// Rotational constant A (largest), cm⁻¹.
    pub a_cm: f64,
    /// Rotational constant B, cm⁻¹.
    pub b_cm: f64,
    /// Rotational constant C (smallest), cm⁻¹.
    pub c_cm: f64,
    /// Centrifugal distortion D_J, cm⁻¹ (symmetric tops only).
    #[serde(default)]
    pub d_j_cm: f64,
    /// Centrifugal distortion D_JK, cm⁻¹ (symmetric tops only).
    #[serde(default)]
    pub d_jk_cm: f64,
    /// Centrifugal distortion D_K, cm⁻¹ (symmetric tops only).
    #[serde(default)]
    pub d_k_cm: f64,
    /// Principal polarizability volumes along a, b, c, Å³.
    pub polarizability_a3: [f64; 3],
    /// Body axis that carries the permanent dipole (the figure axis for symmetric tops).
    pub dipole_axis: BodyAxis,
    /// Body axis whose alignment `cos2` reports and goals use (default: the most polarizable).
    pub alignment_axis: BodyAxis,
    /// Nuclear-spin weights by rotational symmetry.
    pub spin_weights: TopSpinWeights,
}

/// Two constants closer than this (relative) make a symmetric top.
const SYMMETRIC_TOLERANCE: f64 = 1e-9;

impl Top {
    /// A rigid top with constants A, B, C (cm⁻¹) and principal polarizabilities along a, b, c (Å³); no
    /// dipole (axis a, or c for an oblate top), alignment axis the most polarizable, equal spin weights.
    pub fn rigid(a_cm: f64, b_cm: f64, c_cm: f64, polarizability_a3: [f64; 3]) -> Top {
        let mut t = Top {
            a_cm,
            b_cm,
            c_cm,
            d_j_cm: 0.0,
            d_jk_cm: 0.0,
            d_k_cm: 0.0,
            polarizability_a3,
            dipole_axis: BodyAxis::A,
            alignment_axis: Top::most_polarizable(&polarizability_a3),
            spin_weights: TopSpinWeights::Equal,
        };
        if t.kind() == TopKind::Oblate {
            t.dipole_axis = BodyAxis::C;
        }
        t
    }

    /// The kind of rotor: prolate or oblate symmetric top, or asymmetric top.
    pub fn kind(&self) -> TopKind {
        let close = |x: f64, y: f64| (x - y).abs() <= SYMMETRIC_TOLERANCE * x.abs().max(y.abs());
        if close(self.b_cm, self.c_cm) {
            TopKind::Prolate
        } else if close(self.a_cm, self.b_cm) {
            TopKind::Oblate
        } else {
            TopKind::Asymmetric
        }
    }

    /// Ray's asymmetry parameter κ = (2B − A − C)/(A − C): −1 prolate, +1 oblate.
    pub fn kappa(&self) -> f64 {
        (2.0 * self.b_cm - self.a_cm - self.c_cm) / (self.a_cm - self.c_cm)
    }

    /// Rotational constant of a body axis, cm⁻¹.
    pub fn constant(&self, axis: BodyAxis) -> f64 {
        [self.a_cm, self.b_cm, self.c_cm][axis.index()]
    }

    /// Polarizability volume along a body axis, Å³.
    pub fn alpha(&self, axis: BodyAxis) -> f64 {
        self.polarizability_a3[axis.index()]
    }

    /// The most polarizable body axis (ties go to the earlier of a, b, c).
    pub fn most_polarizable(polarizability_a3: &[f64; 3]) -> BodyAxis {
        let mut best = 0;
        for i in 1..3 {
            if polarizability_a3[i] > polarizability_a3[best] {
                best = i;
            }
        }
        BodyAxis::from_index(best)
    }

    /// The more polarizable of the two axes other than the alignment axis (ties go to the earlier of a, b, c):
    /// the axis a three-axis goal holds along X.
    pub fn second_axis(&self) -> BodyAxis {
        let others: Vec<BodyAxis> = [BodyAxis::A, BodyAxis::B, BodyAxis::C].into_iter().filter(|a| *a != self.alignment_axis).collect();
        if self.alpha(others[1]) > self.alpha(others[0]) { others[1] } else { others[0] }
    }

    /// The most polarizable axis other than the dipole axis (ties go to the earlier of a, b, c): the axis a
    /// three-axis orientation goal holds along X while the dipole points along Z.
    pub fn oriented_second_axis(&self) -> BodyAxis {
        let others: Vec<BodyAxis> = [BodyAxis::A, BodyAxis::B, BodyAxis::C].into_iter().filter(|a| *a != self.dipole_axis).collect();
        if self.alpha(others[1]) > self.alpha(others[0]) { others[1] } else { others[0] }
    }

    /// Largest minus smallest principal polarizability, Å³: the anisotropy that sets the kick strength.
    pub fn delta_alpha_a3(&self) -> f64 {
        let p = self.polarizability_a3;
        p.iter().cloned().fold(f64::MIN, f64::max) - p.iter().cloned().fold(f64::MAX, f64::min)
    }

    /// The body axes taken as the quantization frame (z, x, y) of the symmetric-top basis: the figure axis
    /// for symmetric tops; for asymmetric tops the dipole axis when `polar`, else the alignment axis
    /// (observables along z need no coupling between K values). x, y follow cyclically (right-handed).
    pub fn frame(&self, polar: bool) -> [BodyAxis; 3] {
        let z = match self.kind() {
            TopKind::Prolate => BodyAxis::A,
            TopKind::Oblate => BodyAxis::C,
            TopKind::Asymmetric => {
                if polar {
                    self.dipole_axis
                } else {
                    self.alignment_axis
                }
            }
        };
        let i = z.index();
        [z, BodyAxis::from_index(i + 1), BodyAxis::from_index(i + 2)]
    }

    /// Check every constant; errors name the field (prefixed by `path`) and the expected unit or range.
    pub fn validate(&self, path: &str) -> Result<()> {
        for (name, v) in [("a_cm", self.a_cm), ("b_cm", self.b_cm), ("c_cm", self.c_cm)] {
            require_finite(&format!("{path}.{name}"), v, "cm⁻¹")?;
            if !(1e-4..=100.0).contains(&v) {
                return Err(Error::input(format!("{path}.{name}"), format!("expected a rotational constant between 1e-4 and 100 cm⁻¹, got {v}")));
            }
        }
        if self.a_cm < self.b_cm {
            return Err(Error::input(
                format!("{path}.a_cm"),
                format!(
                    "rotational constants must satisfy A ≥ B ≥ C (the a axis has the smallest moment of inertia); got A = {} < B = {} cm⁻¹",
                    self.a_cm, self.b_cm
                ),
            ));
        }
        if self.b_cm < self.c_cm {
            return Err(Error::input(
                format!("{path}.b_cm"),
                format!("rotational constants must satisfy A ≥ B ≥ C; got B = {} < C = {} cm⁻¹", self.b_cm, self.c_cm),
            ));
        }
        let kind = self.kind();
        if (self.a_cm - self.c_cm).abs() <= SYMMETRIC_TOLERANCE * self.a_cm {
            return Err(Error::input(format!("{path}.a_cm"), "A = B = C is a spherical top, which no linearly polarized field aligns; expected A > C"));
        }
        for (name, v) in [("d_j_cm", self.d_j_cm), ("d_jk_cm", self.d_jk_cm), ("d_k_cm", self.d_k_cm)] {
            require_finite(&format!("{path}.{name}"), v, "cm⁻¹")?;
            if v != 0.0 && kind == TopKind::Asymmetric {
                return Err(Error::input(
                    format!("{path}.{name}"),
                    "distortion constants are supported for symmetric tops only (an asymmetric top is treated as rigid); remove it or set 0",
                ));
            }
            if v.abs() > 1e-2 * self.b_cm {
                return Err(Error::input(
                    format!("{path}.{name}"),
                    format!("expected a distortion constant much smaller than B = {} cm⁻¹, got {v}", self.b_cm),
                ));
            }
        }
        for (i, v) in self.polarizability_a3.iter().enumerate() {
            let f = format!("{path}.polarizability_a3.{}", BodyAxis::from_index(i).letter());
            require_finite(&f, *v, "Å³")?;
            if *v <= 0.0 || *v > 1000.0 {
                return Err(Error::input(
                    f,
                    format!("a polarizability tensor must be positive: expected each principal value between 0 and 1000 Å³ (exclusive of 0), got {v}"),
                ));
            }
        }
        if self.delta_alpha_a3() <= 1e-9 * self.polarizability_a3[0] {
            return Err(Error::input(
                format!("{path}.polarizability_a3"),
                "an isotropic polarizability cannot align the molecule; expected unequal principal values",
            ));
        }
        let p = self.polarizability_a3;
        let near = |x: f64, y: f64| (x - y).abs() <= 1e-9 * x.abs().max(y.abs());
        match kind {
            TopKind::Prolate if !near(p[1], p[2]) => {
                return Err(Error::input(
                    format!("{path}.polarizability_a3"),
                    format!("a prolate symmetric top (B = C) has α_b = α_c by symmetry; got α_b = {} and α_c = {} Å³", p[1], p[2]),
                ));
            }
            TopKind::Oblate if !near(p[0], p[1]) => {
                return Err(Error::input(
                    format!("{path}.polarizability_a3"),
                    format!("an oblate symmetric top (A = B) has α_a = α_b by symmetry; got α_a = {} and α_b = {} Å³", p[0], p[1]),
                ));
            }
            _ => {}
        }
        let figure = match kind {
            TopKind::Prolate => Some(BodyAxis::A),
            TopKind::Oblate => Some(BodyAxis::C),
            TopKind::Asymmetric => None,
        };
        if let Some(f) = figure
            && self.dipole_axis != f
        {
            return Err(Error::input(
                format!("{path}.dipole_axis"),
                format!("the dipole of a symmetric top lies along its figure axis; expected \"{}\"", f.letter()),
            ));
        }
        match &self.spin_weights {
            TopSpinWeights::Equal => {}
            TopSpinWeights::ByK(w) => {
                if kind == TopKind::Asymmetric {
                    return Err(Error::input(
                        format!("{path}.spin_weights_by_k"),
                        "weights by K need a symmetric top (K is not a good quantum number of an asymmetric top); give spin_weights_by_ka_kc",
                    ));
                }
                if w.is_empty() || w.len() > 12 {
                    return Err(Error::input(format!("{path}.spin_weights_by_k"), format!("expected 1 to 12 weights (K mod their count), got {}", w.len())));
                }
                check_weights(&format!("{path}.spin_weights_by_k"), w)?;
            }
            TopSpinWeights::ByKaKc(w) => {
                if kind != TopKind::Asymmetric {
                    return Err(Error::input(
                        format!("{path}.spin_weights_by_ka_kc"),
                        "weights by (Ka, Kc) parity classes are for asymmetric tops; a symmetric top takes spin_weights_by_k",
                    ));
                }
                check_weights(&format!("{path}.spin_weights_by_ka_kc"), w)?;
            }
        }
        Ok(())
    }

    /// Nuclear-spin weight of a level: by |K| for symmetric tops, by the parities of (Ka, Kc) for asymmetric tops.
    pub fn spin_weight(&self, k_abs: u32, ka_kc_parity: (u32, u32)) -> f64 {
        match &self.spin_weights {
            TopSpinWeights::Equal => 1.0,
            TopSpinWeights::ByK(w) => w[k_abs as usize % w.len()],
            TopSpinWeights::ByKaKc(w) => w[(2 * ka_kc_parity.0 + ka_kc_parity.1) as usize],
        }
    }
}

fn check_weights(field: &str, w: &[f64]) -> Result<()> {
    for (i, x) in w.iter().enumerate() {
        if !x.is_finite() || *x < 0.0 || *x > 1e6 {
            return Err(Error::input(format!("{field}[{i}]"), format!("expected a relative weight from 0 to 1e6, got {x}")));
        }
    }
    if w.iter().sum::<f64>() <= 0.0 {
        return Err(Error::input(field, "expected weights that are not all zero"));
    }
    Ok(())
}
