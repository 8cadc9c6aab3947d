//! Checks of the normalized median test (Westerweel & Scarano 2005): its
//! sorting networks against a plain sort, the methods check values of the
//! residual, and hand-made fields for the neighbourhood rules.

use super::*;
use crate::field::FILLED;
use crate::testutil::{assert_close, grid};

/// docs/methods.md check values (derived): neighbours 1..8, eps 0.1:
/// Um = 4.5, rm = 2.0; U0 = 9.0 gives r0 = 2.142857, U0 = 8.5 gives
/// 1.904762; eight equal neighbours 1.0 and U0 = 1.5 give r0 = 5.
/// The 0-1 principle (Knuth, TAOCP vol. 3, 5.3.4): a comparator network
/// sorts every input if it sorts all 2^8 inputs of zeros and ones.
#[test]
fn the_eight_input_network_sorts_and_selection_gives_medians() {
    for bits in 0u32..256 {
        let mut a: Vec<f64> = (0..8).map(|b| ((bits >> b) & 1) as f64).collect();
        median_small(&mut a);
        assert!(a.windows(2).all(|w| w[0] <= w[1]), "{bits:08b}: {a:?}");
    }
    // padded: fewer than 8 values come back sorted too
    let mut a = [3.0, -1.0, 2.0, 0.5, 7.0];
    assert_eq!(median_small(&mut a), 2.0);
    assert_eq!(a, [-1.0, 0.5, 2.0, 3.0, 7.0]);
    // other counts against the one median of the crate (crate::robust),
    // bit for bit
    let mut r = crate::testutil::rng(9);
    for n in 1..=24 {
        let v: Vec<f64> = (0..n)
            .map(|_| rand::Rng::random_range(&mut r, -5.0..5.0))
            .collect();
        let want = crate::robust::median(&mut v.clone());
        assert_eq!(median_small(&mut v.clone()), want, "n {n}");
    }
}

#[test]
fn methods_check_values_of_the_normalized_residual() {
    let mut nb = [8.0, 3.0, 1.0, 6.0, 2.0, 7.0, 5.0, 4.0];
    assert_close(
        normalized_residual(9.0, &mut nb, 0.1),
        4.5 / 2.1,
        1e-12,
        0.0,
        "U0 = 9",
    );
    let mut nb = [8.0, 3.0, 1.0, 6.0, 2.0, 7.0, 5.0, 4.0];
    assert_close(
        normalized_residual(9.0, &mut nb, 0.1),
        2.142857,
        1e-6,
        0.0,
        "U0 = 9 rounded",
    );
    let mut nb = [8.0, 3.0, 1.0, 6.0, 2.0, 7.0, 5.0, 4.0];
    assert_close(
        normalized_residual(8.5, &mut nb, 0.1),
        1.904762,
        1e-6,
        0.0,
        "U0 = 8.5",
    );
    let mut nb = [1.0; 8];
    assert_close(
        normalized_residual(1.5, &mut nb, 0.1),
        5.0,
        1e-12,
        0.0,
        "equal neighbours",
    );
}

/// A 3x3 field whose centre has the docs/methods.md neighbourhood in u (and
/// a constant v), judged with both combination rules.
fn centre_case(u0: f64, v_nb: [f64; 8], v0: f64, combine: Combine) -> bool {
    let mut f = Field::from_fn(grid(3, 3, 1.0), |_, _| (0.0, 0.0));
    let us = [1.0, 2.0, 3.0, 4.0, 5.0, 6.0, 7.0, 8.0];
    let mut n = 0;
    for j in 0..3 {
        for i in 0..3 {
            if (j, i) == (1, 1) {
                f.u[[1, 1]] = u0;
                f.v[[1, 1]] = v0;
            } else {
                f.u[[j, i]] = us[n];
                f.v[[j, i]] = v_nb[n];
                n += 1;
            }
        }
    }
    // only the centre has 8 neighbours; corners/edges have 3-5 and are
    // tested too, so look at the centre's status alone
    let p = MedianParams {
        eps: 0.1,
        min_neighbours: 8,
        combine,
        ..MedianParams::default()
    };
    apply(&p, &mut f);
    f.status[[1, 1]] == REPLACED
}

/// The paired kernel against the crate's one median of each component
/// (crate::robust, numpy's convention: mean of the two middle values
/// when even), bit for bit.
#[test]
fn the_paired_network_equals_a_sort_per_component() {
    fn med(mut v: Vec<f64>) -> f64 {
        crate::robust::median(&mut v)
    }
    fn r0(c: f64, nb: &[f64], eps: f64) -> f64 {
        let m = med(nb.to_vec());
        let rm = med(nb.iter().map(|x| (x - m).abs()).collect());
        (c - m).abs() / (rm + eps)
    }
    let mut r = crate::testutil::rng(17);
    for trial in 0..2000 {
        let n = 1 + trial % 8;
        let u: Vec<f64> = (0..n)
            .map(|_| rand::Rng::random_range(&mut r, -3.0..3.0))
            .collect();
        let v: Vec<f64> = (0..n)
            .map(|_| rand::Rng::random_range(&mut r, -3.0..3.0))
            .collect();
        let (cu, cv) = (rand::Rng::random_range(&mut r, -6.0..6.0), 0.5);
        let mut b = [Pair::splat(f64::INFINITY); 8];
        for q in 0..n {
            b[q] = Pair::new(u[q], v[q]);
        }
        let [ru, rv] = residual_pair8(Pair::new(cu, cv), &mut b, n, 0.1);
        assert_eq!(ru, r0(cu, &u, 0.1), "u, n {n}");
        assert_eq!(rv, r0(cv, &v, 0.1), "v, n {n}");
    }
}

#[test]
fn both_combination_rules_on_the_methods_check_values() {
    let flat = [0.0; 8];
    // u alone: r0u = 2.142857 > 2 rejects under both rules (rv = 0)
    assert!(centre_case(9.0, flat, 0.0, Combine::Either));
    assert!(centre_case(9.0, flat, 0.0, Combine::Magnitude));
    // r0u = 1.904762 is kept under both
    assert!(!centre_case(8.5, flat, 0.0, Combine::Either));
    assert!(!centre_case(8.5, flat, 0.0, Combine::Magnitude));
    // v neighbours 1..8 too and v0 = 8.5: each 1.904762 (kept by
    // "either"), magnitude sqrt(2)*1.904762 = 2.693712 (rejected)
    let v = [1.0, 2.0, 3.0, 4.0, 5.0, 6.0, 7.0, 8.0];
    assert!(!centre_case(8.5, v, 8.5, Combine::Either));
    assert!(centre_case(8.5, v, 8.5, Combine::Magnitude));
}

#[test]
fn invalid_neighbours_are_left_out_and_sparse_nodes_not_tested() {
    let mut f = Field::from_fn(grid(5, 5, 1.0), |x, y| (1.0 + 0.01 * x, 0.01 * y));
    // an outlier surrounded by invalid vectors on one side
    f.u[[2, 2]] = 10.0;
    for i in 1..4 {
        f.status[[1, i]] = FILLED;
        f.u[[1, i]] = f64::NAN;
        f.v[[1, i]] = f64::NAN;
    }
    let p = MedianParams {
        eps: 0.01,
        ..MedianParams::default()
    };
    let n = apply(&p, &mut f);
    assert_eq!(n, 1);
    assert_eq!(f.status[[2, 2]], REPLACED);
    assert!(f.u[[2, 2]].is_nan());
    // with min 6 neighbours the centre (5 valid) is not tested
    let mut f2 = Field::from_fn(grid(5, 5, 1.0), |x, y| (1.0 + 0.01 * x, 0.01 * y));
    f2.u[[2, 2]] = 10.0;
    for i in 1..4 {
        f2.status[[1, i]] = FILLED;
    }
    let p = MedianParams {
        eps: 0.01,
        min_neighbours: 6,
        ..MedianParams::default()
    };
    apply(&p, &mut f2);
    assert_eq!(f2.status[[2, 2]], VALID);
}

#[test]
fn radius_two_catches_a_pair_of_adjacent_outliers() {
    // two identical outliers side by side: in 3x3 each has the other as
    // one of 8 neighbours (median unaffected), both caught; a 2x2 block
    // is also caught with radius 2 (3 of 24 neighbours wrong)
    let mut f = Field::from_fn(grid(9, 9, 1.0), |x, y| (1.0 + 0.01 * x, 0.02 * y));
    for (j, i) in [(4, 4), (4, 5), (5, 4), (5, 5)] {
        f.u[[j, i]] = 5.0;
    }
    let p = MedianParams {
        eps: 0.01,
        radius: 2,
        min_neighbours: 8,
        ..MedianParams::default()
    };
    assert_eq!(apply(&p, &mut f), 4);
}
