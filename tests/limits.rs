//! Checks of `limits`: the map's designs behave as designs must (scores rise with the ceiling and the
//! count, each replays through `simulate` to its row's score), a one-ceiling map equals `design` run on
//! the objective a user would write for it, and the bound is never passed — neither by the designs nor
//! by random trains scored by the solver (which shares no code with the bound).

use kicktrain::design::Objective;
use kicktrain::design::search::{Silent, design, evaluate_kick_many};
use kicktrain::field::{FieldModel, Pulse};
use kicktrain::limits::bound::BoundTable;
use kicktrain::limits::{LimitsPlan, Quiet, limits};
use rand::{Rng, SeedableRng};

/// Nitrogen at 300 K, 50 fs pulses, peak ⟨cos²θ⟩ after the last pulse (a quick search).
const NITROGEN: &str = r#"{
  "molecule": "N2", "temperature_k": 300,
  "pulses": {"count": 2, "fwhm_fs": 50, "delay_ps": {"min": 0.2, "max": 9.0}, "peak_intensity_wcm2": {"min": 0, "max": 4e13}},
  "max_peak_intensity_wcm2": 4e13, "min_separation_ps": 0.2,
  "goal": {"kind": "peak", "observable": "cos2", "window_ps": [0.05, 9.0], "step_fs": 20},
  "search": {"seed": 5, "effort": "quick"}
}"#;

#[test]
fn a_map_rises_with_ceiling_and_count_replays_and_stays_under_its_bound() {
    let obj = Objective::from_json_str(NITROGEN, "test").unwrap();
    let plan = LimitsPlan { max_count: 2, ceilings_wcm2: vec![4e13, 2e13], temperatures_k: vec![], durations_fs: vec![] };
    let map = limits(&obj, &plan, &Quiet).unwrap();
    assert_eq!(map.ceilings_wcm2, vec![2e13, 4e13], "ceilings sorted");
    assert_eq!(map.cells.len(), 4);
    assert!(!map.interrupted && map.no_bound.is_none());
    let tol = obj.search.agreement;
    for n in 1..=2 {
        let (lo, hi) = (map.cell(0, 0, n).unwrap(), map.cell(0, 1, n).unwrap());
        assert!(hi.design.full.value >= lo.design.full.value - tol, "count {n}: {} at 4e13 < {} at 2e13", hi.design.full.value, lo.design.full.value);
    }
    for ci in 0..2 {
        for n in 1..2 {
            let (a, b) = (map.cell(0, ci, n).unwrap(), map.cell(0, ci, n + 1).unwrap());
            assert!(
                b.design.full.value >= a.design.full.value - tol,
                "ceiling {ci}: {} pulses {} < {} pulses {}",
                n + 1,
                b.design.full.value,
                n,
                a.design.full.value
            );
        }
    }
    for c in &map.cells {
        // Every pulse within its ceiling, and the row replays through `simulate` to its score.
        assert_eq!(c.design.field.pulses.len(), c.count);
        assert!(c.design.field.pulses.iter().all(|p| p.peak_intensity_wcm2 <= c.ceiling_wcm2 * (1.0 + 1e-12)));
        let row_obj = kicktrain::limits::objective_for(&obj, map.settings[0], c.ceiling_wcm2, c.count).unwrap();
        let mut scenario = row_obj.scenario_for(&c.design.field);
        scenario.goal = Some(row_obj.goal);
        let replay = kicktrain::design::score::simulate_scored(&scenario, Default::default()).unwrap().goal_score.unwrap();
        assert!((replay.value - c.design.full.value).abs() < 1e-9, "replay {} vs row {}", replay.value, c.design.full.value);
        // The bound of the row's own count is never passed.
        let ci = map.ceilings_wcm2.iter().position(|&x| x == c.ceiling_wcm2).unwrap();
        let b = map.bound(0, ci, c.count).unwrap();
        assert!(b.value >= c.design.full.value, "bound {} below design {}", b.value, c.design.full.value);
        assert!(b.value < 1.0, "a bound of 1 says nothing");
    }
    // The bound grows with the allowed kick (count and ceiling).
    assert!(map.bound(0, 1, 2).unwrap().value > map.bound(0, 0, 1).unwrap().value);
}

#[test]
fn a_one_ceiling_map_equals_design_on_the_objective_written_for_it() {
    // The same problem written by hand as an objective with "max_count": 2 at the map's ceiling.
    let obj = Objective::from_json_str(NITROGEN, "test").unwrap();
    let plan = LimitsPlan { max_count: 2, ceilings_wcm2: vec![3e13], temperatures_k: vec![], durations_fs: vec![] };
    let map = limits(&obj, &plan, &Quiet).unwrap();
    let by_hand = NITROGEN.replace("\"count\": 2", "\"max_count\": 2").replace("4e13", "3e13");
    let r = design(&Objective::from_json_str(&by_hand, "by hand").unwrap(), &Silent).unwrap();
    assert_eq!(r.per_count.len(), 2);
    for (n, cand) in r.per_count.iter().enumerate() {
        let cell = map.cell(0, 0, n + 1).unwrap();
        assert_eq!(cell.design, *cand, "count {}", n + 1);
        assert_eq!(cell.confidence, r.confidence[n]);
    }
}

#[test]
fn random_trains_never_pass_the_bound() {
    // Random trains of up to four 50 fs pulses (kick model: the solver's exact kicks and free evolution),
    // at 300 K and at 5 K, scored at many times after the last pulse.
    let mut rng = rand::rngs::StdRng::seed_from_u64(3);
    for (t, ceiling) in [(300.0, 6e13), (5.0, 2e13)] {
        let text = NITROGEN.replace("\"temperature_k\": 300", &format!("\"temperature_k\": {t}")).replace("4e13", &format!("{ceiling:e}"));
        let mut obj = Objective::from_json_str(&text, "test").unwrap();
        obj.goal.window_ps = (0.0, 30.0);
        let table = BoundTable::new(obj.molecule(), t).unwrap();
        let n2 = obj.molecule().clone();
        for count in 1..=4usize {
            let fields: Vec<FieldModel> = (0..40)
                .map(|_| {
                    let mut at = 0.0;
                    let pulses = (0..count)
                        .map(|k| {
                            if k > 0 {
                                at += rng.random_range(0.2..9.0);
                            }
                            Pulse::gaussian(at, 50.0, ceiling * rng.random_range(0.3..=1.0))
                        })
                        .collect();
                    FieldModel { pulses, ..Default::default() }
                })
                .collect();
            let scores = evaluate_kick_many(&obj, &fields).unwrap();
            let p = Pulse::gaussian(0.0, 50.0, ceiling).kick_strength(n2.delta_alpha_a3());
            let b = table.bound(p * count as f64, true).unwrap();
            let best = scores.iter().map(|s| s.value).fold(0.0, f64::max);
            assert!(best <= b.value, "{t} K, {count} pulses: a random train reached {best} above the bound {}", b.value);
            // The lower bound (anti-alignment) likewise.
            let lower = table.bound(p * count as f64, false).unwrap();
            assert!(lower.value < 1.0 / 3.0 && lower.value >= 0.0);
        }
    }
}
