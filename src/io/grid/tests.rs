//! Tests of `grid` (moved out of grid.rs to keep it under 600 lines).

use super::*;

/// The run-wise lookup gives the set a sort and dedup give, on
/// row-ordered files with missing rows, shuffled and descending ones.
#[test]
fn distinct_values_equal_sort_and_dedup() {
    use rand::seq::SliceRandom;
    use rand::Rng;
    let mut r = crate::testutil::rng(3);
    let reference = |v: &[f64]| {
        let mut s = v.to_vec();
        s.sort_unstable_by(f64::total_cmp);
        s.dedup();
        s
    };
    for trial in 0..200 {
        let (nx, ny) = (r.random_range(1..40), r.random_range(1..30));
        let mut xs = Vec::new();
        for _ in 0..ny {
            for i in 0..nx {
                if r.random::<f64>() > 0.1 {
                    xs.push(0.75 * i as f64 + if trial % 7 == 0 { 0.3 } else { 0.0 });
                }
            }
        }
        if trial % 5 == 1 {
            xs.shuffle(&mut r);
        }
        if trial % 5 == 2 {
            xs.reverse();
        }
        let mut got = distinct_sorted(&xs);
        got.dedup();
        assert_eq!(got, reference(&xs), "trial {trial}");
    }
}

#[test]
fn exact_coordinates_give_the_exact_line() {
    let xs: Vec<f64> = (0..10).map(|i| 2.5 + 0.5 * i as f64).collect();
    let a = infer_axis(&xs, 0.05).unwrap();
    assert_eq!(
        a,
        Axis {
            origin: 2.5,
            pitch: 0.5,
            n: 10
        }
    );
}

#[test]
fn two_decimal_rounding_of_a_third_mm_pitch() {
    // Pitch 1/3 mm printed with 2 decimals: rounding up to 0.005 mm,
    // 1.5 % of the pitch. The fitted pitch is exact to far better than
    // the rounding (expected error ~ 0.0029 * sqrt(12/128^3) mm).
    let xs: Vec<f64> = (0..128)
        .map(|i| ((10.0 + i as f64 / 3.0) * 100.0).round() / 100.0)
        .collect();
    let a = infer_axis(&xs, 0.05).unwrap();
    assert_eq!(a.n, 128);
    assert!(
        (a.pitch - 1.0 / 3.0).abs() < 1e-4 / 3.0,
        "pitch {}",
        a.pitch
    );
    assert!((a.origin - 10.0).abs() < 2e-3, "origin {}", a.origin);
}

#[test]
fn missing_columns_and_descending_order() {
    // Columns 3, 4 and 7 missing, values given in descending order.
    let xs: Vec<f64> = [9, 8, 6, 5, 2, 1, 0]
        .iter()
        .map(|&i| -4.0 + 0.25 * i as f64)
        .collect();
    let a = infer_axis(&xs, 0.05).unwrap();
    assert_eq!(
        a,
        Axis {
            origin: -4.0,
            pitch: 0.25,
            n: 10
        }
    );
}

#[test]
fn jittered_copies_merge_into_one_node() {
    let mut xs = Vec::new();
    for i in 0..20 {
        for k in 0..3 {
            xs.push(i as f64 * 2.0 + (k as f64 - 1.0) * 1e-3);
        }
    }
    let a = infer_axis(&xs, 0.05).unwrap();
    assert_eq!(a.n, 20);
    assert!(
        (a.pitch - 2.0).abs() < 1e-9 && a.origin.abs() < 1e-9,
        "{a:?}"
    );
}

#[test]
fn a_stray_row_far_away_is_refused_not_allocated() {
    let mut rows = RawRows::default();
    for j in 0..4 {
        for i in 0..4 {
            rows.x.push(i as f64);
            rows.y.push(j as f64);
            rows.line.push(rows.line.len() + 2);
        }
    }
    rows.x.push(1e9);
    rows.y.push(0.0);
    rows.line.push(99);
    let e = infer_grid(&rows, 0.05).unwrap_err();
    assert_eq!(e.line, Some(99), "{e}");
    assert!(e.message.contains("x = 1e9 lies 1e9 pitches (1)"), "{e}");
    // A stray just inside the per-axis bound still makes too big a grid.
    *rows.x.last_mut().unwrap() = 150.0;
    let e = infer_grid(&rows, 0.05).unwrap_err().to_string();
    assert!(e.contains("151 x 4 grid but only 17 nodes"), "{e}");
}

#[test]
fn huge_and_subnormal_coordinates_are_errors_not_panics() {
    for stray in [1e20, 1e300, f64::MAX] {
        let xs = [0.0, 1.0, 2.0, stray];
        assert!(
            matches!(infer_axis(&xs, 0.05), Err(AxisError::Stray { .. })),
            "{stray}"
        );
    }
    let tiny: Vec<f64> = (0..4).map(|i| i as f64 * 5e-324).collect();
    assert!(matches!(
        infer_axis(&tiny, 0.05),
        Err(AxisError::Unresolved { .. })
    ));
    let big: Vec<f64> = (0..4).map(|i| 1e20 + i as f64 * 1e6).collect();
    assert!(matches!(
        infer_axis(&big, 0.05),
        Err(AxisError::Unresolved { .. })
    ));
    assert_eq!(sig6(1e300), "1e300");
    assert_eq!(sig6(-2.5e-9), "-2.5e-9");
    assert_eq!(sig6(0.123456789), "0.123457");
}

#[test]
fn an_off_grid_value_is_named() {
    let xs = [0.0, 1.0, 2.0, 3.5, 4.5, 5.5];
    match infer_axis(&xs, 0.05) {
        Err(AxisError::Irregular { value, .. }) => assert_eq!(value, 3.5),
        other => panic!("expected irregular, got {other:?}"),
    }
    assert_eq!(infer_axis(&[1.0, 1.0], 0.05), Err(AxisError::TooFew(1)));
}
