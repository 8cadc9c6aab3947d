//! The normalized median test (Westerweel & Scarano 2005, Exp. Fluids
//! 39:1096; formula as in docs/methods.md).
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
//! test as written in docs/methods.md (from memory, the paper applies it per
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
//! No allocation per node. Radius 1: the u and v of the (up to 8) valid
//! neighbours go as pairs into one register-resident array, padded with
//! +inf, and both medians of each component come from one branch-free
//! sorting network (Batcher's 19 comparators) run on both lanes at once
//! (SSE2 on x86_64): about 80 min/max instructions per node. Radius 2
//! (up to 24 neighbours): a stack array and an in-place selection.
//! Per frame: one validity mask and a `Vec` of rejected node indices.

use crate::field::{Field, REPLACED, VALID};

/// How the u and v residuals combine into one decision.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "lowercase")]
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
    /// Not used when `eps_noise` is set.
    pub eps: f64,
    /// When set (no calibration and no eps given), eps on each frame is
    /// this factor times the frame's estimated random error
    /// (`frame_noise`), never a px default read in another unit.
    pub eps_noise: Option<f64>,
    /// Normalized residual above which a vector is rejected (default 2).
    pub threshold: f64,
    /// Neighbourhood radius in nodes: 1 (3x3) or 2 (5x5).
    pub radius: usize,
    /// How the u and v residuals combine (`median.combine`, default
    /// `"either"`).
    pub combine: Combine,
    /// Fewest valid neighbours for the node to be tested (default 3 for
    /// radius 1, 8 for radius 2).
    pub min_neighbours: usize,
}

impl Default for MedianParams {
    fn default() -> Self {
        MedianParams {
            eps: 0.1,
            eps_noise: None,
            threshold: 2.0,
            radius: 1,
            combine: Combine::Either,
            min_neighbours: 3,
        }
    }
}

impl MedianParams {
    /// The eps used on `field` (m/s): the given one, or `eps_noise` times
    /// the frame's estimated random error.
    pub(crate) fn eps_for(&self, field: &Field) -> f64 {
        match self.eps_noise {
            None => self.eps,
            Some(k) => k * frame_noise(field),
        }
    }
}

/// The random error (m/s) of the valid vectors of `field` before
/// validation: `derive::noise::estimate` under the frame's estimated
/// error correlation (both robust, median-based, so the outliers the test
/// is about to catch barely move it); where too few runs of five valid
/// vectors exist, `noise::estimate_pairs`; 0 without any valid pair.
pub(crate) fn frame_noise(field: &Field) -> f64 {
    use crate::derive::noise;
    let corr = noise::estimate_overlap(field).map_or(
        crate::stencil::correlation::Correlation::Independent,
        noise::overlap_model,
    );
    noise::estimate(field, &corr)
        .or_else(|| noise::estimate_pairs(field))
        .unwrap_or(0.0)
}

/// Most neighbours a node can have (radius 2).
const MAX_NB: usize = 24;

/// Median of `a` (finite values, 1 <= len <= 24), reordering `a` (sorted
/// when len <= 8). Up to eight values go through the paired network below
/// (both lanes carry `a`); larger counts use an in-place selection. No
/// allocation.
#[inline]
fn median_small(a: &mut [f64]) -> f64 {
    let n = a.len();
    if n <= 8 {
        let mut b = [Pair::splat(f64::INFINITY); 8];
        for (p, &x) in b.iter_mut().zip(a.iter()) {
            *p = Pair::new(x, x);
        }
        sort8(&mut b);
        for (x, p) in a.iter_mut().zip(b.iter()) {
            *x = p.lanes()[0];
        }
        return median_of_sorted(&b, n).lanes()[0];
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

/// Two f64 lanes, u and v of one neighbour, that go through the comparator
/// network together: SSE2 `minpd`/`maxpd` on x86_64 (part of the base
/// instruction set, so no run-time detection), plain selects elsewhere.
/// Both give identical results: min, max, subtraction and |x| are exact
/// or correctly rounded the same way on every IEEE 754 target.
#[derive(Clone, Copy)]
struct Pair(
    #[cfg(target_arch = "x86_64")] std::arch::x86_64::__m128d,
    #[cfg(not(target_arch = "x86_64"))] [f64; 2],
);

#[cfg(target_arch = "x86_64")]
impl Pair {
    #[inline(always)]
    fn new(u: f64, v: f64) -> Pair {
        use std::arch::x86_64::*;
        // SAFETY: SSE2 is part of the x86_64 baseline; no memory access
        Pair(unsafe { _mm_set_pd(v, u) })
    }
    #[inline(always)]
    fn splat(x: f64) -> Pair {
        Pair::new(x, x)
    }
    #[inline(always)]
    fn min(self, o: Pair) -> Pair {
        use std::arch::x86_64::*;
        // SAFETY: as in `new`
        Pair(unsafe { _mm_min_pd(self.0, o.0) })
    }
    #[inline(always)]
    fn max(self, o: Pair) -> Pair {
        use std::arch::x86_64::*;
        // SAFETY: as in `new`
        Pair(unsafe { _mm_max_pd(self.0, o.0) })
    }
    /// |self - o| in each lane.
    #[inline(always)]
    fn abs_diff(self, o: Pair) -> Pair {
        use std::arch::x86_64::*;
        // SAFETY: as in `new`; clears the sign bits
        Pair(unsafe { _mm_andnot_pd(_mm_set1_pd(-0.0), _mm_sub_pd(self.0, o.0)) })
    }
    #[inline(always)]
    fn mid(self, o: Pair) -> Pair {
        use std::arch::x86_64::*;
        // SAFETY: as in `new`
        Pair(unsafe { _mm_mul_pd(_mm_set1_pd(0.5), _mm_add_pd(self.0, o.0)) })
    }
    #[inline(always)]
    fn lanes(self) -> [f64; 2] {
        let mut out = [0.0; 2];
        // SAFETY: as in `new`; stores two f64 into a local array of two
        unsafe { std::arch::x86_64::_mm_storeu_pd(out.as_mut_ptr(), self.0) };
        out
    }
}

#[cfg(not(target_arch = "x86_64"))]
impl Pair {
    #[inline(always)]
    fn new(u: f64, v: f64) -> Pair {
        Pair([u, v])
    }
    #[inline(always)]
    fn splat(x: f64) -> Pair {
        Pair([x, x])
    }
    #[inline(always)]
    fn min(self, o: Pair) -> Pair {
        let m = |a: f64, b: f64| if a < b { a } else { b };
        Pair([m(self.0[0], o.0[0]), m(self.0[1], o.0[1])])
    }
    #[inline(always)]
    fn max(self, o: Pair) -> Pair {
        let m = |a: f64, b: f64| if a > b { a } else { b };
        Pair([m(self.0[0], o.0[0]), m(self.0[1], o.0[1])])
    }
    #[inline(always)]
    fn abs_diff(self, o: Pair) -> Pair {
        Pair([(self.0[0] - o.0[0]).abs(), (self.0[1] - o.0[1]).abs()])
    }
    #[inline(always)]
    fn mid(self, o: Pair) -> Pair {
        Pair([0.5 * (self.0[0] + o.0[0]), 0.5 * (self.0[1] + o.0[1])])
    }
    #[inline(always)]
    fn lanes(self) -> [f64; 2] {
        self.0
    }
}

/// Sorts eight pairs lane by lane with Batcher's odd-even merge network
/// (Knuth, TAOCP vol. 3, 5.3.4; 19 compare-exchanges), written out so that all eight stay in
/// registers: no branch, no loop, no memory traffic.
#[inline(always)]
fn sort8(b: &mut [Pair; 8]) {
    macro_rules! ce {
        ($($p:literal $q:literal),*) => {$(
            let (x, y) = (b[$p], b[$q]);
            b[$p] = x.min(y);
            b[$q] = x.max(y);
        )*};
    }
    ce!(0 1, 2 3, 4 5, 6 7, 0 2, 1 3, 4 6, 5 7, 1 2, 5 6, 0 4, 3 7, 1 5, 2 6, 1 4, 3 6, 2 4, 3 5, 3 4);
}

/// The median of the first `n` (1..=8) entries of sorted pairs, per lane.
#[inline(always)]
fn median_of_sorted(b: &[Pair; 8], n: usize) -> Pair {
    if n % 2 == 1 {
        b[n / 2]
    } else {
        b[n / 2 - 1].mid(b[n / 2])
    }
}

/// The normalized residuals (r0 of u, r0 of v) of the centre `c` against
/// `n` (1..=8) neighbour pairs, the rest of `b` padded with +inf. Both
/// components in one pass of the network: +inf pads stay last through the
/// sort and through |x - median| (inf - m = inf), so the medians of the
/// first `n` sorted entries are those of the neighbours alone.
#[inline(always)]
fn residual_pair8(c: Pair, b: &mut [Pair; 8], n: usize, eps: f64) -> [f64; 2] {
    sort8(b);
    let m = median_of_sorted(b, n);
    for p in b.iter_mut() {
        *p = p.abs_diff(m);
    }
    sort8(b);
    let rm = median_of_sorted(b, n).lanes();
    let r = c.abs_diff(m).lanes();
    [r[0] / (rm[0] + eps), r[1] / (rm[1] + eps)]
}

/// The normalized residual `r0` of `u0` against neighbours `nb` (at least
/// one value; `nb` is reordered). Allocation-free.
#[inline]
pub(crate) fn normalized_residual(u0: f64, nb: &mut [f64], eps: f64) -> f64 {
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
    let eps = p.eps_for(field);
    let (ny, nx) = field.status.dim();
    let st = field.status.as_slice().expect("standard layout");
    let us = field.u.as_slice().expect("standard layout");
    let vs = field.v.as_slice().expect("standard layout");
    let ok: Vec<bool> = (0..st.len())
        .map(|k| st[k] == VALID && us[k].is_finite() && vs[k].is_finite())
        .collect();
    let nb = Neighbourhood {
        us,
        vs,
        ok: &ok,
        nx,
        ny,
        r: p.radius.clamp(1, 2) as isize,
        need: p.min_neighbours.max(1),
        eps,
    };
    let mut rejected: Vec<usize> = Vec::new();
    let mut bu = [0.0f64; MAX_NB];
    let mut bv = [0.0f64; MAX_NB];
    for j in 0..ny {
        for i in 0..nx {
            let k = j * nx + i;
            if !ok[k] {
                continue;
            }
            let Some((ru, rv)) = nb.residuals(j, i, &mut bu, &mut bv) else {
                continue;
            };
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

/// What the test reads around a node: both components and the validity of
/// every node (row-major, `nx` per row), the radius, the fewest valid
/// neighbours a test needs, and epsilon.
struct Neighbourhood<'a> {
    us: &'a [f64],
    vs: &'a [f64],
    ok: &'a [bool],
    nx: usize,
    ny: usize,
    r: isize,
    need: usize,
    eps: f64,
}

impl Neighbourhood<'_> {
    /// The normalized residuals of u and v at node (j, i) from its valid
    /// neighbours within the radius (the box cut by the grid's edges), or
    /// `None` with fewer than `need` of them. Radius 1 runs both
    /// components through the paired sorting network (`residual_pair8`);
    /// radius 2 sorts each component in the buffers `bu`, `bv`.
    #[inline]
    fn residuals(
        &self,
        j: usize,
        i: usize,
        bu: &mut [f64; MAX_NB],
        bv: &mut [f64; MAX_NB],
    ) -> Option<(f64, f64)> {
        let (nx, r) = (self.nx, self.r);
        let (us, vs, k) = (self.us, self.vs, j * nx + i);
        let j0 = (j as isize - r).max(0) as usize;
        let j1 = (j as isize + r).min(self.ny as isize - 1) as usize;
        let i0 = (i as isize - r).max(0) as usize;
        let i1 = (i as isize + r).min(nx as isize - 1) as usize;
        if r == 1 {
            let mut b = [Pair::splat(f64::INFINITY); 8];
            let mut n = 0;
            for jj in j0..=j1 {
                let row = jj * nx;
                for q in row + i0..=row + i1 {
                    if q != k && self.ok[q] {
                        b[n] = Pair::new(us[q], vs[q]);
                        n += 1;
                    }
                }
            }
            if n < self.need {
                return None;
            }
            let [ru, rv] = residual_pair8(Pair::new(us[k], vs[k]), &mut b, n, self.eps);
            return Some((ru, rv));
        }
        let mut n = 0;
        for jj in j0..=j1 {
            let row = jj * nx;
            for ii in i0..=i1 {
                let q = row + ii;
                if q != k && self.ok[q] {
                    bu[n] = us[q];
                    bv[n] = vs[q];
                    n += 1;
                }
            }
        }
        if n < self.need {
            return None;
        }
        Some((
            normalized_residual(us[k], &mut bu[..n], self.eps),
            normalized_residual(vs[k], &mut bv[..n], self.eps),
        ))
    }
}

#[cfg(test)]
mod tests;
