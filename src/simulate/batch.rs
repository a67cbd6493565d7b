//! Many pulse trains at once in the kick model (the designer's screening): every block carries the
//! states of all trains side by side, so each kick is one pair of products with the block's cos²θ
//! eigenvectors for the whole batch instead of one pair per train.

use super::{Event, Solver};
use crate::basis::Block;
use crate::error::Result;
use crate::field::FieldModel;
use crate::numeric::{sin_cos, sin_cos_slice};
use crate::observe::{BlockSums, LevelSums};
use crate::propagate::{BlockState, rotate_rows};
use crate::scenario::Method;
use crate::units::cm_to_rad_per_ps;
use nalgebra::DMatrix;
use rayon::prelude::*;

/// Trains per batch: enough to make the products efficient, few enough that a block's states stay in cache.
const BATCH: usize = 32;

/// Per train of a batch: its sums, or None where its states reached the basis edge; None for the
/// whole batch if its basis would go beyond the physical limit.
type BatchOutcome = Option<Vec<Option<LevelSums>>>;

/// One train reduced to its kicks: (time in ps, kick strength P in rad), time-ordered.
type Kicks = Vec<(f64, f64)>;

impl Solver {
    /// True if `field` can run through [`Solver::kick_batch`]: a linear molecule, the kick method, laser
    /// pulses only (no static, two-colour or terahertz field) and at least one pulse.
    pub fn batchable(&self, field: &FieldModel) -> bool {
        self.top.is_none() && self.settings.method == Method::Kick && !self.settings.both_parities && !field.is_polar() && !field.pulses.is_empty()
    }

    /// Field-free coherence sums just after the last kick of each train, computed for all trains
    /// together (kick model). Entry i is None where train i must run through [`Solver::run`] instead:
    /// it is not [`batchable`](Solver::batchable) or its kicks are too strong for any basis. The sums
    /// are taken at the time of the train's last kick (ps).
    ///
    /// Trains are sorted by the basis they need and run in batches of `BATCH`; a train whose states
    /// reach the basis edge runs again in a larger basis, as in [`Solver::run`].
    pub fn kick_batch(&self, fields: &[FieldModel], with_2d: bool) -> Result<Vec<Option<LevelSums>>> {
        let mut out: Vec<Option<LevelSums>> = vec![None; fields.len()];
        // (block levels added above the thermal top, train index), in a deterministic order.
        let mut pending: Vec<(usize, usize)> = (0..fields.len())
            .filter(|&i| self.batchable(&fields[i]) && self.check_strength(&fields[i]).is_ok())
            .map(|i| ((0.5 * self.total_strength(&fields[i])).ceil() as usize + 5, i))
            .collect();
        while !pending.is_empty() {
            pending.sort_unstable();
            let done: Vec<(usize, Vec<usize>, BatchOutcome)> = pending
                .par_chunks(BATCH)
                .map(|c| {
                    let extra = c.iter().map(|x| x.0).max().unwrap_or(0);
                    let members: Vec<usize> = c.iter().map(|x| x.1).collect();
                    let trains: Vec<&FieldModel> = members.iter().map(|&i| &fields[i]).collect();
                    (extra, members, self.batch_run(&trains, extra, with_2d))
                })
                .collect();
            pending.clear();
            for (extra, members, result) in done {
                // A basis beyond the physical limit: leave these trains to the general path.
                let Some(result) = result else { continue };
                for (i, r) in members.into_iter().zip(result) {
                    match r {
                        Some(s) => out[i] = Some(s),
                        None => pending.push((extra + (extra / 4).max(2), i)),
                    }
                }
            }
        }
        Ok(out)
    }

    /// One batch in a basis `extra` block levels above the thermal top: None if that basis goes
    /// beyond the physical limit, else per train the sums, or None where its states reached the edge.
    fn batch_run(&self, fields: &[&FieldModel], extra: usize, with_2d: bool) -> BatchOutcome {
        let kicks: Vec<Kicks> = fields
            .iter()
            .map(|f| {
                self.schedule(f)
                    .iter()
                    .filter_map(|e| match e {
                        Event::Kick { t_ps, strength, .. } => Some((*t_ps, *strength)),
                        Event::Finite { .. } => None,
                    })
                    .collect()
            })
            .collect();
        // Trains run in lockstep: a shorter train (or one whose pulses are all empty) is padded with
        // empty kicks at its last kick or, without any, at its last pulse centre.
        let steps = kicks.iter().map(|k| k.len()).max().unwrap_or(0).max(1);
        let kicks: Vec<Kicks> = kicks
            .into_iter()
            .zip(fields)
            .map(|(mut k, f)| {
                let last = k.last().map(|x| x.0).unwrap_or_else(|| f.last_center_ps());
                k.resize(steps, (last, 0.0));
                k
            })
            .collect();
        let j_limit = self.molecule.max_physical_j();
        // Field-free phases between kicks by J, per train and step (the same for every block).
        let j_count = (self.ensemble.j_max + 2 * extra as u32 + 2).min(j_limit) as usize + 1;
        let omega: Vec<f64> = (0..j_count as u32).map(|j| cm_to_rad_per_ps(self.molecule.energy_cm(j))).collect();
        let phases: Vec<Vec<(Vec<f64>, Vec<f64>)>> = kicks
            .iter()
            .map(|k| {
                (1..steps)
                    .map(|s| {
                        let dt = k[s].0 - k[s - 1].0;
                        omega
                            .iter()
                            .map(|w| {
                                let (s, c) = sin_cos(-w * dt);
                                (c, s)
                            })
                            .unzip()
                    })
                    .collect()
            })
            .collect();
        let per_block: Vec<Vec<Option<BlockSums>>> = self
            .ensemble
            .blocks
            .par_iter()
            .map(|bp| {
                let j_thermal = bp.levels.last().map(|l| l.0).unwrap_or(bp.m);
                let size = Block::size_to_reach(bp.m, bp.parity, j_thermal + 2 * extra as u32);
                let block = Block { m: bp.m, parity: bp.parity, size };
                if block.j_max() > j_limit || block.j_max() as usize >= j_count {
                    return None;
                }
                Some(self.batch_block(block, &bp.levels, &kicks, &phases, with_2d))
            })
            .collect::<Option<_>>()?;
        Some(
            (0..fields.len())
                .map(|t| {
                    let mut sums = LevelSums::new(omega.clone(), kicks[t][steps - 1].0, with_2d);
                    for (bp, b) in self.ensemble.blocks.iter().zip(&per_block) {
                        sums.add(if bp.m > 0 { 2.0 } else { 1.0 }, b[t].as_ref()?);
                    }
                    Some(sums)
                })
                .collect(),
        )
    }

    /// One block for every train of the batch: the coherence sums after the last kick, or None for a
    /// train whose states reached the basis edge.
    #[inline(never)]
    fn batch_block(&self, block: Block, levels: &[(u32, f64)], kicks: &[Kicks], phases: &[Vec<(Vec<f64>, Vec<f64>)>], with_2d: bool) -> Vec<Option<BlockSums>> {
        let ops = self.ops(block.m, block.parity, block.size, with_2d);
        let n = block.size;
        let k = levels.len();
        let trains = kicks.len();
        let width = 2 * k;
        let start: Vec<usize> = levels.iter().map(|l| ((l.0 - block.j_min()) / 2) as usize).collect();
        let pops: Vec<f64> = levels.iter().map(|l| l.1).collect();
        let v = &ops.cos2_eigenvectors;
        let vt = ops.cos2_eigenvectors_t();
        let lambda = &ops.cos2_eigenvalues;
        let mut psi = DMatrix::<f64>::zeros(n, width * trains);
        let mut work = DMatrix::<f64>::zeros(n, width * trains);
        let (mut c, mut s) = (vec![0.0; n], vec![0.0; n]);
        let mut arg = vec![0.0; n];
        let mut kick_phases = |theta: f64, c: &mut [f64], s: &mut [f64]| {
            arg.iter_mut().zip(lambda).for_each(|(a, l)| *a = theta * l);
            sin_cos_slice(&arg, s, c);
        };
        let steps = kicks.first().map(|k| k.len()).unwrap_or(0);
        let slab = |t: usize| t * n * width..(t + 1) * n * width;
        let mut edge = vec![0.0f64; trains];
        for step in 0..steps {
            if step == 0 {
                // Every state is still one basis level (a phase before the first kick is global):
                // Vᵀψ is a row of V, so the first kick needs one product only.
                for (t, train) in kicks.iter().enumerate() {
                    kick_phases(train[0].1, &mut c, &mut s);
                    let (re, im) = work.as_mut_slice()[slab(t)].split_at_mut(n * k);
                    for (col, &r) in start.iter().enumerate() {
                        let row = vt.column(r);
                        for q in 0..n {
                            re[col * n + q] = row[q] * c[q];
                            im[col * n + q] = row[q] * s[q];
                        }
                    }
                }
            } else {
                for (t, (pc, ps)) in phases.iter().map(|p| &p[step - 1]).enumerate() {
                    for q in 0..n {
                        let j = block.j(q) as usize;
                        c[q] = pc[j];
                        s[q] = ps[j];
                    }
                    rotate_rows(&mut psi.as_mut_slice()[slab(t)], k, n, &c, &s);
                }
                work.gemm(1.0, vt, &psi, 0.0);
                for (t, train) in kicks.iter().enumerate() {
                    kick_phases(train[step].1, &mut c, &mut s);
                    rotate_rows(&mut work.as_mut_slice()[slab(t)], k, n, &c, &s);
                }
            }
            psi.gemm(1.0, v, &work, 0.0);
            // Largest population in the top two levels after every kick, as in the general path.
            for (t, e) in edge.iter_mut().enumerate() {
                let data = &psi.as_slice()[slab(t)];
                for col in 0..k {
                    let top = |c: usize| -> f64 { data[c * n + n.saturating_sub(2)..(c + 1) * n].iter().map(|x| x * x).sum() };
                    *e = e.max(top(col) + top(col + k));
                }
            }
        }
        let mut state = BlockState::new(n, &start, 0.0);
        (0..trains)
            .map(|t| {
                if edge[t] > self.settings.edge_tolerance {
                    return None;
                }
                let columns = &psi.as_slice()[slab(t)];
                if !with_2d {
                    return Some(BlockSums::from_columns(&ops, columns, k, &pops));
                }
                state.psi.as_mut_slice().copy_from_slice(columns);
                Some(BlockSums::from_state(&ops, &state, &pops, true))
            })
            .collect()
    }
}
