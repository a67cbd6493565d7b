//! Physics seeds for the swarms: pulse trains that put each kick where alignment peaks, trains spaced
//! by fractions of the rotational revival period, and the best design with one pulse fewer extended by
//! one pulse. The search puts some of them beside random particles in every swarm.
//!
//! Why these: a kick adds most alignment when it arrives while the ensemble is already aligned (the
//! rule behind trains of short pulses, e.g. Leibscher, Averbukh & Rabitz, Phys. Rev. Lett. 90, 213001
//! (2003)), and for a rigid rotor the alignment recurs at fractional revivals, multiples of T_rev/4
//! with T_rev = 1/(2Bc).

use super::{DesignSpace, Objective, Observable, Slot};
use crate::field::FieldModel;
use crate::goal::GoalKind;
use crate::simulate::Solver;

/// Points of the unit cube (as `DesignSpace::field` reads them) worth putting into a swarm.
pub struct SeedPool {
    /// Trains built pulse by pulse at the alignment peaks (most promising first).
    pub greedy: Vec<Vec<f64>>,
    /// Trains with every delay a multiple of a quarter revival period.
    pub revivals: Vec<Vec<f64>>,
    /// The best design with one pulse fewer, extended by one pulse.
    pub extended: Vec<Vec<f64>>,
}

impl SeedPool {
    /// Every seed, interleaved so that any prefix mixes the kinds.
    pub fn all(&self) -> Vec<Vec<f64>> {
        let mut out = vec![];
        let n = self.greedy.len().max(self.revivals.len()).max(self.extended.len());
        for i in 0..n {
            for list in [&self.extended, &self.greedy, &self.revivals] {
                if let Some(p) = list.get(i) {
                    out.push(p.clone());
                }
            }
        }
        out
    }

    /// Number of seeds.
    pub fn len(&self) -> usize {
        self.greedy.len() + self.revivals.len() + self.extended.len()
    }

    /// True when there are none.
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }
}

/// Revival period (ps) the seeds are spaced by: 1/(2Bc) for linear molecules and symmetric tops (B of the
/// tumbling motion), 1/((B + C)c) for asymmetric tops (the mean of the two smaller constants).
pub fn revival_period_ps(obj: &Objective) -> f64 {
    let m = obj.molecule();
    crate::units::revival_period_ps(m.revival_b_cm())
}

/// Slot indices of the delays and intensities in the unit-cube vector (None where fixed).
struct Layout {
    delay: Vec<Option<usize>>,
    intensity: Vec<Option<usize>>,
    dims: usize,
}

fn layout(space: &DesignSpace) -> Layout {
    let slots = space.slots();
    let n = space.pulses.len();
    let find = |want: Slot| slots.iter().position(|s| *s == want);
    Layout {
        delay: (0..n).map(|k| if k == 0 { None } else { find(Slot::Delay(k)) }).collect(),
        intensity: (0..n).map(|k| find(Slot::Intensity(k))).collect(),
        dims: slots.len(),
    }
}

/// The unit-cube point with the given delays (ps, pulse 2 on) and intensity fraction of each pulse's
/// bounds; every other slot at `rest` (one value per slot, used where the layout says nothing).
fn point(space: &DesignSpace, lay: &Layout, delays: &[f64], intensity_fraction: &[f64], rest: &[f64]) -> Vec<f64> {
    let mut u = rest.to_vec();
    u.resize(lay.dims, 0.5);
    for (k, d) in delays.iter().enumerate() {
        if let Some(i) = lay.delay[k + 1] {
            u[i] = space.delay_bounds(k + 1).fraction(*d);
        }
    }
    for (k, f) in intensity_fraction.iter().enumerate() {
        if let Some(i) = lay.intensity[k] {
            u[i] = f.clamp(0.0, 1.0);
        }
    }
    u
}

/// The series the seeds follow: the goal's observable where it is an alignment measure (in the goal's
/// sense), else ⟨cos²θ⟩ (orientation builds on alignment).
fn seed_series(obj: &Objective) -> (Observable, f64) {
    match obj.goal.observable {
        Observable::Cos2 | Observable::Cos2TwoD => (obj.goal.observable, if obj.goal.kind == GoalKind::Minimum { -1.0 } else { 1.0 }),
        _ => (Observable::Cos2, 1.0),
    }
}

/// Times of the `count` best local maxima of `sense · series` (ascending value order), at least
/// `spacing` apart.
fn best_peaks(times: &[f64], series: &[f64], sense: f64, count: usize, spacing: f64) -> Vec<f64> {
    let n = series.len();
    let mut peaks: Vec<(f64, f64)> = (0..n)
        .filter(|&i| {
            let v = sense * series[i];
            (i == 0 || v >= sense * series[i - 1]) && (i + 1 == n || v >= sense * series[i + 1])
        })
        .map(|i| (sense * series[i], times[i]))
        .collect();
    peaks.sort_by(|a, b| b.0.total_cmp(&a.0).then(a.1.total_cmp(&b.1)));
    let mut out: Vec<f64> = vec![];
    for (_, t) in peaks {
        if out.iter().all(|o| (o - t).abs() >= spacing) {
            out.push(t);
        }
        if out.len() == count {
            break;
        }
    }
    out
}

/// Build the seed pool for `space` with the screening solver. `previous` is the best design with one
/// pulse fewer (searched with "max_count"), if any; `rest` fills the slots the seeds do not choose.
pub fn seed_pool(obj: &Objective, space: &DesignSpace, solver: &Solver, previous: Option<&FieldModel>, rest: &[f64]) -> SeedPool {
    let lay = layout(space);
    let n = space.pulses.len();
    let mut pool = SeedPool { greedy: vec![], revivals: vec![], extended: vec![] };
    if n < 2 || lay.delay.iter().all(|d| d.is_none()) {
        // One pulse: its intensity at the ceiling and halfway.
        for f in [1.0, 0.6] {
            pool.greedy.push(point(space, &lay, &[], &vec![f; n], rest));
        }
        return pool;
    }
    let (obs, sense) = seed_series(obj);
    let step = (obj.goal.step_fs / 1000.0).clamp(0.005, 0.5);
    // The trace of a partial train over the window where the next pulse may go.
    let next_peaks = |delays: &[f64], fractions: &[f64], k: usize, count: usize| -> Vec<f64> {
        // The full train with the later pulses at their shortest delays, then cut to its first k pulses.
        let mut d = delays.to_vec();
        d.extend((d.len() + 1..n).map(|j| space.delay_bounds(j).min));
        let mut f = fractions.to_vec();
        f.resize(n, 1.0);
        let mut field = space.field(&point(space, &lay, &d, &f, rest));
        field.pulses.truncate(k);
        field.two_colour.truncate(k);
        field.terahertz.clear();
        let t_last = field.last_center_ps();
        let b = space.delay_bounds(k);
        let m = (((b.max - b.min) / step).ceil() as usize).clamp(2, 20_000);
        let times: Vec<f64> = (0..=m).map(|i| t_last + b.min + (b.max - b.min) * i as f64 / m as f64).collect();
        match solver.run(&field, &times, obs == Observable::Cos2TwoD) {
            Ok(run) => {
                let series = if obs == Observable::Cos2TwoD { run.trace.cos2_2d().unwrap_or_default() } else { &run.trace.cos2 };
                best_peaks(&times, series, sense, count, 0.02 * (b.max - b.min).max(1e-3)).into_iter().map(|t| t - t_last).collect()
            }
            Err(_) => vec![],
        }
    };
    // Greedy trains: every pulse at the same fraction of its bounds, the next one at one of the two
    // best peaks of what the earlier pulses made (a binary tree, at most 16 leaves).
    for f in [1.0, 0.7] {
        let fractions = vec![f; n];
        let mut partial: Vec<Vec<f64>> = vec![vec![]];
        for k in 1..n {
            let branch = if (1usize << k) <= 16 { 2 } else { 1 };
            let mut next = vec![];
            for d in &partial {
                for t in next_peaks(d, &fractions[..k], k, branch) {
                    let mut e = d.clone();
                    e.push(t);
                    next.push(e);
                }
            }
            if next.is_empty() {
                break;
            }
            partial = next;
        }
        for d in partial.into_iter().filter(|d| d.len() == n - 1) {
            pool.greedy.push(point(space, &lay, &d, &fractions, rest));
        }
    }
    // Quarter-revival trains: equal delays of m T_rev/4 that fit the bounds, at the ceiling.
    let quarter = 0.25 * revival_period_ps(obj);
    for m in 1..=16 {
        let d = m as f64 * quarter;
        if (1..n).all(|k| {
            let b = space.delay_bounds(k);
            d >= b.min && d <= b.max
        }) {
            pool.revivals.push(point(space, &lay, &vec![d; n - 1], &vec![1.0; n], rest));
        }
    }
    // The design with one pulse fewer, extended at the best peaks after its last pulse.
    if let Some(prev) = previous.filter(|p| p.pulses.len() + 1 == n) {
        let delays: Vec<f64> = prev.pulses.windows(2).map(|w| w[1].center_ps - w[0].center_ps).collect();
        let fractions: Vec<f64> = prev.pulses.iter().enumerate().map(|(k, p)| space.intensity_bounds(k).fraction(p.peak_intensity_wcm2)).collect();
        for t in next_peaks(&delays, &fractions, n - 1, 2) {
            let mut d = delays.clone();
            d.push(t);
            let mut f = fractions.clone();
            f.push(1.0);
            pool.extended.push(point(space, &lay, &d, &f, rest));
        }
    }
    pool
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::scenario::{Method, SolverSettings};

    #[test]
    fn seeds_sit_at_fractional_revivals_of_the_rotor() {
        // Independent value: the field-free alignment of a rigid rotor recurs at multiples of T_rev/4 with
        // T_rev = 1/(2Bc) (textbook; e.g. Stapelfeldt & Seideman, Rev. Mod. Phys. 75, 543 (2003)). For N2
        // (B = 1.98958 cm⁻¹: T_rev = 8.3827 ps) every revival seed's delay is such a multiple within the
        // bounds, and the greedy seeds put the second pulse at an alignment peak, within 0.35 ps of one
        // (the peak sits just after the revival centre; half a revival width).
        let text = r#"{"molecule": "N2", "temperature_k": 300,
            "pulses": {"count": 3, "fwhm_fs": 50, "delay_ps": {"min": 0.5, "max": 10.0}, "peak_intensity_wcm2": {"min": 0, "max": 5e13}},
            "max_peak_intensity_wcm2": 5e13, "goal": {"kind": "peak", "window_ps": [0.05, 8.8], "step_fs": 20}}"#;
        let obj = Objective::from_json_str(text, "test").unwrap();
        let t_rev = 1.0 / (2.0 * 1.98958 * 2.99792458e10) * 1e12;
        assert!((revival_period_ps(&obj) - t_rev).abs() < 1e-9);
        let solver = Solver::new(obj.molecule(), 300.0, SolverSettings { method: Method::Kick, ..obj.solver_settings() }).unwrap();
        let space = &obj.space;
        let rest = vec![0.5; space.dims()];
        let pool = seed_pool(&obj, space, &solver, None, &rest);
        let lay = layout(space);
        let delay_of = |u: &[f64], k: usize| space.field(u).pulses[k].center_ps - space.field(u).pulses[k - 1].center_ps;
        let quarter = t_rev / 4.0;
        // Quarter revivals inside 0.5–10 ps: 1 … 4 (2.10, 4.19, 6.29, 8.38 ps).
        assert_eq!(pool.revivals.len(), 4);
        for u in &pool.revivals {
            for k in 1..3 {
                let m = delay_of(u, k) / quarter;
                assert!((m - m.round()).abs() < 1e-6, "delay {} is not a multiple of T_rev/4", delay_of(u, k));
            }
        }
        assert!(!pool.greedy.is_empty() && pool.extended.is_empty());
        for u in &pool.greedy {
            let d = delay_of(u, 1);
            let off = d - (d / quarter).round() * quarter;
            assert!(off.abs() < 0.35, "greedy delay {d} ps is {off} ps from a fractional revival");
            assert!(lay.intensity.iter().flatten().all(|&i| u[i] > 0.0));
        }
        assert_eq!(pool.all().len(), pool.len());
    }
}
