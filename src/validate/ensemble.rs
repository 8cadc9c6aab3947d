//! The first pass of the two-pass validation: per-node robust statistics
//! (median and MAD of u and v over the run) without holding the frames.
//!
//! # Method
//!
//! Each node keeps an integer histogram of u and of v on one fixed, global
//! quantisation of the velocity axis, so histograms of different chunks of
//! frames add exactly and the result is bit-identical for any in-order (or
//! any) chunking. The bins are linear near zero and logarithmic beyond:
//! 256 bins of width `resolution` on each side of zero up to
//! `L = 256 resolution`; above L, 256 bins per octave (relative width
//! 0.2-0.4 %, taken from the exponent and 8 leading mantissa bits of the
//! f32 of |x|/L, so no transcendental function per vector), for 12 octaves;
//! beyond 4096 L values share the last bin. With the default resolution of
//! 0.2 x the noise floor (0.02 px) the linear range reaches 5.1 px and a
//! 10 px displacement is binned to 0.02-0.04 px. Within a bin the
//! values are taken as uniform (linear interpolation of the cumulative
//! count), which makes the median and MAD errors a small fraction of a bin.
//! The resulting robust standard deviation `1.4826 * MAD` (exact for a
//! normal distribution, common practice) is floored by the test at the
//! noise level (`EnsembleParams::floor`), far above the bin width, so the
//! quantisation has no practical effect on which vectors are rejected.
//!
//! Memory: a node stores only the span of bins its values reached (4 bytes
//! a bin and component), typically a few hundred bins; at most 2 x 3328.
//! The pass also keeps one histogram over all nodes (for limits from the
//! run's statistics). Only valid input vectors (status 0, finite) are
//! counted. MAD is found by bisection on the interpolated cumulative count.

use ndarray::Array2;

use super::{EnsembleParams, Params};
use crate::field::{Field, Grid, VALID};

/// Linear bins on each side of zero.
const LIN: i32 = 256;
/// f32 mantissa bits dropped: 8 kept, 256 bins per octave.
const SHIFT: u32 = 15;
/// Octaves above the linear range before values share the last bin.
const OCTAVES: i32 = 12;

/// The fixed quantisation of the velocity axis (see the module docs).
#[derive(Debug, Clone, Copy, PartialEq)]
struct Quant {
    res: f64,
    inv_res: f64,
    l: f64,
    inv_l: f64,
}

impl Quant {
    fn new(resolution: f64) -> Self {
        let res = if resolution > 0.0 && resolution.is_finite() {
            resolution
        } else {
            1e-4
        };
        let l = LIN as f64 * res;
        Quant {
            res,
            inv_res: 1.0 / res,
            l,
            inv_l: 1.0 / l,
        }
    }
    /// Largest index magnitude.
    const TMAX: i32 = LIN + OCTAVES * (1 << (23 - SHIFT)) - 1;

    /// Bin of `x`: `[t res, (t+1) res)` for |x| < L = 256 res; above, the
    /// f32 exponent and 8 leading mantissa bits of |x|/L; mirrored for
    /// negative x (bin -t-1). Monotone, no transcendental functions.
    #[inline]
    fn index(&self, x: f64) -> i32 {
        let a = x.abs();
        let t = if a < self.l {
            ((a * self.inv_res) as i32).min(LIN - 1)
        } else {
            let r = (a * self.inv_l).min((1u64 << OCTAVES) as f64) as f32;
            (LIN + ((r.to_bits() - 1.0f32.to_bits()) >> SHIFT) as i32).min(Self::TMAX)
        };
        if x < 0.0 {
            -t - 1
        } else {
            t
        }
    }
    /// Lower edge of the magnitude bin `t >= 0`.
    #[inline]
    fn mag_edge(&self, t: i32) -> f64 {
        if t <= LIN {
            t as f64 * self.res
        } else {
            self.l * f32::from_bits(1.0f32.to_bits() + (((t - LIN) as u32) << SHIFT)) as f64
        }
    }
    /// Lower edge of bin `t` (any sign).
    #[inline]
    fn edge(&self, t: i32) -> f64 {
        if t >= 0 {
            self.mag_edge(t)
        } else {
            -self.mag_edge(-t)
        }
    }
}

/// A histogram over a window of bin indices `lo .. lo + counts.len()`.
#[derive(Debug, Clone, Default, PartialEq)]
struct Hist<C> {
    lo: i32,
    counts: Vec<C>,
}

impl<C: Copy + Default + std::ops::AddAssign + From<u8> + Into<u64>> Hist<C> {
    /// Makes room for bin `t` (grows by at least 16 bins to amortise).
    fn reserve_bin(&mut self, t: i32) {
        if self.counts.is_empty() {
            self.lo = t - 8;
            self.counts = vec![C::default(); 17];
            return;
        }
        let hi = self.lo + self.counts.len() as i32;
        if t < self.lo {
            let add = (self.lo - t).max(16) as usize;
            let mut c = vec![C::default(); add];
            c.extend_from_slice(&self.counts);
            self.counts = c;
            self.lo -= add as i32;
        } else if t >= hi {
            let add = (t - hi + 1).max(16) as usize;
            self.counts.resize(self.counts.len() + add, C::default());
        }
    }
    #[inline]
    fn add(&mut self, t: i32) {
        let hi = self.lo + self.counts.len() as i32;
        if t < self.lo || t >= hi {
            self.reserve_bin(t);
        }
        self.counts[(t - self.lo) as usize] += C::from(1u8);
    }
    fn merge(&mut self, other: &Hist<C>) {
        if other.counts.is_empty() {
            return;
        }
        self.reserve_bin(other.lo);
        self.reserve_bin(other.lo + other.counts.len() as i32 - 1);
        let off = (other.lo - self.lo) as usize;
        for (a, b) in self.counts[off..].iter_mut().zip(&other.counts) {
            *a += *b;
        }
    }
    /// (median, 1.4826 MAD, n) with in-bin interpolation; NaN when empty.
    fn robust(&self, q: &Quant, cum: &mut Vec<u64>) -> (f64, f64, u64) {
        cum.clear();
        let mut s = 0u64;
        cum.push(0);
        for c in &self.counts {
            s += (*c).into();
            cum.push(s);
        }
        if s == 0 {
            return (f64::NAN, f64::NAN, 0);
        }
        let lo = self.lo;
        // interpolated cumulative count at x
        let cdf = |x: f64| -> f64 {
            let t = q.index(x);
            let b = t - lo;
            if b < 0 {
                return 0.0;
            }
            let b = b as usize;
            if b >= self.counts.len() {
                return s as f64;
            }
            let (e0, e1) = (q.edge(t), q.edge(t + 1));
            let f = ((x - e0) / (e1 - e0)).clamp(0.0, 1.0);
            cum[b] as f64 + f * (cum[b + 1] - cum[b]) as f64
        };
        // median: invert the interpolated cdf at s/2
        let half = 0.5 * s as f64;
        let b = cum.partition_point(|&c| (c as f64) < half).max(1) - 1;
        let t = lo + b as i32;
        let (e0, e1) = (q.edge(t), q.edge(t + 1));
        let cb = (cum[b + 1] - cum[b]) as f64;
        let med = if cb > 0.0 {
            e0 + (half - cum[b] as f64) / cb * (e1 - e0)
        } else {
            e0
        };
        // MAD: smallest r with cdf(med + r) - cdf(med - r) >= s/2
        let first = self
            .counts
            .iter()
            .position(|c| (*c).into() > 0)
            .unwrap_or(0);
        let last = self
            .counts
            .iter()
            .rposition(|c| (*c).into() > 0)
            .unwrap_or(0);
        let xmin = q.edge(lo + first as i32);
        let xmax = q.edge(lo + last as i32 + 1);
        let (mut a, mut z) = (0.0, (med - xmin).max(xmax - med).max(0.0));
        for _ in 0..48 {
            let r = 0.5 * (a + z);
            if cdf(med + r) - cdf(med - r) >= half {
                z = r;
            } else {
                a = r;
            }
        }
        (med, 1.4826 * z, s)
    }
}

/// Accumulates the first pass over a chunk of frames (in frame order).
#[derive(Debug, Clone)]
pub(crate) struct EnsembleBuilder {
    grid: Grid,
    quant: Quant,
    u: Vec<Hist<u32>>,
    v: Vec<Hist<u32>>,
    all_u: Hist<u64>,
    all_v: Hist<u64>,
}

impl EnsembleBuilder {
    pub(crate) fn new(p: &Params, grid: Grid) -> Self {
        let n = grid.len();
        EnsembleBuilder {
            grid,
            quant: Quant::new(p.histogram_resolution),
            u: vec![Hist::default(); n],
            v: vec![Hist::default(); n],
            all_u: Hist::default(),
            all_v: Hist::default(),
        }
    }

    /// Adds one frame as read (before any test); only valid, finite vectors
    /// count. Panics if the frame is on another grid shape (a programming
    /// error: io checks grids).
    pub(crate) fn push(&mut self, field: &Field) {
        assert_eq!(
            field.status.dim(),
            self.grid.shape(),
            "frame on another grid"
        );
        for (k, ((s, u), v)) in field
            .status
            .iter()
            .zip(field.u.iter())
            .zip(field.v.iter())
            .enumerate()
        {
            if *s == VALID && u.is_finite() && v.is_finite() {
                let (tu, tv) = (self.quant.index(*u), self.quant.index(*v));
                self.u[k].add(tu);
                self.v[k].add(tv);
                self.all_u.add(tu);
                self.all_v.add(tv);
            }
        }
    }

    /// Adds the builder of the frames that follow (exact: integer counts).
    pub(crate) fn merge(&mut self, later: EnsembleBuilder) {
        assert_eq!(self.grid.shape(), later.grid.shape(), "merge across grids");
        for (a, b) in self.u.iter_mut().zip(&later.u) {
            a.merge(b);
        }
        for (a, b) in self.v.iter_mut().zip(&later.v) {
            a.merge(b);
        }
        self.all_u.merge(&later.all_u);
        self.all_v.merge(&later.all_v);
    }

    pub(crate) fn finish(self) -> EnsembleRef {
        let sh = self.grid.shape();
        let mut cum = Vec::new();
        let mut n = Array2::zeros(sh);
        let mut um = Array2::from_elem(sh, f64::NAN);
        let mut us = Array2::from_elem(sh, f64::NAN);
        let mut vm = Array2::from_elem(sh, f64::NAN);
        let mut vs = Array2::from_elem(sh, f64::NAN);
        for k in 0..self.grid.len() {
            let idx = (k / self.grid.nx, k % self.grid.nx);
            let (m, s, c) = self.u[k].robust(&self.quant, &mut cum);
            um[idx] = m;
            us[idx] = s;
            n[idx] = c as u32;
            let (m, s, _) = self.v[k].robust(&self.quant, &mut cum);
            vm[idx] = m;
            vs[idx] = s;
        }
        let gu = self.all_u.robust(&self.quant, &mut cum);
        let gv = self.all_v.robust(&self.quant, &mut cum);
        EnsembleRef {
            grid: self.grid,
            n,
            u_median: um,
            u_sigma: us,
            v_median: vm,
            v_sigma: vs,
            global_u: (gu.0, gu.1),
            global_v: (gv.0, gv.1),
        }
    }
}

/// Per-node robust statistics of the run (the first pass's result).
#[derive(Debug, Clone, PartialEq)]
pub struct EnsembleRef {
    pub grid: Grid,
    /// Valid input samples per node.
    pub n: Array2<u32>,
    /// Median of u per node (m/s); NaN where no sample.
    pub u_median: Array2<f64>,
    /// Robust standard deviation 1.4826 MAD of u per node (m/s), unfloored.
    pub u_sigma: Array2<f64>,
    pub v_median: Array2<f64>,
    pub v_sigma: Array2<f64>,
    /// (median, 1.4826 MAD) of u over all valid vectors of the run.
    pub global_u: (f64, f64),
    pub global_v: (f64, f64),
}

impl EnsembleRef {
    /// The ensemble test at node `k` (flat index): |u - med| > k sigma in
    /// either component, sigma floored at `p.floor`; never for nodes with
    /// fewer than `p.min_samples` samples.
    #[inline]
    pub(crate) fn is_outlier(&self, p: &EnsembleParams, k: usize, u: f64, v: f64) -> bool {
        let nx = self.grid.nx;
        let idx = (k / nx, k % nx);
        if (self.n[idx] as usize) < p.min_samples.max(1) {
            return false;
        }
        let su = self.u_sigma[idx].max(p.floor);
        let sv = self.v_sigma[idx].max(p.floor);
        (u - self.u_median[idx]).abs() > p.k * su || (v - self.v_median[idx]).abs() > p.k * sv
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::testutil::{assert_close, rng};
    use rand_distr::{Distribution, Normal};

    fn grid() -> Grid {
        Grid {
            nx: 3,
            ny: 2,
            x0: 0.0,
            y0: 0.0,
            dx: 1.0,
            dy: 1.0,
        }
    }

    fn frames(n: usize, seed: u64) -> Vec<Field> {
        let mut r = rng(seed);
        let nu = Normal::new(1.5, 0.2).unwrap();
        let nv = Normal::new(-0.3, 0.05).unwrap();
        (0..n)
            .map(|_| {
                let mut f = Field::from_fn(grid(), |x, _| (x, 0.0));
                f.u.iter_mut().for_each(|u| *u += nu.sample(&mut r));
                f.v.iter_mut().for_each(|v| *v += nv.sample(&mut r));
                f
            })
            .collect()
    }

    #[test]
    fn median_and_mad_match_the_exact_sample_values() {
        let fr = frames(2001, 11);
        let p = Params::default();
        let mut b = EnsembleBuilder::new(&p, grid());
        for f in &fr {
            b.push(f);
        }
        let e = b.finish();
        // exact sample median and MAD of node (0, 2) (common practice definitions)
        let mut xs: Vec<f64> = fr.iter().map(|f| f.u[[0, 2]]).collect();
        xs.sort_by(f64::total_cmp);
        let med = xs[1000];
        let mut d: Vec<f64> = xs.iter().map(|x| (x - med).abs()).collect();
        d.sort_by(f64::total_cmp);
        let mad = d[1000];
        // bins near 3.5 m/s with resolution 0.02 are about 0.024 wide; the
        // interpolated values land well inside one bin
        assert_close(e.u_median[[0, 2]], med, 0.005, 0.0, "median");
        assert_close(e.u_sigma[[0, 2]], 1.4826 * mad, 0.01, 0.0, "1.4826 MAD");
        // and the robust sigma estimates the normal's 0.2
        assert_close(e.u_sigma[[0, 2]], 0.2, 0.02, 0.0, "sigma of N(.,0.2)");
        assert_eq!(e.n[[0, 2]], 2001);
    }

    #[test]
    fn chunked_builders_merged_in_order_are_bit_identical() {
        let fr = frames(300, 12);
        let p = Params::default();
        let mut one = EnsembleBuilder::new(&p, grid());
        fr.iter().for_each(|f| one.push(f));
        let one = one.finish();
        for chunk in [1, 7, 64, 299] {
            let mut acc: Option<EnsembleBuilder> = None;
            for c in fr.chunks(chunk) {
                let mut b = EnsembleBuilder::new(&p, grid());
                c.iter().for_each(|f| b.push(f));
                match acc.as_mut() {
                    None => acc = Some(b),
                    Some(a) => a.merge(b),
                }
            }
            let e = acc.unwrap().finish();
            assert_eq!(e, one, "chunk {chunk}");
        }
    }

    #[test]
    fn quantisation_is_monotone_and_edges_bracket_values() {
        let q = Quant::new(0.02);
        for &x in &[-50.0, -3.3, -0.011, 0.0, 1e-9, 0.5, 12.0, 3e3] {
            let t = q.index(x);
            assert!(
                q.edge(t) <= x + 1e-12 * x.abs() + 1e-15 && x <= q.edge(t + 1) + 1e-12 * x.abs(),
                "x {x}"
            );
        }
        assert_close(
            q.edge(1) - q.edge(0),
            0.02,
            1e-6,
            0.0,
            "bin width near zero",
        );
    }
}
