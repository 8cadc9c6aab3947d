use super::*;

fn ctx(px: Option<f64>, scale: f64) -> ResolveCtx {
    ResolveCtx {
        velocity_scale: scale,
        px_velocity: px,
        length_scale: 1e-3,
    }
}

fn val(text: &str, c: &ResolveCtx) -> Result<validate::Params> {
    let raw: RawValidation = toml::from_str(text).map_err(|e| Error::usage(e.to_string()))?;
    resolve_validation(&raw, c)
}

#[test]
fn defaults_are_the_median_test_at_a_tenth_of_a_pixel() {
    // calibrated: 1 px = 0.05 m/s
    let p = val("", &ctx(Some(0.05), 1.0)).unwrap();
    let m = p.median.clone().unwrap();
    assert!((m.eps - 0.005).abs() < 1e-15);
    assert_eq!(
        (m.threshold, m.radius, m.combine, m.min_neighbours),
        (2.0, 1, Combine::Either, 3)
    );
    assert!(p.limits.is_none() && p.ensemble.is_none() && p.max_rejected_fraction.is_none());
    assert!(!p.needs_ensemble_pass());
    // Uncalibrated (issue 11 item 12): the 0.1 px default is never read as
    // 0.1 of the input unit; eps is each frame's estimated noise instead.
    let p = val("", &ctx(None, 1e-3)).unwrap();
    assert_eq!(p.median.as_ref().unwrap().eps_noise, Some(1.0));
    // given in the input unit (mm/s), it is used as given
    let p = val("median = { eps = 0.5 }", &ctx(None, 1e-3)).unwrap();
    let m = p.median.unwrap();
    assert!((m.eps - 5e-4).abs() < 1e-18 && m.eps_noise.is_none());
    // the ensemble floor has no data-based default before its pass: a usage
    // error that says what to give; with the floor given it resolves
    let e = val("ensemble = { k = 5.0 }", &ctx(None, 1.0)).unwrap_err();
    assert_eq!(e.exit_code(), 2);
    assert!(e.to_string().contains("ensemble.floor"), "{e}");
    let p = val("ensemble = { floor = 0.002 }", &ctx(None, 1.0)).unwrap();
    assert_eq!(p.ensemble.unwrap().floor, 0.002);
}

#[test]
fn a_full_chain_resolves_to_si() {
    let text = r#"
max_rejected_fraction = 0.3
median = { eps_px = 0.2, threshold = 2.5, radius = 2, combine = "magnitude" }
limits = { shape = "ellipse", u = [-100.0, 900.0], v = [-300.0, 300.0] }
ensemble = { k = 4.0, floor_px = 0.15 }
"#;
    // input in mm/s, calibration 1 px = 0.02 m/s
    let p = val(text, &ctx(Some(0.02), 1e-3)).unwrap();
    let m = p.median.as_ref().unwrap();
    assert!((m.eps - 0.004).abs() < 1e-15);
    assert_eq!(
        (m.radius, m.min_neighbours, m.combine),
        (2, 8, Combine::Magnitude)
    );
    let l = p.limits.as_ref().unwrap();
    assert_eq!(l.shape, Shape::Ellipse);
    match &l.bounds {
        Bounds::Given { u, v } => {
            assert!((u[0] + 0.1).abs() < 1e-15 && (u[1] - 0.9).abs() < 1e-15);
            assert!((v[1] - 0.3).abs() < 1e-15);
        }
        b => panic!("{b:?}"),
    }
    let e = p.ensemble.as_ref().unwrap();
    assert!((e.floor - 0.003).abs() < 1e-15 && e.k == 4.0 && e.min_samples == 10);
    assert!(p.needs_ensemble_pass());
    assert_eq!(p.max_rejected_fraction, Some(0.3));
    assert!((p.histogram_resolution - 0.0006).abs() < 1e-15);
}

#[test]
fn robust_limits_and_a_disabled_median_test() {
    let p = val(
        "median = { enabled = false }\nlimits = { spread = 6.0 }",
        &ctx(Some(0.05), 1.0),
    )
    .unwrap();
    assert!(p.median.is_none());
    assert!(p.needs_ensemble_pass());
    assert_eq!(
        p.limits.unwrap().bounds,
        Bounds::Robust {
            spread: 6.0,
            floor: 0.1 * 0.05
        }
    );
}

#[test]
fn bad_values_name_the_key_and_what_is_expected() {
    let c = ctx(None, 1.0);
    for (text, needle) in [
        ("median = { radius = 3 }", "median.radius = 3; expected 1"),
        (
            "median = { combine = \"both\" }",
            "\"either\" or \"magnitude\"",
        ),
        (
            "median = { eps_px = 0.1 }",
            "median.eps_px needs the calibration",
        ),
        ("median = { eps = 0.1, eps_px = 0.1 }", "not both"),
        ("median = { threshold = -1.0 }", "median.threshold = -1"),
        (
            "limits = { u = [1.0, 0.0], v = [0.0, 1.0] }",
            "limits.u = [1, 0]",
        ),
        ("limits = { u = [0.0, 1.0] }", "limits needs either"),
        (
            "limits = { shape = \"circle\", spread = 5.0 }",
            "\"box\" or \"ellipse\"",
        ),
        ("max_rejected_fraction = 1.5", "max_rejected_fraction = 1.5"),
        (
            "ensemble = { min_samples = 1, floor = 0.1 }",
            "ensemble.min_samples = 1",
        ),
        ("median = { thresold = 2.0 }", "thresold"),
    ] {
        let e = val(text, &c).unwrap_err();
        assert_eq!(e.exit_code(), 2, "{text}");
        assert!(e.to_string().contains(needle), "{text}: {e}");
    }
}

#[test]
fn fill_and_smoothing_sections() {
    let c = ctx(None, 1.0);
    let f: RawFill =
        toml::from_str("method = \"inpaint\"\niterations = 80\nmax_distance = 5").unwrap();
    let p = resolve_fill(&f, &c).unwrap();
    assert_eq!(
        p,
        fill::Params {
            method: fill::Method::Inpaint,
            max_distance: Some(5),
            min_neighbours: 2,
            inpaint_iterations: 80
        }
    );
    assert_eq!(
        resolve_fill(&RawFill::default(), &c).unwrap(),
        fill::Params::default()
    );
    let bad: RawFill = toml::from_str("method = \"nearest\"").unwrap();
    assert!(resolve_fill(&bad, &c)
        .unwrap_err()
        .to_string()
        .contains("\"neighbour-mean\" or \"inpaint\""));
    let bad: RawFill = toml::from_str("iterations = 10").unwrap();
    assert!(resolve_fill(&bad, &c)
        .unwrap_err()
        .to_string()
        .contains("inpaint"));

    let s = |t: &str| resolve_smoothing(&toml::from_str(t).unwrap(), &c);
    assert_eq!(s("").unwrap(), Smoother::None);
    assert_eq!(
        s("method = \"gaussian\"\nsigma = 1.5").unwrap(),
        Smoother::gaussian(1.5)
    );
    assert_eq!(
        s("method = \"savitzky-golay\"\nhalf_width = 3\norder = 3").unwrap(),
        Smoother::savitzky_golay(3, 3)
    );
    assert_eq!(
        s("method = \"pls\"").unwrap(),
        Smoother::Pls {
            s: None,
            robust: false
        }
    );
    assert_eq!(
        s("method = \"pls\"\ns = 4.0\nrobust = true").unwrap(),
        Smoother::Pls {
            s: Some(4.0),
            robust: true
        }
    );
    let e = s("method = \"gaussian\"\norder = 2")
        .unwrap_err()
        .to_string();
    assert!(
        e.contains("order does not apply to method = \"gaussian\""),
        "{e}"
    );
    let e = s("method = \"savitzky-golay\"\nhalf_width = 1\norder = 3")
        .unwrap_err()
        .to_string();
    assert!(e.contains("order at most 2 half_width"), "{e}");
    let e = s("method = \"median\"").unwrap_err().to_string();
    assert!(e.contains("\"savitzky-golay\""), "{e}");
}

#[test]
fn the_whole_pipeline_accepts_the_sections_and_rejects_unknown_keys_with_a_line() {
    let text = r#"
[campaign]
name = "t"

[input]
velocity_unit = "px"
pixel_size = 1e-5
pulse_separation = 1e-4

[validation]
median = { threshold = 2.0 }
ensemble = { k = 5.0 }

[fill]
method = "neighbour-mean"

[smoothing]
method = "gaussian"
sigma = 1.0

[[run]]
id = "a"
frames = "x/*.csv"
"#;
    let p = crate::plan::Plan::from_str(text, std::path::Path::new("p.toml")).unwrap();
    let v = &p.runs[0].validation;
    assert!((v.median.as_ref().unwrap().eps - 0.01).abs() < 1e-15); // 0.1 px x 0.1 m/s per px
    assert!(v.ensemble.is_some());
    let bad = text.replace("method = \"neighbour-mean\"", "methd = \"neighbour-mean\"");
    let e = crate::plan::Plan::from_str(&bad, std::path::Path::new("p.toml")).unwrap_err();
    assert_eq!(e.exit_code(), 2);
    assert!(e.message.contains("methd"), "{e}");
    assert_eq!(e.line, Some(15), "{e}");
}
