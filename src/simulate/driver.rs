//! The bookkeeping every rotor kernel shares, kept in one place: how a basis grows when its edge fills,
//! how the default time step of a finite pulse is chosen, and how the sample times are walked along a
//! schedule of kicks and finite intervals.
//!
//! The kernels (linear blocks of one |M| and J parity, polar blocks of one |M| holding every J, top
//! blocks of one M and symmetry class, all-M chunks) differ in their operators and observables; what
//! they do with the schedule and the basis is decided here.

use crate::error::{Error, Result};
use crate::propagate::{BlockState, FiniteSpan, propagate_finite, propagate_stepwise};
use crate::scenario::SolverSettings;
use std::ops::Range;

/// What every block of one run shares: the field, its schedule (kicks and finite intervals of the
/// kernel's item type), the sample times and the time the propagation starts.
pub(crate) struct Run<'a, I> {
    pub field: &'a crate::field::FieldModel,
    pub items: &'a [I],
    pub times: &'a [f64],
    pub t_first: f64,
}

impl<I> Clone for Run<'_, I> {
    fn clone(&self) -> Self {
        *self
    }
}

impl<I> Copy for Run<'_, I> {}

/// Run `attempt` with a basis of `first` units (the kernel's unit: states of a block, or its top J),
/// growing it by a quarter (at least four units, never past `cap`) each time the attempt reports that
/// the population reached the basis edge (`Ok(None)`); `beyond` is the error once `cap` did not suffice
/// (or is zero: no basis fits).
pub(crate) fn grow_basis<T>(first: usize, cap: usize, mut attempt: impl FnMut(usize) -> Result<Option<T>>, beyond: impl FnOnce() -> Error) -> Result<T> {
    if cap == 0 {
        return Err(beyond());
    }
    let mut n = first.min(cap);
    loop {
        if let Some(out) = attempt(n)? {
            return Ok(out);
        }
        if n >= cap {
            return Err(beyond());
        }
        n = (n + (n / 4).max(4)).min(cap);
    }
}

/// How fine the default step of a finite pulse is for one kernel: the step is at most a fraction of the
/// shortest envelope time scale (1/1.5), `transition` / (fastest transition frequency the basis holds)
/// and `coupling` / (largest coupling rate in the interval).
#[derive(Debug, Clone, Copy)]
pub(crate) struct StepRule {
    pub transition: f64,
    pub coupling: f64,
}

/// Linear molecules, with and without orienting fields. Measured on nitrogen at 300 K (50 fs,
/// 5e13 W/cm²): errors near 1e-7 in ⟨cos²θ⟩ (see the convergence tests).
pub(crate) const LINEAR_STEP: StepRule = StepRule { transition: 1.5, coupling: 2.0 };

/// Top blocks of one M. Measured on an asymmetric top (P ≈ 47, 1 ps pulse): at 0.3 K steps of 2/peak
/// (46 fs), 100 fs and 200 fs differ by 1.9e-7 and 3.3e-6 in every trace; at 1 K, 5/peak differs from
/// 3/peak by at most 2.0e-7 in every trace (0–400 ps) at 0.6 of the cost.
pub(crate) const TOP_STEP: StepRule = StepRule { transition: 1.5, coupling: 5.0 };

/// Tops in orienting fields (a static field makes its whole span one interval, so the splitting error
/// of the dipole coupling adds up over it). Measured on a prolate top at 3 K (40 kV/cm for 11 ps, a
/// 500 fs pulse inside): the tops' rule left 7e-6 in ⟨cosθ⟩ against 2 fs steps; this one stays below 1e-6.
pub(crate) const ORIENTED_STEP: StepRule = StepRule { transition: 0.6, coupling: 2.0 };

/// All-M chunks. Measured on SO2 at 1 K (two 300 fs pulses at 5e12 W/cm², elliptical and crossed):
/// steps of 3/fastest (56 fs) stay within 1.9e-7 of 10 fs steps in every trace, 1.5/fastest within
/// 1.3e-8 at twice the cost; 2e-7 is the accuracy the tops' default step keeps too.
pub(crate) const ALL_M_STEP: StepRule = StepRule { transition: 3.0, coupling: 5.0 };

/// Tops in a tilted static field (every J, K and M). Measured against an independent reference converged
/// to 1e-8 (tests/tilted_tops.rs): SO2 at 1 K (50 kV/cm at 30°, a 500 fs pulse at 2e12 W/cm²) is within
/// 2.4e-9 at 0.6/fastest, 2.6e-8 at 1.0, 1.5e-7 at 1.5 (0.4 of the cost of 0.6) and 2.0e-6 at 3; CH3F at
/// 2 K (a 300 fs pulse at 5e12 W/cm²) stays at 1.7e-6 from 1.0 up, where the envelope rule binds.
pub(crate) const TILTED_TOP_STEP: StepRule = StepRule { transition: 1.5, coupling: 2.0 };

impl StepRule {
    /// The step (ps) of a finite interval: `solver.step_fs` when set, else the rule with the shortest
    /// envelope time scale `shortest_ps`, the fastest transition `fastest` (rad/ps; 0 when only the
    /// block knows it, see [`StepRule::in_block`]) and the peak coupling rate `peak` (rad/ps).
    pub fn step_ps(&self, settings: &SolverSettings, shortest_ps: f64, fastest: f64, peak: f64) -> f64 {
        match settings.step_fs {
            Some(fs) => fs / 1000.0,
            None => (shortest_ps / 1.5).min(self.transition / fastest.max(1e-30)).min(self.coupling / peak.max(1e-30)),
        }
    }

    /// The schedule's step `step_ps` refined inside a block whose fastest transition is `fastest` rad/ps
    /// (unchanged when the user set `solver.step_fs`).
    pub fn in_block(&self, settings: &SolverSettings, step_ps: f64, fastest: f64) -> f64 {
        if settings.step_fs.is_some() { step_ps } else { step_ps.min(self.transition / fastest.max(1e-30)) }
    }
}

/// The sample times (ascending) walked along a schedule: each sample is taken exactly once, from the
/// field-free stretch before an event, at the start of a finite interval, inside it (strictly before
/// its end: a sample at the end belongs to the stretch after it), or after the last event.
pub(crate) struct SampleCursor<'a> {
    times: &'a [f64],
    next: usize,
}

impl<'a> SampleCursor<'a> {
    pub fn new(times: &'a [f64]) -> SampleCursor<'a> {
        SampleCursor { times, next: 0 }
    }

    /// Index of the next sample not yet taken.
    pub fn position(&self) -> usize {
        self.next
    }

    fn take_while(&mut self, keep: impl Fn(f64) -> bool) -> Range<usize> {
        let from = self.next;
        self.next += self.times[from..].partition_point(|&t| keep(t));
        from..self.next
    }

    /// Samples before an event starting at `start_ps` (the field-free stretch before it).
    pub fn before(&mut self, start_ps: f64) -> Range<usize> {
        self.take_while(|t| t < start_ps)
    }

    /// Samples exactly at the start `start_ps` of a finite interval.
    pub fn at(&mut self, start_ps: f64) -> Range<usize> {
        self.take_while(|t| t == start_ps)
    }

    /// Samples inside a finite interval ending at `end_ps`.
    pub fn inside(&mut self, end_ps: f64) -> Range<usize> {
        self.take_while(|t| t < end_ps)
    }

    /// The sample times of `range`.
    pub fn times(&self, range: Range<usize>) -> &'a [f64] {
        &self.times[range]
    }

    /// Every sample not yet taken (after the last event).
    pub fn rest(&mut self) -> Range<usize> {
        self.take_while(|_| true)
    }
}

/// What the walk needs to know of one element of a schedule.
pub(crate) trait Scheduled {
    /// (start, end) in ps; a kick or a switch has start = end.
    fn span(&self) -> (f64, f64);
    /// The largest step of a finite interval (None for a kick or a switch).
    fn finite_step(&self) -> Option<f64>;
    /// A static-field switch (already passed when it falls inside a finite interval stepped onto it).
    fn is_switch(&self) -> bool {
        false
    }
}

/// One symmetry reduction of the rotor (a block of basis states with its operators): what differs
/// between linear blocks, polar blocks, top blocks and all-M chunks. The walk along the schedule, the
/// sampling and the edge watch are [`walk`]'s.
pub(crate) trait Kernel {
    /// The schedule element the kernel reads.
    type Item: Scheduled;
    /// What a field-free (or static-field) stretch keeps of the state to evaluate its samples later.
    type Stretch;
    /// Number of observables a sample holds.
    fn observables(&self) -> usize;
    /// Field-free angular frequencies of the basis states, rad/ps (the free half of a finite step).
    fn omega(&self) -> &[f64];
    /// Largest population in the top levels of the basis, over the states.
    fn edge(&self, state: &BlockState) -> f64;
    /// The observables of `state` into `out` (length [`Kernel::observables`]).
    fn sample(&self, state: &BlockState, out: &mut [f64]);
    /// What a stretch starting at the state's time keeps.
    fn stretch(&self, state: &BlockState) -> Self::Stretch;
    /// Evolve from the state's time by `dt_ps` with no pulse, before element `index` of the schedule.
    fn free(&self, state: &mut BlockState, index: usize, dt_ps: f64);
    /// Apply a kick (or a switch) at the state's time.
    fn instant(&self, state: &mut BlockState, item: &Self::Item);
    /// exp(−i V(t) h) of the fields of finite interval `item` (element `index` of the schedule), at the
    /// midpoint `t` of a substep `h`.
    fn finite_kick(&self, index: usize, item: &Self::Item, state: &mut BlockState, t_ps: f64, h_ps: f64);
    /// Times inside a finite interval where its fields are not smooth (no step straddles them).
    fn breaks(&self, item: &Self::Item) -> Vec<f64>;
    /// The step of a finite interval in this basis, from the schedule's `step_ps`.
    fn step(&self, step_ps: f64) -> f64 {
        step_ps
    }
    /// True for kernels that take whole steps of a finite interval themselves ([`Kernel::own_step`])
    /// instead of the splitting's kicks between free half steps.
    fn steps_itself(&self) -> bool {
        false
    }
    /// One step of finite interval `item` (element `index` of the schedule) from the state's time, of at
    /// most `max_ps`; returns the length taken (the state's time has moved by it). Read only when
    /// [`Kernel::steps_itself`]; a kernel that steps itself overrides it (this default evolves without
    /// the interval's fields, so that a walk still ends).
    fn own_step(&self, index: usize, _item: &Self::Item, state: &mut BlockState, max_ps: f64) -> f64 {
        self.free(state, index, max_ps);
        max_ps
    }
}

/// The outcome of one [`walk`] with a basis that held the state.
pub(crate) struct Walked<S> {
    /// Samples taken directly inside finite intervals: `values[observable][sample]` (empty when the
    /// schedule has no sample inside one: blocks without pulses cost no trace-long buffer).
    pub values: Vec<Vec<f64>>,
    /// Field-free stretches with samples: (their samples, time of the kept state, what it keeps).
    pub stretches: Vec<(Range<usize>, f64, S)>,
    /// Samples after the last element (evaluated from the final state).
    pub rest: Range<usize>,
    /// The state after the last element.
    pub state: BlockState,
    /// Largest edge population met after an element (inside a pulse it is only checked against the tolerance).
    pub edge: f64,
}

/// Walk `state` along `items` (in time order) with `kernel`, sampling at `times` (ascending): free
/// evolution between elements, kicks, finite intervals stepped with samples on the way, stretches kept
/// for the samples between elements. Returns None as soon as the population at the basis edge exceeds
/// `tolerance` (after an element, or at a sample inside a pulse, where the rest of the pulse is skipped):
/// the caller grows the basis and walks again.
pub(crate) fn walk<K: Kernel>(kernel: &K, mut state: BlockState, items: &[K::Item], times: &[f64], tolerance: f64) -> Option<Walked<K::Stretch>> {
    let nobs = kernel.observables();
    let mut values: Vec<Vec<f64>> = vec![];
    let mut stretches = vec![];
    let mut cursor = SampleCursor::new(times);
    let mut edge: f64 = 0.0;
    let mut scratch = vec![0.0; nobs];
    for (index, item) in items.iter().enumerate() {
        let (s, e) = item.span();
        if item.is_switch() && s < state.t_ps {
            continue;
        }
        let gap = cursor.before(s);
        if !gap.is_empty() {
            stretches.push((gap, state.t_ps, kernel.stretch(&state)));
        }
        let dt = s - state.t_ps;
        if dt != 0.0 {
            kernel.free(&mut state, index, dt);
        }
        state.t_ps = s;
        match item.finite_step() {
            None => kernel.instant(&mut state, item),
            Some(step_ps) => {
                if values.is_empty() {
                    values = vec![vec![0.0; times.len()]; nobs];
                }
                for i in cursor.at(s) {
                    kernel.sample(&state, &mut scratch);
                    for (o, v) in scratch.iter().enumerate() {
                        values[o][i] = *v;
                    }
                }
                let inside = cursor.inside(e);
                let (base, stops) = (inside.start, cursor.times(inside));
                let breaks = kernel.breaks(item);
                // Once the edge fills at a sample inside the pulse, the rest of the pulse is skipped.
                let overflow = std::cell::Cell::new(false);
                let span = FiniteSpan { end_ps: e, max_step_ps: kernel.step(step_ps), stops, breaks: &breaks };
                let mut at_stop = |i: usize, st: &BlockState| {
                    if overflow.get() {
                        return;
                    }
                    if kernel.edge(st) > tolerance {
                        overflow.set(true);
                        return;
                    }
                    kernel.sample(st, &mut scratch);
                    for (o, v) in scratch.iter().enumerate() {
                        values[o][base + i] = *v;
                    }
                };
                if kernel.steps_itself() {
                    propagate_stepwise(
                        &mut state,
                        |st, max| {
                            if overflow.get() {
                                st.t_ps += max;
                                max
                            } else {
                                kernel.own_step(index, item, st, max)
                            }
                        },
                        span,
                        &mut at_stop,
                    );
                } else {
                    let mut kick = |st: &mut BlockState, t: f64, h: f64| {
                        if !overflow.get() {
                            kernel.finite_kick(index, item, st, t, h)
                        }
                    };
                    propagate_finite(&mut state, kernel.omega(), &mut kick, span, at_stop);
                }
                if overflow.get() {
                    return None;
                }
            }
        }
        edge = edge.max(kernel.edge(&state));
        if edge > tolerance {
            return None;
        }
    }
    let rest = cursor.rest();
    Some(Walked { values, stretches, rest, state, edge })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn growth_stops_at_the_cap_and_reports_beyond_it() {
        // Sizes tried: 10, 14, 18, 22, 27, 33 (a quarter, at least 4), then the cap.
        let mut tried = vec![];
        let r: Result<()> = grow_basis(
            10,
            36,
            |n| {
                tried.push(n);
                Ok(None)
            },
            || Error::Numerical("beyond".into()),
        );
        assert_eq!(tried, vec![10, 14, 18, 22, 27, 33, 36]);
        assert!(r.is_err());
        // A first size above the cap is clamped; success returns at once.
        assert_eq!(grow_basis(50, 36, |n| Ok(Some(n)), || Error::Numerical("x".into())).unwrap(), 36);
        assert_eq!(grow_basis(3, 36, |n| Ok((n >= 7).then_some(n)), || Error::Numerical("x".into())).unwrap(), 7);
    }

    #[test]
    fn every_sample_is_taken_once_and_one_at_an_interval_end_belongs_to_the_stretch_after_it() {
        let times = [0.0, 1.0, 2.0, 3.0, 4.0, 5.0];
        let mut c = SampleCursor::new(&times);
        assert_eq!(c.before(1.0), 0..1);
        assert_eq!(c.at(1.0), 1..2);
        assert_eq!(c.inside(3.0), 2..3);
        assert_eq!(c.before(3.5), 3..4, "the sample at the end (3.0) goes to the stretch after the interval");
        assert_eq!(c.at(3.5), 4..4);
        assert_eq!(c.inside(3.7), 4..4, "an interval without samples");
        assert_eq!(c.rest(), 4..6);
        assert_eq!(c.rest(), 6..6);
    }

    /// A finite interval [0, `end`] with steps of at most `step` (ps).
    struct Interval {
        end: f64,
        step: f64,
    }

    impl Scheduled for Interval {
        fn span(&self) -> (f64, f64) {
            (0.0, self.end)
        }
        fn finite_step(&self) -> Option<f64> {
            Some(self.step)
        }
    }

    /// Three levels without field-free motion; the pulse rotates level 0 into level 2 (the edge) by
    /// π/2 over the first half of the interval and back over the second: the population sits at the
    /// edge at mid-pulse and is back in level 0 at the end (exact: a rotation in one plane).
    struct Swing {
        end: f64,
    }

    impl Kernel for Swing {
        type Item = Interval;
        type Stretch = f64;
        fn observables(&self) -> usize {
            1
        }
        fn omega(&self) -> &[f64] {
            &[0.0, 0.0, 0.0]
        }
        fn edge(&self, st: &BlockState) -> f64 {
            st.psi[(2, 0)].powi(2) + st.psi[(2, 1)].powi(2)
        }
        fn sample(&self, st: &BlockState, out: &mut [f64]) {
            out[0] = self.edge(st);
        }
        fn stretch(&self, st: &BlockState) -> f64 {
            self.edge(st)
        }
        fn free(&self, _st: &mut BlockState, _index: usize, _dt: f64) {}
        fn instant(&self, _st: &mut BlockState, _item: &Interval) {}
        fn finite_kick(&self, _index: usize, _item: &Interval, st: &mut BlockState, t: f64, h: f64) {
            let rate = std::f64::consts::PI / self.end * if t < 0.5 * self.end { 1.0 } else { -1.0 };
            let (s, c) = (h * rate).sin_cos();
            for col in 0..2 {
                let (a, b) = (st.psi[(0, col)], st.psi[(2, col)]);
                st.psi[(0, col)] = c * a - s * b;
                st.psi[(2, col)] = s * a + c * b;
            }
        }
        fn breaks(&self, _item: &Interval) -> Vec<f64> {
            vec![0.5 * self.end]
        }
    }

    #[test]
    fn the_walk_watches_the_edge_inside_a_pulse_and_keeps_end_samples_for_the_stretch_after() {
        // Exact reference: a rotation by π/2 and back (common practice: a two-level rotation), so the
        // edge holds all the population at mid-pulse and none at the end.
        let kernel = Swing { end: 1.0 };
        let items = [Interval { end: 1.0, step: 0.05 }];
        let start = || BlockState::new(3, &[0], 0.0);
        // A sample at mid-pulse sees the edge full: the walk asks for a larger basis.
        assert!(walk(&kernel, start(), &items, &[0.25, 0.5], 1e-8).is_none());
        // Samples only at and after the end: the pulse is walked through, the edge after it is empty,
        // and the sample at the end belongs to the stretch after the pulse.
        let w = walk(&kernel, start(), &items, &[1.0, 2.0], 1e-8).expect("edge empty after the pulse");
        assert!(w.edge < 1e-24, "{}", w.edge);
        assert_eq!(w.rest, 0..2);
        assert!(w.stretches.is_empty());
        assert!((w.state.psi[(0, 0)].abs() - 1.0).abs() < 1e-12);
        // An empty schedule: every sample belongs to the stretch after it, from the initial state.
        let w = walk(&kernel, start(), &[], &[0.0, 3.0], 1e-8).expect("nothing to walk");
        assert_eq!((w.rest, w.values.len(), w.edge), (0..2, 0, 0.0));
        // A sample inside before the edge fills is taken there: sin²(π/4) = 1/2 at a quarter of the pulse.
        let w = walk(&kernel, start(), &items, &[0.25], 0.6).expect("edge at most 1/2 at the sample");
        assert!((w.values[0][0] - 0.5).abs() < 1e-12, "{}", w.values[0][0]);
    }

    #[test]
    fn step_rule_takes_the_finest_bound_and_a_user_step_wins() {
        let mut s = SolverSettings::default();
        // Envelope 30 fs → 20 fs; transition 1.5/(100 rad/ps) = 15 fs; coupling 2/(50 rad/ps) = 40 fs.
        assert!((LINEAR_STEP.step_ps(&s, 0.030, 100.0, 50.0) - 0.015).abs() < 1e-15);
        // No transition known yet (tops): the block refines it.
        let sched = TOP_STEP.step_ps(&s, 0.030, 0.0, 50.0);
        assert!((sched - 0.020).abs() < 1e-15);
        assert!((TOP_STEP.in_block(&s, sched, 150.0) - 0.010).abs() < 1e-15);
        s.step_fs = Some(7.0);
        assert_eq!(LINEAR_STEP.step_ps(&s, 0.030, 100.0, 50.0), 0.007);
        assert_eq!(ALL_M_STEP.in_block(&s, 0.007, 1e6), 0.007);
    }
}
