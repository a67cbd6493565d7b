//! Many pulse trains at once in the kick model (the designer's screening): every block carries the
//! states of all trains side by side, so each kick is one pair of products with the block's cos²θ
//! eigenvectors for the whole batch instead of one pair per train.

use super::{Event, Solver};
use crate::basis::Block;
use crate::error::Result;
use crate::field::FieldModel;
use crate::numeric::sin_cos_slice;
use crate::observe::{BlockSums, LevelSums};
use crate::propagate::{BlockState, rotate_rows};
use crate::scenario::Method;
use crate::units::cm_to_rad_per_ps;
use nalgebra::{DMatrix, DMatrixView, DMatrixViewMut};
use rayon::prelude::*;

/// Trains per batch: enough to make the products efficient, few enough that a block's states stay in cache.
const BATCH: usize = 32;

/// Per train of a batch: its sums, or None where its states reached the basis edge; None for the
/// whole batch if its basis would go beyond the physical limit.
type BatchOutcome = Option<Vec<Option<LevelSums>>>;

/// Field-free phase factors of one step by J: entry p·half + J/2 holds level J of parity p.
struct FreeTable {
    cos: Vec<f64>,
    sin: Vec<f64>,
    half: usize,
}

impl FreeTable {
    /// (cos, sin) of the `n` levels of `block`, in block order.
    fn of(&self, block: &Block, n: usize) -> (&[f64], &[f64]) {
        let from = block.parity as usize * self.half + block.j_min() as usize / 2;
        (&self.cos[from..from + n], &self.sin[from..from + n])
    }
}

thread_local! {
    /// Reused state buffers of `batch_block` (ψ and the eigenbasis products).
    static BUFFERS: std::cell::RefCell<[Vec<f64>; 2]> = const { std::cell::RefCell::new([Vec::new(), Vec::new()]) };
}

/// One train reduced to its kicks: (time in ps, kick strength P in rad), time-ordered.
type Kicks = Vec<(f64, f64)>;

impl Solver {
    /// True if `field` can run through [`Solver::kick_batch`]: a linear molecule, the kick method, laser
    /// pulses only (no static, two-colour or terahertz field), all polarized along Z, and at least one pulse.
    pub fn batchable(&self, field: &FieldModel) -> bool {
        self.ensemble().is_some()
            && self.settings.method == Method::Kick
            && !self.settings.both_parities
            && !field.is_polar()
            && field.is_symmetric_about_z()
            && !field.pulses.is_empty()
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
        let ensemble = self.linear();
        let j_count = (ensemble.j_max + 2 * extra as u32 + 2).min(j_limit) as usize + 1;
        let omega: Vec<f64> = (0..j_count as u32).map(|j| cm_to_rad_per_ps(self.linear_rotor().energy_cm(j))).collect();
        // Per train and step: cos and sin of −ω_J dt, stored as [even J | odd J] so that a block's
        // levels (one parity, consecutive) are one contiguous run.
        let half = j_count.div_ceil(2);
        let phases: Vec<Vec<FreeTable>> = kicks
            .iter()
            .map(|k| {
                (1..steps)
                    .map(|s| {
                        let dt = k[s].0 - k[s - 1].0;
                        let arg: Vec<f64> = (0..2 * half).map(|i| -omega.get(2 * (i % half) + i / half).copied().unwrap_or(0.0) * dt).collect();
                        let mut t = FreeTable { cos: vec![0.0; 2 * half], sin: vec![0.0; 2 * half], half };
                        sin_cos_slice(&arg, &mut t.sin, &mut t.cos);
                        t
                    })
                    .collect()
            })
            .collect();
        let per_block: Vec<Vec<Option<BlockSums>>> = ensemble
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
                    for (bp, b) in ensemble.blocks.iter().zip(&per_block) {
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
    fn batch_block(&self, block: Block, levels: &[(u32, f64)], kicks: &[Kicks], phases: &[Vec<FreeTable>], with_2d: bool) -> Vec<Option<BlockSums>> {
        BUFFERS.with_borrow_mut(|[a, b]| {
            let len = block.size * 2 * levels.len() * kicks.len();
            for buf in [&mut *a, &mut *b] {
                if buf.len() < len {
                    buf.resize(len, 0.0);
                }
            }
            self.batch_block_in(block, levels, kicks, phases, with_2d, (&mut a[..len], &mut b[..len]))
        })
    }

    /// `batch_block` with its buffers for ψ and for the eigenbasis products (each N × 2K × trains;
    /// their contents on entry do not matter).
    fn batch_block_in(
        &self,
        block: Block,
        levels: &[(u32, f64)],
        kicks: &[Kicks],
        phases: &[Vec<FreeTable>],
        with_2d: bool,
        (psi_buf, work_buf): (&mut [f64], &mut [f64]),
    ) -> Vec<Option<BlockSums>> {
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
        let (psi, work) = (psi_buf, work_buf);
        let cols = width * trains;
        // dst ← a · src for N × cols column-major buffers.
        let product =
            |dst: &mut [f64], a: &DMatrix<f64>, src: &[f64]| DMatrixViewMut::from_slice(dst, n, cols).gemm(1.0, a, &DMatrixView::from_slice(src, n, cols), 0.0);
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
                    let (re, im) = work[slab(t)].split_at_mut(n * k);
                    for (col, &r) in start.iter().enumerate() {
                        let row = &vt.as_slice()[r * n..(r + 1) * n];
                        let (re, im) = (&mut re[col * n..(col + 1) * n], &mut im[col * n..(col + 1) * n]);
                        for q in 0..n {
                            re[q] = row[q] * c[q];
                            im[q] = row[q] * s[q];
                        }
                    }
                }
            } else {
                for (t, table) in phases.iter().map(|p| &p[step - 1]).enumerate() {
                    let (pc, ps) = table.of(&block, n);
                    rotate_rows(&mut psi[slab(t)], k, n, pc, ps);
                }
                product(work, vt, psi);
                for (t, train) in kicks.iter().enumerate() {
                    kick_phases(train[step].1, &mut c, &mut s);
                    rotate_rows(&mut work[slab(t)], k, n, &c, &s);
                }
            }
            product(psi, v, work);
            // Largest population in the top two levels after every kick, as in the general path.
            let rows = n.saturating_sub(2)..n;
            for (t, e) in edge.iter_mut().enumerate() {
                let (re, im) = psi[slab(t)].split_at(n * k);
                for (a, b) in re.chunks_exact(n).zip(im.chunks_exact(n)) {
                    let p: f64 = rows.clone().map(|r| a[r] * a[r] + b[r] * b[r]).sum();
                    *e = e.max(p);
                }
            }
        }
        let mut scratch = Default::default();
        let mut state = if with_2d { Some(BlockState::new(n, &start, 0.0)) } else { None };
        (0..trains)
            .map(|t| {
                if edge[t] > self.settings.edge_tolerance {
                    return None;
                }
                let columns = &psi[slab(t)];
                match &mut state {
                    None => Some(BlockSums::from_columns(&ops, columns, k, &pops, &mut scratch)),
                    Some(st) => {
                        st.psi.as_mut_slice().copy_from_slice(columns);
                        Some(BlockSums::from_state(&ops, st, &pops, true))
                    }
                }
            })
            .collect()
    }
}
