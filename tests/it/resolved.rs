//! The resolved plan as `check` prints it and as `manifest.json` records
//! it: plain words with units for people, typed JSON objects in SI for
//! scripts (docs/interface.md, `manifest.json`), checked against the
//! calibration of a synthetic campaign written by `curlew synth`.

use crate::util::{pipeline, write_frames, Units, Work, G};

/// The synthetic wake: 12 frames, 24 x 16 nodes, 8 phase bins, neighbour
/// correlation 0.25 written into its pipeline.
fn wake(w: &Work) {
    w.ok(&[
        "synth",
        "wake",
        "--out",
        "c",
        "--frames",
        "12",
        "--speeds",
        "0.2",
        "--seed",
        "4",
        "--nx",
        "24",
        "--ny",
        "16",
        "--phase-bins",
        "8",
        "--noise-correlation",
        "0.25",
    ]);
}

/// m/s per px of displacement: `pixel_size / pulse_separation` as the
/// synth pipeline states them (the run's pulse separation).
fn calibration(w: &Work) -> f64 {
    let text = std::fs::read_to_string(w.path("c/pipeline.toml")).unwrap();
    let t: toml::Value = toml::from_str(&text).unwrap();
    let px = t["input"]["pixel_size"].as_float().unwrap();
    let dt = t["run"][0]["input"]["pulse_separation"].as_float().unwrap();
    px / dt
}

/// The number just before `unit` after the first `key` in `text`:
/// `number_after("eps 0.005 m/s", "eps ", " m/s")` is 0.005.
#[track_caller]
fn number_after(text: &str, key: &str, unit: &str) -> f64 {
    let at = text
        .find(key)
        .unwrap_or_else(|| panic!("no {key:?} in {text}"))
        + key.len();
    let end = text[at..]
        .find(unit)
        .unwrap_or_else(|| panic!("no {unit:?} after {key:?}"))
        + at;
    text[at..end]
        .trim()
        .parse()
        .unwrap_or_else(|e| panic!("{:?}: {e}", &text[at..end]))
}

#[track_caller]
fn close(a: f64, b: f64, rel: f64, what: &str) {
    assert!((a - b).abs() <= rel * b.abs(), "{what}: {a:e} vs {b:e}");
}

#[test]
fn the_manifest_holds_the_resolved_stages_as_typed_si_values() {
    let w = Work::new();
    wake(&w);
    let cal = calibration(&w);
    w.ok(&["run", "c/pipeline.toml", "--out", "o", "--quiet"]);
    let text = std::fs::read_to_string(w.path("o/manifest.json")).unwrap();
    for debug in ["Params {", "Some(", "Fixed(", "LeastSquares", "Window("] {
        assert!(
            !text.contains(debug),
            "a Debug string {debug:?} in the manifest"
        );
    }
    let m: serde_json::Value = serde_json::from_str(&text).unwrap();
    let run = &m["runs"][0];
    let r = &run["resolved"];
    for key in [
        "input",
        "calibration_m_s_per_px",
        "validation",
        "fill",
        "derive",
        "stats",
    ] {
        assert!(
            r[key].is_object() || r[key].is_number(),
            "resolved.{key} is {}",
            r[key]
        );
    }
    close(
        r["calibration_m_s_per_px"].as_f64().unwrap(),
        cal,
        1e-12,
        "calibration",
    );
    resolved_stages_match_the_synth_pipeline(r, cal);
    // the same in words
    let words = &run["resolved_in_words"];
    let v = words["validation"].as_str().unwrap();
    assert!(
        v.contains("normalized median test (3 x 3, threshold 2, eps "),
        "{v}"
    );
    assert!(v.contains(" m/s = 0.1 px"), "{v}");
    close(
        number_after(v, "eps ", " m/s"),
        0.1 * cal,
        5e-3,
        "eps in words",
    );
    assert_eq!(
        words["derivatives"],
        "least squares, window 5, order 1; noise estimated per frame; \
         errors correlated as interrogation windows overlapping by 25 %; truncation estimated"
    );
}

#[test]
fn check_states_every_stage_in_words_with_units() {
    let w = Work::new();
    wake(&w);
    let cal = calibration(&w);
    let out = w.ok(&["check", "c/pipeline.toml"]);
    for debug in ["Params {", "Some(", "None", "Fixed(", "Csv", "{ "] {
        assert!(!out.contains(debug), "{debug:?} in check:\n{out}");
    }
    close(
        number_after(&out, "1 px of displacement = ", " m/s"),
        cal,
        1e-5,
        "calibration",
    );
    let line = |label: &str| -> String {
        out.lines()
            .find(|l| l.trim_start().starts_with(label))
            .unwrap_or_else(|| panic!("no {label:?} line in\n{out}"))
            .to_string()
    };
    assert!(line("units").contains("csv files; x, y in units of 0.001 m"));
    assert_eq!(
        line("validation").trim(),
        "validation    missing, NaN and flagged vectors marked invalid"
    );
    let med = line("then normalized median test");
    assert!(
        med.contains("(3 x 3, threshold 2, eps ")
            && med.contains(" m/s = 0.1 px, either component, at least 3 valid neighbours)"),
        "{med}"
    );
    close(number_after(&med, "eps ", " m/s"), 0.1 * cal, 5e-3, "eps");
    assert_eq!(
        line("fill").trim(),
        "fill          neighbour mean (holes up to 3 nodes from a valid vector; \
         farther ones stay empty; at least 2 neighbours with values)"
    );
    assert_eq!(line("smoothing").trim(), "smoothing     none");
    assert!(line("derivatives").contains(
        "least squares, window 5, order 1; noise estimated per frame; \
         errors correlated as interrogation windows overlapping by 25 %; truncation estimated"
    ));
    assert!(line("quantities").contains("omega, div, exx"));
    assert!(line("statistics").contains(
        "coverage 95 %, autocorrelation up to lag 50 frames, 8 phase bins when frames have \
         phases (each the whole 45°)"
    ));
}

/// Without a calibration and without eps, the median test's eps is each
/// frame's estimated noise: `check` says so and the manifest records the
/// factor (1) instead of an eps.
#[test]
fn without_a_calibration_eps_is_stated_as_the_frames_noise() {
    let w = Work::new();
    let g = G {
        nx: 10,
        ny: 8,
        h: 1e-3,
        x0: 0.0,
        y0: 0.0,
    };
    write_frames(&w.path("frames"), g, 3, Units::MmMs, |x, y, _| {
        (0.1 + 2.0 * y, -2.0 * x)
    });
    w.write(
        "p.toml",
        &pipeline(
            Units::MmMs,
            "[derivatives]\nscheme = \"central\"\n[statistics]\ncoverage = 0.9\n",
        ),
    );
    let out = w.ok(&["check", "p.toml"]);
    assert!(
        out.contains("eps = each frame's estimated noise (no calibration, no eps given)"),
        "{out}"
    );
    assert!(out.contains("calibration   none"), "{out}");
    assert!(out.contains("derivatives   central differences; noise estimated per frame; error correlation estimated from the data"), "{out}");
    assert!(out.contains("statistics    coverage 90 %"), "{out}");
    w.ok(&["run", "p.toml", "--out", "o", "--quiet"]);
    let m: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(w.path("o/manifest.json")).unwrap()).unwrap();
    let r = &m["runs"][0]["resolved"];
    assert_eq!(r["validation"]["median"]["eps_noise"].as_f64(), Some(1.0));
    assert!(r["calibration_m_s_per_px"].is_null());
    assert_eq!(
        r["derive"]["scheme"],
        serde_json::json!({"name": "central"})
    );
    assert_eq!(r["derive"]["correlation_from_data"], true);
    assert_eq!(r["stats"]["coverage"].as_f64(), Some(0.9));
}

/// The typed stages of the manifest (`resolved`) of synth's wake pipeline,
/// `cal` its calibration in m/s per pixel.
fn resolved_stages_match_the_synth_pipeline(r: &serde_json::Value, cal: f64) {
    // the median test: threshold 2, eps = 0.1 px in m/s (the default,
    // Westerweel & Scarano 2005's typical noise level; common practice)
    let med = &r["validation"]["median"];
    assert_eq!(med["threshold"].as_f64(), Some(2.0));
    close(med["eps"].as_f64().unwrap(), 0.1 * cal, 1e-12, "eps");
    assert!(med["eps_noise"].is_null(), "{med}");
    assert_eq!(med["radius"].as_u64(), Some(1));
    assert_eq!(med["combine"], "either");
    assert_eq!(med["min_neighbours"].as_u64(), Some(3));
    assert!(r["validation"]["limits"].is_null());
    // the fill
    assert_eq!(r["fill"]["method"], "neighbour-mean");
    assert_eq!(r["fill"]["max_distance"].as_u64(), Some(3));
    // the derivatives: the synth pipeline asks for least squares
    let d = &r["derive"];
    assert_eq!(
        d["scheme"],
        serde_json::json!({"name": "least-squares", "window": 5, "order": 1})
    );
    assert_eq!(d["velocity_noise"], "estimate");
    assert_eq!(
        d["correlation"],
        serde_json::json!({"model": "window", "overlap": 0.25})
    );
    assert_eq!(d["correlation_from_data"], false);
    assert_eq!(d["smoother"], serde_json::json!({"method": "none"}));
    assert_eq!(d["truncation"], true);
    // the statistics
    let s = &r["stats"];
    assert_eq!(s["coverage"].as_f64(), Some(0.95));
    assert_eq!(s["phase_bins"].as_u64(), Some(8));
    assert_eq!(s["max_lag"].as_u64(), Some(50));
    // the input, in SI factors
    assert_eq!(r["input"]["format"], "csv");
    close(
        r["input"]["length_scale"].as_f64().unwrap(),
        1e-3,
        1e-12,
        "mm",
    );
}
