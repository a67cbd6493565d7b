//! Objectives shared by the tests that split designs (tests/shards.rs, tests/cluster.rs).

/// Two 50 fs pulses on N2 at 300 K, quick search (at most four starts; it stops once three agree).
pub const TWO_PULSES_QUICK: &str = r#"{"molecule": "N2", "temperature_k": 300,
 "pulses": {"count": 2, "shape": "gaussian", "fwhm_fs": 50, "delay_ps": {"min": 0.2, "max": 9.0},
            "peak_intensity_wcm2": {"min": 0, "max": 5e13}},
 "max_peak_intensity_wcm2": 5e13, "min_separation_ps": 0.2,
 "goal": {"kind": "peak", "observable": "cos2", "window_ps": [0.05, 9.0], "step_fs": 20},
 "search": {"seed": 3, "effort": "quick"}}"#;
