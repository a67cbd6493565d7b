//! Dressed (pendular) states of a symmetric or asymmetric top in a laser field along Z and a static field
//! at an angle α to Z in the XZ plane, and their thermal adiabatic averages: the limit a mixed-field
//! orientation experiment with a nanosecond pulse is compared with.
//!
//! Exact symmetry classes of H0 − U0 Σ_i w_i Φ_Zi² − μE (cosα Φ_Zz + sinα Φ_Xz), z the dipole axis:
//! - the parity of K (the two-fold rotation about the dipole axis) or, for a symmetric top, ±K;
//! - σ', the reflection through the lab XZ plane combined with the body reflection y → −y (both fields
//!   lie in that plane, the molecule's tensors are unchanged by the body reflection);
//! - at α = 90° (static field along X) also the rotation C₂(X) by π about X: the laser term is even in
//!   Φ_Z and the static one is along X. Each σ' class then splits in two.
//!
//! These are the classes of the tilted-field propagation ([`super::tilted_top`]), with C₂(X) added at 90°.
//! Within one class no two levels cross (von Neumann–Wigner), so the n-th lowest state stays the n-th
//! lowest along any path on which the class stays the same. The correlation follows the order of an
//! experiment: the static field first, then the laser.
//! 1. Static field alone: it is symmetric about its own axis, so M_f about that axis is conserved; the
//!    field-free level (J, τ, M_f) goes to the dressed state of the same rank in its block of M_f, K parity
//!    (K) and, at M_f = 0, reflection — the start states of the tilted-field runs
//!    ([`super::oriented_top`], rotated by α about Y).
//! 2. Those static-dressed states are eigenstates of the static part in the tilted frame and fall into
//!    the classes above; ranked by energy within their class (or C₂(X) half of it), the n-th lowest goes
//!    to the n-th lowest dressed state of the class as the laser comes on.
//!
//! Ranking the field-free levels within a σ' class directly would pass over stage 1, where levels of
//! different M_f cross freely; at 90° ranking within σ' alone misses the C₂(X) classes.
//!
//! Each class is solved densely in its field-free eigenstates below an energy cut (the basis of the slow-
//! pulse steps, [`super::tilted_top_frame`]); the cut grows by a quarter until no reported number changes
//! by more than [`CONVERGED`] (energies in cm⁻¹ times the smallest rotational constant).
//!
//! This is the strict adiabatic limit: where levels of one class meet in a very narrow avoided crossing a
//! real pulse passes diabatically; the time-dependent path gives what an experiment sees.

use super::oriented_top::{OrientedTopSolver, TopDressedState, TopPendular};
use super::tilted_top::{COS_X_INDEX, COS_Z_INDEX, Class, Column, MAX_TILTED_TOP_J, Prim, TiltedTopCache, class_columns};
use super::tilted_top_frame::{FrameOps, j_above, levels_of_j, states_below};
use crate::basis::top::TopFrame;
use crate::error::{Error, Result};
use crate::molecule::Molecule;
use crate::molecule::top::Top;
use crate::numeric::sorted_eigen;
use crate::scenario::SolverSettings;
use crate::units::{cm_to_rad_per_ps, coupling_rad_per_ps_per_a3_wcm2, dipole_rate_rad_per_ps};
use nalgebra::DMatrix;
use rayon::prelude::*;

/// Largest change of a reported number (⟨cos⟩, ⟨cos²⟩; energies in units of the smallest rotational
/// constant) between two energy cuts that counts as converged. Measured on SO2 at 1 K (5e11 W/cm², 50
/// kV/cm at 45°): successive cuts 81, 102, 127, 159, 198 cm⁻¹ change the numbers by 3e-6, 4e-8, 5e-9,
/// 6e-12, so the change is about ten times the error left.
const CONVERGED: f64 = 1e-7;

/// Largest class solved (dense eigendecompositions: pyridine at 1 K, with more than 3,000 states a class at
/// its last cuts, took 214 s and 4.6 GB on the 2-core machine).
const MAX_CLASS_STATES: usize = 5000;

/// Weight a start state may leave outside the kept states of a cut.
const START_LOSS: f64 = 1e-12;

/// Dressed states and thermal averages of a top (`molecule`, polar) at a laser intensity (W/cm²,
/// cycle-averaged, polarized along Z) and a static field (kV/cm, non-zero) at `angle_rad` from Z towards X.
pub fn tilted_top_pendular(molecule: &Molecule, intensity_wcm2: f64, static_kv_cm: f64, angle_rad: f64, temperature_k: f64) -> Result<TopPendular> {
    let settings = SolverSettings::default();
    let solver = OrientedTopSolver::new(molecule, temperature_k, settings)?;
    let top = solver.top();
    let frame = solver.frame();
    let axis = solver.axis();
    let per_cm = cm_to_rad_per_ps(1.0);
    let u0 = coupling_rad_per_ps_per_a3_wcm2() * axis.delta_alpha_a3 * intensity_wcm2;
    let s = dipole_rate_rad_per_ps(axis.dipole_debye, static_kv_cm);
    // The start levels, three laser depths above them and the static field both ways (as the slow-pulse
    // runs): the first cut of a class whose highest start state reaches `j`.
    let b_cm = top.c_cm.max(1e-6);
    let first_cut = |j: i64| lowest_level_cm(frame, j) + 3.0 * u0 / per_cm + 2.0 * s.abs() / per_cm + 20.0 * b_cm;
    // The thermal levels alone already set a lower bound: refuse before dressing them.
    check_size(frame, first_cut(solver.thermal_j_max()))?;
    let starts = solver.dressed_starts(s)?;
    let mut classes: Vec<(Class, Vec<Column>)> = class_columns(&starts, frame.symmetric, angle_rad).into_iter().collect();
    classes.sort_by_key(|(c, _)| c.order());
    let along_x = angle_rad.cos().abs() < 1e-12;
    let setting = Setting { top, frame, u0, s, angle_rad, along_x, cache: TiltedTopCache::default() };
    let cap_cm = lowest_level_cm(frame, MAX_TILTED_TOP_J);
    let per_class: Vec<Vec<TopDressedState>> = classes
        .par_iter()
        .map(|(class, cols)| {
            let j_start = cols.iter().map(|c| c.j_top).max().unwrap_or(0);
            let mut cut = first_cut(j_start);
            let mut last: Option<Vec<TopDressedState>> = None;
            loop {
                if cut > cap_cm {
                    return Err(Error::Numerical(format!(
                        "dressed states of a top in a tilted static field would need levels above {cap_cm:.0} cm⁻¹ (J > {MAX_TILTED_TOP_J}); lower the fields or the temperature"
                    )));
                }
                let now = setting.solve_class(*class, cols, cut)?;
                if let (Some(prev), Some(now)) = (&last, &now)
                    && same(prev, now, b_cm)
                {
                    return Ok(now.clone());
                }
                if now.is_some() {
                    last = now;
                }
                cut *= 1.25;
            }
        })
        .collect::<Result<_>>()?;
    let mut states: Vec<TopDressedState> = per_class.into_iter().flatten().collect();
    states
        .sort_by(|a, b| (a.m, a.energy_cm, -a.reflection.unwrap_or(0)).partial_cmp(&(b.m, b.energy_cm, -b.reflection.unwrap_or(0))).expect("finite energies"));
    let sum = |f: &dyn Fn(&TopDressedState) -> f64| states.iter().map(|d| d.population * f(d)).sum::<f64>();
    let kept: f64 = states.iter().map(|d| d.population).sum();
    Ok(TopPendular {
        thermal_cos2: sum(&|d| d.cos2),
        thermal_cos: sum(&|d| d.cos),
        thermal_cos_x: Some(sum(&|d| d.cos_x)),
        discarded_population: (1.0 - kept).max(0.0),
        states,
    })
}

/// True when two solutions list the same states with every number within [`CONVERGED`].
fn same(a: &[TopDressedState], b: &[TopDressedState], b_cm: f64) -> bool {
    a.len() == b.len()
        && a.iter().zip(b).all(|(x, y)| {
            x.label == y.label
                && x.m == y.m
                && (x.energy_cm - y.energy_cm).abs() < CONVERGED * b_cm
                && [(x.cos2, y.cos2), (x.cos, y.cos), (x.cos_x, y.cos_x)].iter().all(|(p, q)| (p - q).abs() < CONVERGED)
        })
}

/// The lowest field-free level of J, cm⁻¹.
fn lowest_level_cm(frame: &TopFrame, j: i64) -> f64 {
    levels_of_j(frame, j).min()
}

/// Refuses a cut whose classes would be too large to solve densely (before building them). An
/// asymmetric top's four classes share the states about equally.
fn check_size(frame: &TopFrame, cut_cm: f64) -> Result<()> {
    let estimate = states_below(frame, cut_cm) / if frame.symmetric { 1 } else { 4 };
    if estimate > MAX_CLASS_STATES {
        return Err(Error::input(
            "temperature_k",
            format!(
                "the dressed states of this top in a tilted static field would need about {estimate} field-free states a class (levels below {cut_cm:.0} cm⁻¹), more than the {MAX_CLASS_STATES} a dense eigendecomposition handles; expected a lower temperature or a weaker laser"
            ),
        ));
    }
    Ok(())
}

/// What the classes of one computation share.
struct Setting<'a> {
    top: &'a Top,
    frame: &'a TopFrame,
    /// Laser and dipole coupling rates, rad/ps.
    u0: f64,
    s: f64,
    angle_rad: f64,
    along_x: bool,
    cache: TiltedTopCache,
}

impl Setting<'_> {
    /// The dressed states of the start columns of one class below `cut_cm`, None when a start state
    /// leaves more than [`START_LOSS`] outside the kept states.
    fn solve_class(&self, class: Class, cols: &[Column], cut_cm: f64) -> Result<Option<Vec<TopDressedState>>> {
        check_size(self.frame, cut_cm)?;
        let full = self.cache.get(self.top, self.frame, class, j_above(self.frame, cut_cm).max(1));
        let kept = full.omega.iter().filter(|&&w| w < cm_to_rad_per_ps(cut_cm)).count();
        crate::resources::check_memory(
            (kept as f64).powi(2) * 8.0 * 24.0,
            "temperature_k",
            &format!("the dressed states of a top below {cut_cm:.0} cm⁻¹ ({kept} states a class)"),
        )?;
        let ops = FrameOps::new(&full, cut_cm);
        let coefficients: Vec<Vec<(Prim, f64)>> = cols.iter().map(|c| c.coefficients.clone()).collect();
        let (start, lost) = ops.restrict(&full.eigen_columns(&coefficients));
        if lost > START_LOSS {
            return Ok(None);
        }
        let (sn, cs) = self.angle_rad.sin_cos();
        let p = &ops.parts;
        let h_static: DMatrix<f64> = &p[0] - &p[4] * (self.s * cs) - &p[5] * (self.s * sn);
        let h_full: DMatrix<f64> = &h_static - &p[1] * self.u0;
        let static_levels = static_levels(&ops, &ops.m_values(&full), self.s);
        // The halves of the class under C₂(X) at 90° (their states as columns), else the class whole.
        let halves: Vec<Option<DMatrix<f64>>> = if self.along_x {
            let (vals, vecs) = sorted_eigen(ops.project(&full, &full.rotation_x_pi()));
            let minus = vals.iter().filter(|&&v| v < 0.0).count();
            if vals.iter().any(|v| (v.abs() - 1.0).abs() > 1e-9) {
                return Err(Error::Numerical("the rotation about X is not a symmetry of the kept states".into()));
            }
            vec![Some(vecs.columns(0, minus).into_owned()), Some(vecs.columns(minus, vals.len() - minus).into_owned())]
        } else {
            vec![None]
        };
        let align = 6 + self.frame.position(self.top.alignment_axis);
        let per_cm = cm_to_rad_per_ps(1.0);
        let mut out = vec![];
        for q in &halves {
            // An operator within the half (Qᵀ·O·Q), or a state's part there (Qᵀ·ψ).
            let within = |o: &DMatrix<f64>| q.as_ref().map(|q| q.transpose() * o * q).unwrap_or_else(|| o.clone());
            let inside = q.as_ref().map(|q| q.transpose() * &start).unwrap_or_else(|| start.clone());
            let members: Vec<usize> = (0..cols.len()).filter(|&c| inside.column(c).norm_squared() > 0.5).collect();
            for (c, col) in cols.iter().enumerate() {
                let w = inside.column(c).norm_squared();
                if w > 1e-8 && w < 1.0 - 1e-8 {
                    return Err(Error::Numerical(format!("a static-dressed state of level {} is not of one C₂(X) class (weight {w})", col.label)));
                }
            }
            if members.is_empty() {
                continue;
            }
            // At 90° a half holds the static-dressed states of one parity of M_f (C₂(X) is the rotation by π
            // about the field's own axis, e^{−iπM_f} up to the class's phase); elsewhere every M_f.
            let parity = match q {
                Some(_) => {
                    let p = cols[members[0]].m.rem_euclid(2);
                    if members.iter().any(|&c| cols[c].m.rem_euclid(2) != p) {
                        return Err(Error::Numerical("a C₂(X) class holds static-dressed states of both parities of M_f".into()));
                    }
                    Some(p)
                }
                None => None,
            };
            let levels: Vec<f64> = static_levels.iter().filter(|l| parity.is_none_or(|p| l.1.rem_euclid(2) == p)).map(|l| l.0).collect();
            let ranks = ranks_of(&levels, &h_static, &start, &members, cols)?;
            let (energies, vectors) = sorted_eigen(within(&h_full));
            let observables: Vec<DMatrix<f64>> = [align, COS_Z_INDEX, COS_X_INDEX].iter().map(|&o| within(&ops.observables[o])).collect();
            for (&c, &r) in members.iter().zip(&ranks) {
                let v = vectors.column(r);
                let value = |o: &DMatrix<f64>| (v.transpose() * o * v)[(0, 0)];
                let col = &cols[c];
                out.push(TopDressedState {
                    m: col.m,
                    j: col.j,
                    label: col.label.clone(),
                    energy_cm: energies[r] / per_cm,
                    cos2: value(&observables[0]),
                    cos: value(&observables[1]),
                    cos_x: value(&observables[2]),
                    reflection: Some(class.sigma),
                    population: col.population,
                });
            }
        }
        Ok(Some(out))
    }
}

/// The static-dressed levels of a class as (energy rad/ps, M_f), ascending: with the static field along Z
/// M is conserved, so they are the eigenvalues of one small block per M of H0 − sΦ_Zz (the energy cut keeps
/// every M of a kept level, so the tilted class holds the same spectrum, rotated).
fn static_levels(ops: &FrameOps, m: &[i64], s: f64) -> Vec<(f64, i64)> {
    let mut values: Vec<i64> = m.to_vec();
    values.sort_unstable();
    values.dedup();
    let mut out = vec![];
    for mv in values {
        let idx: Vec<usize> = (0..m.len()).filter(|&i| m[i] == mv).collect();
        let h = DMatrix::from_fn(idx.len(), idx.len(), |r, c| ops.parts[0][(idx[r], idx[c])] - s * ops.parts[4][(idx[r], idx[c])]);
        out.extend(h.symmetric_eigenvalues().iter().map(|&e| (e, mv)));
    }
    out.sort_by(|a, b| a.0.total_cmp(&b.0));
    out
}

/// The rank of each member's static-dressed state among the static-dressed `levels` (rad/ps, ascending)
/// of its class: the number of levels below its energy; members of one energy (a degenerate group) take
/// the group's ranks in turn. Each member must be a static eigenstate (its residual under `h_static`)
/// whose energy is one of `levels`.
fn ranks_of(levels: &[f64], h_static: &DMatrix<f64>, start: &DMatrix<f64>, members: &[usize], cols: &[Column]) -> Result<Vec<usize>> {
    let tolerance = cm_to_rad_per_ps(1e-6);
    let mut energy = vec![];
    for &c in members {
        let v = start.column(c);
        let hv = h_static * v;
        let e = v.dot(&hv);
        let residual = (hv - v * e).norm();
        if residual > tolerance {
            return Err(Error::Numerical(format!(
                "the static-dressed state of level {} is not a static eigenstate of its class (residual {residual:.1e} rad/ps)",
                cols[c].label
            )));
        }
        energy.push(e);
    }
    let mut order: Vec<usize> = (0..members.len()).collect();
    order.sort_by(|&a, &b| energy[a].total_cmp(&energy[b]));
    let mut rank = vec![0; members.len()];
    let mut previous: Option<(f64, usize)> = None;
    for &k in &order {
        let e = energy[k];
        let below = levels.iter().filter(|&&l| l < e - tolerance).count();
        let r = match previous {
            Some((pe, pr)) if (e - pe).abs() < tolerance && pr + 1 >= below => pr + 1,
            _ => below,
        };
        if r >= levels.len() || (levels[r] - e).abs() > tolerance {
            return Err(Error::Numerical(format!("the static-dressed state of level {} matches no static level of its class", cols[members[k]].label)));
        }
        rank[k] = r;
        previous = Some((e, r));
    }
    Ok(rank)
}
