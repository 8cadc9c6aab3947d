//! The normalized median test (Westerweel & Scarano 2005, Exp. Fluids
//! 39:1096; formula as in METHODS.md).
//!
//! # Method
//!
//! For each component separately, over the valid neighbours `U1..Un` of a
//! node within Chebyshev radius `r` (8 for r = 1, 24 for r = 2; the centre
//! left out):
//!
//! ```text
//! Um = median(U1..Un),  ri = |Ui - Um|,  rm = median(r1..rn),
//! r0 = |U0 - Um| / (rm + eps)
//! ```
//!
//! With an even count the median is the mean of the two middle values.
//! The components combine by `Combine`: `Either` (the default) rejects when
//! r0 of u or of v exceeds the threshold, the per-component reading of the
//! test as written in METHODS.md (from memory, the paper applies it per
//! component); `Magnitude` rejects when sqrt(r0u^2 + r0v^2) exceeds it.
//! Since sqrt(r0u^2 + r0v^2) >= max(r0u, r0v), `Magnitude` rejects every
//! vector `Either` rejects and more (a vector moderately off in both
//! components), so at the same threshold it is the stricter rule.
//!
//! # Edges, gaps, NaN
//!
//! Only neighbours that exist (edges use the neighbours inside the grid) and
//! are valid (status 0, finite) enter the medians. A node with fewer than
//! `min_neighbours` valid neighbours is not tested (kept as it is): a median
//! of one or two values says nothing about outliers. Nodes that are not
//! valid are never tested. All nodes are judged against the same field, so
//! the result does not depend on the order of the sweep.
//!
//! # Cost
//!
//! No allocation per node: neighbours go into a stack array of 24; the
//! medians of up to 8 values (radius 1) come from a branch-free sorting
//! network (Batcher's 19 comparators, padded with +inf), of more values
//! (radius 2) from an in-place selection.
//! Per frame: one validity mask and a `Vec` of rejected node indices.

use crate::field::{Field, REPLACED, VALID};

/// How the u and v residuals combine into one decision.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
pub enum Combine {
    /// Reject when either component's normalized residual exceeds the threshold.
    Either,
    /// Reject when sqrt(r_u^2 + r_v^2) exceeds the threshold.
    Magnitude,
}

/// The median test, resolved (eps in m/s).
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct MedianParams {
    /// Noise floor in the denominator (m/s); about 0.1 px of displacement.
    pub eps: f64,
    /// Normalized residual above which a vector is rejected (default 2).
    pub threshold: f64,
    /// Neighbourhood radius in nodes: 1 (3x3) or 2 (5x5).
    pub radius: usize,
    pub combine: Combine,
    /// Fewest valid neighbours for the node to be tested (default 3 for
    /// radius 1, 8 for radius 2).
    pub min_neighbours: usize,
}

impl Default for MedianParams {
    fn default() -> Self {
        MedianParams {
            eps: 0.1,
            threshold: 2.0,
            radius: 1,
            combine: Combine::Either,
            min_neighbours: 3,
        }
    }
}

/// Most neighbours a node can have (radius 2).
const MAX_NB: usize = 24;

/// Batcher's odd-even merge network for 8 inputs (19 comparators).
const NET8: [(usize, usize); 19] = [
    (0, 1),
    (2, 3),
    (4, 5),
    (6, 7),
    (0, 2),
    (1, 3),
    (4, 6),
    (5, 7),
    (1, 2),
    (5, 6),
    (0, 4),
    (3, 7),
    (1, 5),
    (2, 6),
    (1, 4),
    (3, 6),
    (2, 4),
    (3, 5),
    (3, 4),
];

/// Median of `a` (finite values, 1 <= len <= 24), reordering `a`. Up to
/// eight values (every radius-1 neighbourhood) are padded with +inf to
/// eight and go through a branch-free sorting network of min/max; the
/// median of the first n sorted values is then read off. Larger counts use
/// an in-place selection. No allocation.
#[inline]
fn median_small(a: &mut [f64]) -> f64 {
    let n = a.len();
    if n <= 8 {
        let mut b = [f64::INFINITY; 8];
        b[..n].copy_from_slice(a);
        for &(p, q) in &NET8 {
            let (x, y) = (b[p], b[q]);
            // plain compares (values are finite or +inf): single minsd/maxsd
            b[p] = if x < y { x } else { y };
            b[q] = if x < y { y } else { x };
        }
        a.copy_from_slice(&b[..n]);
        return if n % 2 == 1 {
            b[n / 2]
        } else {
            0.5 * (b[n / 2 - 1] + b[n / 2])
        };
    }
    let h = n / 2;
    let (left, m, _) = a.select_nth_unstable_by(h, f64::total_cmp);
    let m = *m;
    if n % 2 == 1 {
        m
    } else {
        let l = left.iter().copied().fold(f64::NEG_INFINITY, f64::max);
        0.5 * (l + m)
    }
}

/// The normalized residual `r0` of `u0` against neighbours `nb` (at least
/// one value; `nb` is reordered). Allocation-free.
#[inline]
pub fn normalized_residual(u0: f64, nb: &mut [f64], eps: f64) -> f64 {
    let um = median_small(nb);
    for x in nb.iter_mut() {
        *x = (*x - um).abs();
    }
    let rm = median_small(nb);
    (u0 - um).abs() / (rm + eps)
}

/// Runs the test on every valid node of `field` (standard layout); rejected
/// vectors become `REPLACED` with NaN values. Returns how many.
pub(crate) fn apply(p: &MedianParams, field: &mut Field) -> usize {
    let (ny, nx) = field.status.dim();
    let r = p.radius.clamp(1, 2) as isize;
    let need = p.min_neighbours.max(1);
    let st = field.status.as_slice().expect("standard layout");
    let us = field.u.as_slice().expect("standard layout");
    let vs = field.v.as_slice().expect("standard layout");
    let mask: Vec<bool> = (0..st.len())
        .map(|k| st[k] == VALID && us[k].is_finite() && vs[k].is_finite())
        .collect();
    let ok = |k: usize| mask[k];
    let mut rejected: Vec<usize> = Vec::new();
    let mut bu = [0.0f64; MAX_NB];
    let mut bv = [0.0f64; MAX_NB];
    for j in 0..ny {
        let j0 = (j as isize - r).max(0) as usize;
        let j1 = (j as isize + r).min(ny as isize - 1) as usize;
        for i in 0..nx {
            let k = j * nx + i;
            if !ok(k) {
                continue;
            }
            let i0 = (i as isize - r).max(0) as usize;
            let i1 = (i as isize + r).min(nx as isize - 1) as usize;
            let mut n = 0;
            for jj in j0..=j1 {
                let row = jj * nx;
                for ii in i0..=i1 {
                    let q = row + ii;
                    if q != k && ok(q) {
                        bu[n] = us[q];
                        bv[n] = vs[q];
                        n += 1;
                    }
                }
            }
            if n < need {
                continue;
            }
            let ru = normalized_residual(us[k], &mut bu[..n], p.eps);
            let rv = normalized_residual(vs[k], &mut bv[..n], p.eps);
            let bad = match p.combine {
                Combine::Either => ru > p.threshold || rv > p.threshold,
                Combine::Magnitude => (ru * ru + rv * rv).sqrt() > p.threshold,
            };
            if bad {
                rejected.push(k);
            }
        }
    }
    let st = field.status.as_slice_mut().expect("standard layout");
    let us = field.u.as_slice_mut().expect("standard layout");
    let vs = field.v.as_slice_mut().expect("standard layout");
    for &k in &rejected {
        st[k] = REPLACED;
        us[k] = f64::NAN;
        vs[k] = f64::NAN;
    }
    rejected.len()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::field::{Grid, FILLED};
    use crate::testutil::assert_close;

    fn grid(nx: usize, ny: usize) -> Grid {
        Grid {
            nx,
            ny,
            x0: 0.0,
            y0: 0.0,
            dx: 1.0,
            dy: 1.0,
        }
    }

    /// METHODS.md check values (derived): neighbours 1..8, eps 0.1:
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
        // other counts against a full sort (numbers from memory-free arithmetic)
        let mut r = crate::testutil::rng(9);
        for n in 1..=24 {
            let v: Vec<f64> = (0..n)
                .map(|_| rand::Rng::random_range(&mut r, -5.0..5.0))
                .collect();
            let mut s = v.clone();
            s.sort_by(f64::total_cmp);
            let want = if n % 2 == 1 {
                s[n / 2]
            } else {
                0.5 * (s[n / 2 - 1] + s[n / 2])
            };
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

    /// A 3x3 field whose centre has the METHODS.md neighbourhood in u (and
    /// a constant v), judged with both combination rules.
    fn centre_case(u0: f64, v_nb: [f64; 8], v0: f64, combine: Combine) -> bool {
        let mut f = Field::from_fn(grid(3, 3), |_, _| (0.0, 0.0));
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
        let mut f = Field::from_fn(grid(5, 5), |x, y| (1.0 + 0.01 * x, 0.01 * y));
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
        let mut f2 = Field::from_fn(grid(5, 5), |x, y| (1.0 + 0.01 * x, 0.01 * y));
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
        let mut f = Field::from_fn(grid(9, 9), |x, y| (1.0 + 0.01 * x, 0.02 * y));
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
}
