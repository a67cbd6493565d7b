//! Outputs of parameter scans and tolerance runs: the lines the command line prints, the CSV tables and
//! SVG plots it writes (`scan.csv`, `scan.svg`, `tolerance.csv`, `tolerance.svg`) and the note of a run
//! stopped early (`PARTIAL.txt`).

use super::svg;
use crate::goal::Goal;
use crate::scan::{Metric, ScanResult};
use crate::tolerance::{Noise, ToleranceResult};

/// What a scan reports at each point, in words.
pub fn metric_label(metric: Metric) -> &'static str {
    match metric {
        Metric::Goal => "goal score",
        Metric::PeakCos2 => "peak ⟨cos²θ⟩ after the last pulse",
    }
}

/// Number of points a scan was asked for.
fn scan_total(r: &ScanResult) -> usize {
    r.x.values.len() * r.y.as_ref().map(|a| a.values.len()).unwrap_or(1)
}

/// "partial: stopped by a signal after n of N points" when the scan was stopped before its end.
pub fn scan_partial(r: &ScanResult) -> Option<String> {
    r.partial().then(|| format!("partial: stopped by a signal after {} of {} points", r.finished(), scan_total(r)))
}

/// The best finished point: (value, x index, y index); None when no finished point is above −∞.
pub fn scan_best(r: &ScanResult) -> Option<(f64, usize, usize)> {
    let mut best = None;
    for (iy, row) in r.values.iter().enumerate() {
        for (ix, v) in row.iter().enumerate() {
            if *v > best.map_or(f64::NEG_INFINITY, |b: (f64, usize, usize)| b.0) && r.done[iy][ix] {
                best = Some((*v, ix, iy));
            }
        }
    }
    best
}

/// The line a scan prints: points, time (`seconds`), the best value and where it is.
pub fn scan_summary(r: &ScanResult, seconds: f64) -> String {
    let (value, ix, iy) = scan_best(r).unwrap_or((f64::NEG_INFINITY, 0, 0));
    format!(
        "{} points in {:.2} s; {}: best {:.5} at {} = {}{}\n",
        r.finished(),
        seconds,
        metric_label(r.metric),
        value,
        r.x.path,
        r.x.values[ix],
        r.y.as_ref().map(|a| format!(", {} = {}", a.path, a.values[iy])).unwrap_or_default()
    )
}

/// `scan.csv`: one row per finished point, the scanned values then the value.
pub fn scan_csv(r: &ScanResult) -> String {
    let xa = &r.x;
    let mut csv = format!("{}{},value\n", xa.path, r.y.as_ref().map(|a| format!(",{}", a.path)).unwrap_or_default());
    for (iy, row) in r.values.iter().enumerate() {
        for (ix, v) in row.iter().enumerate().filter(|(ix, _)| r.done[iy][*ix]) {
            match &r.y {
                Some(a) => csv.push_str(&format!("{},{},{:.10}\n", xa.values[ix], a.values[iy], v)),
                None => csv.push_str(&format!("{},{:.10}\n", xa.values[ix], v)),
            }
        }
    }
    csv
}

/// `scan.svg`: a line (1D) or a heatmap (2D), subtitled with `partial` (see [`scan_partial`]) and, when an
/// intensity, energy or field is scanned, the laser-safety caution.
pub fn scan_svg(r: &ScanResult, partial: Option<&str>) -> String {
    let (xa, ya) = (&r.x, &r.y);
    let label = metric_label(r.metric);
    // A scanned intensity, energy or field puts the laser-safety caution on the plot.
    let states_laser = |p: &str| ["intensity", "_wcm2", "energy_mj", "_kv_cm", "field"].iter().any(|k| p.contains(k));
    let caution = (states_laser(&xa.path) || ya.as_ref().is_some_and(|a| states_laser(&a.path))).then(|| super::LASER_SAFETY_SHORT.to_string());
    let caution = match (partial, caution) {
        (Some(p), Some(c)) => Some(format!("{p}; {c}")),
        (Some(p), None) => Some(p.to_string()),
        (None, c) => c,
    };
    match ya {
        Some(a) => {
            let mut h = svg::Heatmap::new(format!("Scan of {label}"), xa.label(), a.label(), label, xa.values.clone(), a.values.clone(), r.values.clone());
            h.subtitle = caution;
            h.to_svg()
        }
        None => {
            let mut p = svg::LinePlot::new(format!("Scan of {label}"), xa.label(), label);
            p.subtitle = caution;
            p.series.push(svg::Series {
                label: String::new(),
                x: xa.values.clone(),
                y: r.values[0].clone(),
                color: svg::ALIGNMENT.into(),
                dashed: false,
                width: 1.8,
            });
            p.to_svg()
        }
    }
}

/// `PARTIAL.txt` of a stopped scan.
pub fn scan_partial_note(partial: &str) -> String {
    format!("{partial}; scan.csv holds the finished points, scan.svg leaves the others blank.\n")
}

/// "partial: stopped by a signal after n of N samples" when the tolerance run was stopped before its end.
pub fn tolerance_partial(r: &ToleranceResult) -> Option<String> {
    (r.samples.len() < r.requested).then(|| format!("partial: stopped by a signal after {} of {} samples", r.samples.len(), r.requested))
}

/// The two lines a tolerance run prints: the goal, nominal score and noise; the statistics and time (`seconds`).
pub fn tolerance_summary(goal: &Goal, noise: Noise, seed: u64, r: &ToleranceResult, seconds: f64) -> String {
    format!(
        "{} of {}: nominal {:.5}; with jitter {} fs, energy noise {} %, phase noise {} rad ({} samples, seed {seed}):\n  \
         mean {:.5}, spread (rms) {:.5}, worst decile {:.5}; {:.2} s\n",
        goal.kind_name(),
        goal.observable.name(),
        r.nominal,
        noise.jitter_fs,
        noise.energy_percent,
        noise.phase_rad,
        r.samples.len(),
        r.mean,
        r.spread,
        r.worst_decile,
        seconds
    )
}

/// `tolerance.csv`: the score of each finished sample.
pub fn tolerance_csv(r: &ToleranceResult) -> String {
    let mut csv = String::from("sample,score\n");
    for (i, v) in r.sample_index.iter().zip(&r.samples) {
        csv.push_str(&format!("{i},{v:.10}\n"));
    }
    csv
}

/// `tolerance.svg`: a histogram of the scores with the nominal score and the worst decile marked.
pub fn tolerance_svg(goal: &Goal, noise: Noise, r: &ToleranceResult) -> String {
    let mut h = svg::Histogram::new(
        format!("Score under jitter {} fs, energy noise {} %", noise.jitter_fs, noise.energy_percent),
        format!("{} {}", goal.kind_name(), goal.observable.name()),
        r.samples.clone(),
        0,
    );
    h.markers.push(svg::Marker { x0: r.nominal, x1: r.nominal, label: "nominal".into(), color: svg::PULSE.into() });
    h.markers.push(svg::Marker { x0: r.worst_decile, x1: r.worst_decile, label: "worst decile".into(), color: svg::NEUTRAL.into() });
    h.to_svg()
}

/// `PARTIAL.txt` of a stopped tolerance run.
pub fn tolerance_partial_note(partial: &str) -> String {
    format!("{partial}; tolerance.csv and tolerance.svg cover the finished samples.\n")
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::scan::Axis;

    fn result(y: bool) -> ScanResult {
        let x = Axis::linear("pulses[0].peak_intensity_wcm2", 1e13, 3e13, 3).unwrap();
        let y = y.then(|| Axis::linear("temperature_k", 100.0, 200.0, 2).unwrap());
        let rows = if y.is_some() { 2 } else { 1 };
        let mut values = vec![vec![0.4, 0.6, 0.5]; rows];
        let mut done = vec![vec![true; 3]; rows];
        if rows == 2 {
            values[1] = vec![0.7, 0.9, f64::NAN];
            done[1][2] = false;
        }
        ScanResult { x, y, metric: Metric::PeakCos2, values, done }
    }

    #[test]
    fn best_point_csv_and_partial_note() {
        let one = result(false);
        assert_eq!(scan_best(&one), Some((0.6, 1, 0)));
        assert_eq!(scan_partial(&one), None);
        assert_eq!(
            scan_csv(&one),
            "pulses[0].peak_intensity_wcm2,value\n10000000000000,0.4000000000\n20000000000000,0.6000000000\n30000000000000,0.5000000000\n"
        );
        let two = result(true);
        assert_eq!(scan_best(&two), Some((0.9, 1, 1)));
        assert_eq!(scan_partial(&two).as_deref(), Some("partial: stopped by a signal after 5 of 6 points"));
        let csv = scan_csv(&two);
        assert!(csv.starts_with("pulses[0].peak_intensity_wcm2,temperature_k,value\n") && csv.lines().count() == 6, "{csv}");
        assert_eq!(
            scan_summary(&two, 1.234),
            "5 points in 1.23 s; peak ⟨cos²θ⟩ after the last pulse: best 0.90000 at pulses[0].peak_intensity_wcm2 = 20000000000000, temperature_k = 200\n"
        );
        // No finished point: the summary still names the first point.
        let none = ScanResult { done: vec![vec![false; 3]], ..one };
        assert_eq!(scan_best(&none), None);
        assert!(scan_summary(&none, 0.0).contains("best -inf at pulses[0].peak_intensity_wcm2 = 10000000000000"));
    }
}
