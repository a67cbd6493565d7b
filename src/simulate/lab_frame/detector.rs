//! ⟨cos²θ_2D⟩ on the all-M path, with the full azimuthal dependence (`basis::detector`): each J's
//! amplitudes change to quantization along the beam Y, where the operator ½ + ¼(e^{2iψ} + e^{−2iψ})
//! raises or lowers M_Y by two and keeps K. Inside pulses it is evaluated directly on the function-basis
//! amplitudes; after them, as coherences between field-free levels with the M_Y sums contracted by one
//! matrix product per M_Y over all levels of the block.

use super::{LabOps, combo};
use crate::basis::detector::{DetectorTable, beam_quantization};
use crate::propagate::BlockState;
use nalgebra::DMatrix;

/// The change to Y quantization of one slice (one J): kept M_Y (one parity, fixed by C₂(Y)) and the
/// complex matrix from the block's M combinations, rows M_Y kept.
#[derive(Debug)]
struct Turn {
    my: Vec<i64>,
    re: DMatrix<f64>,
    im: DMatrix<f64>,
}

impl Turn {
    /// Row of `m` among the kept M_Y.
    fn row(&self, m: i64) -> Option<usize> {
        self.my.binary_search(&m).ok()
    }
}

/// Functions (p_b, p_a) of two slices with the same |K|, with their (K, coefficient product) terms.
type Matches = Vec<(usize, usize, Vec<(i64, f64)>)>;

/// (slice, function, coefficient) holding one primitive K component.
type Holders = Vec<(usize, usize, f64)>;

/// Levels of one M_Y stacked over slices: (slice, first row) of each member, and the amplitudes.
type Stack = (Vec<(usize, usize)>, DMatrix<f64>);

/// A (Re, Im) pair of real matrices.
type ComplexParts = (DMatrix<f64>, DMatrix<f64>);

/// What the detector-plane operator needs of one block, beyond the class's θ table.
#[derive(Debug)]
pub(super) struct DetectorOps {
    turns: Vec<Turn>,
    /// Per ordered slice pair (a, b) (index a · slices + b): functions (p_b, p_a) with the same |K|, with
    /// their (K, coefficient product) terms.
    matches: Vec<Matches>,
    /// Per signed K: the (slice, function, coefficient) holding that primitive component.
    by_k: Vec<(i64, Holders)>,
}

/// Coherence coefficients of the detector-plane operator for one chunk: per ordered (J_a, J_b) the
/// (Re, Im) of ρ_ab D_ba summed over M_Y, as n_b × n_a level matrices, with D = e^{2iψ} raising M_Y; and
/// Σ_a ρ_aa.
#[derive(Debug, Clone, Default)]
pub(super) struct DetectorCoefficients {
    pub pairs: Vec<((i64, i64), ComplexParts)>,
    pub norm: f64,
}

/// Amplitudes of one slice in the Y-quantized basis: rows kept M_Y, columns (function or level) · k + state.
type Rotated = Option<ComplexParts>;

impl DetectorOps {
    /// The changes of axis and the |K| matches of `ops`'s block.
    pub(super) fn new(ops: &LabOps) -> DetectorOps {
        let u = beam_quantization(ops.block.j_max);
        let turns = ops
            .slices
            .iter()
            .map(|sl| {
                let j = sl.j;
                let n = (2 * j + 1) as usize;
                let (ur, ui) = &u[j as usize];
                let mut re = DMatrix::<f64>::zeros(n, sl.mus.len());
                let mut im = DMatrix::<f64>::zeros(n, sl.mus.len());
                for (x, &mu) in sl.mus.iter().enumerate() {
                    let (comps, nc) = combo(j, mu, ops.block.s);
                    for &(m, c) in &comps[..nc] {
                        let col = (m + j) as usize;
                        for r in 0..n {
                            re[(r, x)] += c * ur[(r, col)];
                            im[(r, x)] += c * ui[(r, col)];
                        }
                    }
                }
                // C₂(Y) keeps one parity of M_Y: the other rows vanish (to rounding).
                let keep: Vec<usize> = (0..n).filter(|&r| (0..sl.mus.len()).map(|x| re[(r, x)].powi(2) + im[(r, x)].powi(2)).sum::<f64>() > 1e-18).collect();
                Turn { my: keep.iter().map(|&r| r as i64 - j).collect(), re: re.select_rows(&keep), im: im.select_rows(&keep) }
            })
            .collect();
        let ns = ops.slices.len();
        let mut matches = Vec::with_capacity(ns * ns);
        for sa in &ops.slices {
            let (_, fa, _) = ops.basis.j_ranges[sa.range];
            for sb in &ops.slices {
                let (_, fb, _) = ops.basis.j_ranges[sb.range];
                let mut list = vec![];
                for pb in 0..sb.nk {
                    let (cb, nb) = ops.basis.functions[fb + pb].components();
                    for pa in 0..sa.nk {
                        let (ca, na) = ops.basis.functions[fa + pa].components();
                        let terms: Vec<(i64, f64)> =
                            cb[..nb].iter().flat_map(|&(kb, xb)| ca[..na].iter().filter(move |c| c.0 == kb).map(move |&(_, xa)| (kb, xb * xa))).collect();
                        if !terms.is_empty() {
                            list.push((pb, pa, terms));
                        }
                    }
                }
                matches.push(list);
            }
        }
        let mut by_k: std::collections::BTreeMap<i64, Holders> = Default::default();
        for (a, sl) in ops.slices.iter().enumerate() {
            let (_, fs, _) = ops.basis.j_ranges[sl.range];
            for p in 0..sl.nk {
                let (comps, nc) = ops.basis.functions[fs + p].components();
                for &(kk, c) in &comps[..nc] {
                    by_k.entry(kk).or_default().push((a, p, c));
                }
            }
        }
        DetectorOps { turns, matches, by_k: by_k.into_iter().collect() }
    }

    /// Bytes held.
    pub(super) fn bytes(&self) -> usize {
        let turns: usize = self.turns.iter().map(|t| 16 * t.re.len() + 8 * t.my.len()).sum();
        turns + self.matches.iter().flatten().map(|m| 16 + 16 * m.2.len()).sum::<usize>() + self.by_k.iter().map(|b| 24 * b.1.len()).sum::<usize>()
    }
}

impl LabOps {
    /// The block's amplitudes (row r = slice start + μ·n_k + i of `x(r, column)`, columns [Re | Im] of k
    /// states) weighted by sqrt(pops) and turned to Y quantization, per slice; slices at or above `live`
    /// are empty.
    fn rotated(&self, det: &DetectorOps, x: impl Fn(usize, usize) -> f64, k: usize, pops: &[f64], live: usize) -> Vec<Rotated> {
        let sq: Vec<f64> = pops.iter().map(|p| p.sqrt()).collect();
        self.slices
            .iter()
            .zip(&det.turns)
            .map(|(sl, turn)| {
                if sl.start >= live {
                    return None;
                }
                let (nm, nk) = (sl.mus.len(), sl.nk);
                let a_re = DMatrix::from_fn(nm, nk * k, |mu, col| x(sl.start + mu * nk + col / k, col % k) * sq[col % k]);
                let a_im = DMatrix::from_fn(nm, nk * k, |mu, col| x(sl.start + mu * nk + col / k, k + col % k) * sq[col % k]);
                let re = &turn.re * &a_re - &turn.im * &a_im;
                let im = &turn.re * &a_im + &turn.im * &a_re;
                Some((re, im))
            })
            .collect()
    }

    /// The e^{2iψ} element between functions (p_b at J_b, M_Y + 2) and (p_a at J_a, M_Y) from their |K| terms.
    fn detector_element(table: &DetectorTable, terms: &[(i64, f64)], jb: i64, ja: i64, m: i64) -> f64 {
        terms.iter().map(|&(kk, c)| c * table.element(jb, ja, kk, m)).sum()
    }

    /// Σ_c p_c ⟨ψ_c|cos²θ_2D|ψ_c⟩ directly (samples inside pulses): per signed K and M_Y, the primitive
    /// amplitudes over J against the θ table, one matrix product each (negative K through
    /// ⟨…−K…⟩ = (−1)^{J+J'}⟨…K…⟩, applied as (−1)^J on the amplitudes).
    /// States are given transposed in the function basis (`states_to_functions`), k of them.
    pub(super) fn expect_detector_in(&self, det: &DetectorOps, table: &DetectorTable, f: &[f64], cols: usize, k: usize, pops: &[f64]) -> f64 {
        let j_max = self.block.j_max;
        let y = self.rotated(det, |r, c| f[r * cols + c], k, pops, self.size);
        let norm: f64 = y.iter().flatten().map(|(re, im)| re.norm_squared() + im.norm_squared()).sum();
        let mut raised = 0.0;
        for (kk, members) in &det.by_k {
            let ka = kk.abs();
            let lo = |m: i64| m.abs().max(ka);
            // Rows J − lo(M_Y), columns [Re | Im] of the states.
            let mut g: Vec<Option<DMatrix<f64>>> = vec![None; (2 * j_max + 1) as usize];
            for &(a, p, coef) in members {
                let Some((re, im)) = &y[a] else { continue };
                let j = self.slices[a].j;
                let c = if *kk < 0 && j % 2 != 0 { -coef } else { coef };
                for (r, &m) in det.turns[a].my.iter().enumerate() {
                    let gm = g[(m + j_max) as usize].get_or_insert_with(|| DMatrix::zeros((j_max - lo(m) + 1) as usize, 2 * k));
                    let row = (j - lo(m)) as usize;
                    for s in 0..k {
                        gm[(row, s)] += c * re[(r, p * k + s)];
                        gm[(row, k + s)] += c * im[(r, p * k + s)];
                    }
                }
            }
            for m in -j_max..=j_max - 2 {
                let (Some(ga), Some(gb)) = (&g[(m + j_max) as usize], &g[(m + 2 + j_max) as usize]) else { continue };
                let Some((t, _, _)) = table.matrix(ka, m) else { continue };
                // Re Σ conj(b) T a = Σ (b_re ∘ T a_re + b_im ∘ T a_im).
                let tg = t.view((0, 0), (gb.nrows(), ga.nrows())) * ga;
                raised += gb.dot(&tg);
            }
        }
        0.5 * norm + 0.5 * raised
    }

    /// Coherence coefficients of the detector-plane operator between field-free levels (after pulses).
    pub(super) fn detector_coefficients(&self, det: &DetectorOps, table: &DetectorTable, state: &BlockState, pops: &[f64]) -> DetectorCoefficients {
        let k = state.k;
        let live = Self::live_rows(state);
        let y = self.rotated(det, |r, c| state.psi[(r, c)], k, pops, live);
        let norm: f64 = y.iter().flatten().map(|(re, im)| re.norm_squared() + im.norm_squared()).sum();
        let ns = self.slices.len();
        let j_max = self.block.j_max;
        // Stacks per M_Y: rows (slice, level) of the slices holding that M_Y, columns [Re | Im] of the states.
        // (members: (slice, first row), stacked amplitudes) per M_Y.
        let mut stacks: Vec<Stack> = Vec::with_capacity((2 * j_max + 1) as usize);
        for m in -j_max..=j_max {
            let mut members = vec![];
            let mut rows = 0;
            for (a, t) in det.turns.iter().enumerate() {
                if y[a].is_some() && t.row(m).is_some() {
                    members.push((a, rows));
                    rows += self.slices[a].nk;
                }
            }
            let mut s = DMatrix::zeros(rows, 2 * k);
            for &(a, off) in &members {
                let (re, im) = y[a].as_ref().expect("live slice");
                let r = det.turns[a].row(m).expect("member");
                for i in 0..self.slices[a].nk {
                    for c in 0..k {
                        s[(off + i, c)] = re[(r, i * k + c)];
                        s[(off + i, k + c)] = im[(r, i * k + c)];
                    }
                }
            }
            stacks.push((members, s));
        }
        let mut acc: Vec<Option<ComplexParts>> = vec![None; ns * ns];
        for m in -j_max..=j_max - 2 {
            let (ma, sa) = &stacks[(m + j_max) as usize];
            let (mb, sb) = &stacks[(m + 2 + j_max) as usize];
            if ma.is_empty() || mb.is_empty() {
                continue;
            }
            // ρ between (b, M_Y + 2) and (a, M_Y): conj(B) Aᵀ.
            let r_re = sb * sa.transpose();
            let mut b_alt = sb.clone();
            b_alt.columns_mut(k, k).neg_mut();
            let mut a_alt = DMatrix::zeros(sa.nrows(), 2 * k);
            a_alt.columns_mut(0, k).copy_from(&sa.columns(k, k));
            a_alt.columns_mut(k, k).copy_from(&sa.columns(0, k));
            let r_im = &b_alt * a_alt.transpose();
            for &(a, oa) in ma {
                let (sla, va) = (&self.slices[a], &self.basis.vectors[self.slices[a].range]);
                for &(b, ob) in mb {
                    let list = &det.matches[a * ns + b];
                    if list.is_empty() {
                        continue;
                    }
                    let (slb, vb) = (&self.slices[b], &self.basis.vectors[self.slices[b].range]);
                    // The operator between levels: Σ_matches e V_b[p_b, ·]ᵀ V_a[p_a, ·].
                    let mut d = DMatrix::zeros(slb.nk, sla.nk);
                    for (pb, pa, terms) in list {
                        let e = Self::detector_element(table, terms, slb.j, sla.j, m);
                        if e != 0.0 {
                            d.ger(e, &vb.row(*pb).transpose(), &va.row(*pa).transpose(), 1.0);
                        }
                    }
                    let (x_re, x_im) = acc[a * ns + b].get_or_insert_with(|| (DMatrix::zeros(slb.nk, sla.nk), DMatrix::zeros(slb.nk, sla.nk)));
                    *x_re += d.component_mul(&r_re.view((ob, oa), (slb.nk, sla.nk)));
                    *x_im += d.component_mul(&r_im.view((ob, oa), (slb.nk, sla.nk)));
                }
            }
        }
        let mut pairs = vec![];
        for (idx, x) in acc.into_iter().enumerate() {
            if let Some(x) = x {
                pairs.push(((self.slices[idx / ns].j, self.slices[idx % ns].j), x));
            }
        }
        DetectorCoefficients { pairs, norm }
    }
}
