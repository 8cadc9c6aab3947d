//! The axis operators of the gradient stage: one scheme's derivative
//! stencils along one axis with everything precomputed for interior nodes.
//!
//! Owns: the operator of a scheme along an axis (its fallback chain, the
//! chain composed with the smoother, the interior truncation stencils,
//! flat forms of the stencils for the fast path), the truncation stencil of
//! a composite (the fit described in `gradient`), and the fingerprints that
//! key the cached slow-path stencils. Does not own: applying the operators
//! at the nodes (`gradient`), keeping them from frame to frame
//! (`workspace`).

use std::collections::hash_map::DefaultHasher;
use std::hash::{Hash, Hasher};
use std::rc::Rc;

use crate::stencil::correlation::Correlation;
use crate::stencil::derivatives::{chain, Axis, DiffScheme};
use crate::stencil::lsq::PolyFit;
use crate::stencil::{Stencil, Tap};

/// A stencil with its correlation gain, shared between nodes.
pub(crate) type Shared = Rc<(Stencil, f64)>;

/// What an axis operator is made from: everything it depends on, so that
/// `key` identifies it.
pub(crate) struct OpSpec<'a> {
    pub scheme: DiffScheme,
    pub axis: Axis,
    pub dx: f64,
    pub dy: f64,
    /// The smoother's equivalent stencil (normalised to unit sum), if any.
    pub smoother: Option<&'a Stencil>,
    pub corr: Correlation,
    pub truncation: bool,
    /// Row length of the grid (the flat offsets depend on it).
    pub nx: usize,
}

impl OpSpec<'_> {
    /// A fingerprint of everything the operator depends on.
    pub(crate) fn key(&self) -> u64 {
        let mut h = DefaultHasher::new();
        format!(
            "{:?}{:?}{:?}{}",
            self.scheme, self.axis, self.corr, self.truncation
        )
        .hash(&mut h);
        (self.dx.to_bits(), self.dy.to_bits(), self.nx).hash(&mut h);
        let sm = self.smoother.map_or(0, |s| fingerprint(0, s, &[]));
        sm.hash(&mut h);
        h.finish()
    }
}

/// A stencil flattened to linear offsets for a row-major `(ny, nx)` array.
pub(crate) struct Flat {
    off: Vec<isize>,
    w: Vec<f64>,
}

impl Flat {
    pub(crate) fn new(s: &Stencil, nx: usize) -> Flat {
        Flat {
            off: s
                .taps
                .iter()
                .map(|t| t.dj as isize * nx as isize + t.di as isize)
                .collect(),
            w: s.taps.iter().map(|t| t.w).collect(),
        }
    }
    /// `sum_t w_t a[k + off_t]`, in tap order.
    #[inline(always)]
    fn apply1(&self, a: &[f64], k: usize) -> f64 {
        let mut s = 0.0;
        for (o, w) in self.off.iter().zip(&self.w) {
            s += w * a[(k as isize + o) as usize];
        }
        s
    }
    /// `apply1` to the u and v arrays (`nu`, `nv`: which are wanted; the
    /// other comes back NaN), both in one loop when both are.
    #[inline(always)]
    pub(crate) fn apply_uv(
        &self,
        a: &[f64],
        b: &[f64],
        k: usize,
        nu: bool,
        nv: bool,
    ) -> (f64, f64) {
        match (nu, nv) {
            (true, true) => self.apply2(a, b, k),
            (true, false) => (self.apply1(a, k), f64::NAN),
            (false, true) => (f64::NAN, self.apply1(b, k)),
            (false, false) => (f64::NAN, f64::NAN),
        }
    }
    /// `sum_t w_t a[k + off_t]` for two arrays at once, in tap order.
    #[inline(always)]
    fn apply2(&self, a: &[f64], b: &[f64], k: usize) -> (f64, f64) {
        let (mut s, mut t) = (0.0, 0.0);
        for (o, w) in self.off.iter().zip(&self.w) {
            let q = (k as isize + o) as usize;
            s += w * a[q];
            t += w * b[q];
        }
        (s, t)
    }
}

/// `Correlation::variance_at` of one stencil at nodes where it fits, with
/// the flat offsets and the pairs of taps that correlate precomputed: the
/// same sums in the same order (so bit-identical), without re-evaluating the
/// correlation model or checking bounds per tap.
pub(crate) struct FlatVar {
    off: Vec<isize>,
    w: Vec<f64>,
    /// `(a, b, rho_ab)` for every ordered pair with `rho_ab != 0`.
    pairs: Vec<(usize, usize, f64)>,
    gain: f64,
    independent: bool,
}

impl FlatVar {
    fn new(s: &Stencil, gain: f64, corr: &Correlation, nx: usize) -> FlatVar {
        let mut pairs = Vec::new();
        for (ia, a) in s.taps.iter().enumerate() {
            for (ib, b) in s.taps.iter().enumerate() {
                let r = corr.rho(a.dj - b.dj, a.di - b.di);
                if r != 0.0 {
                    pairs.push((ia, ib, r));
                }
            }
        }
        FlatVar {
            off: Flat::new(s, nx).off,
            w: s.taps.iter().map(|t| t.w).collect(),
            pairs,
            gain,
            independent: corr.is_independent(),
        }
    }

    /// The variance at flat index `k` (every tap inside the grid).
    #[inline]
    pub(crate) fn at(&self, sig: &[f64], k: usize) -> f64 {
        let at = |o: isize| sig[(k as isize + o) as usize];
        let s0 = sig[k];
        if self.off.iter().all(|&o| at(o) == s0) {
            return self.gain * s0 * s0;
        }
        if self.independent {
            return self
                .off
                .iter()
                .zip(&self.w)
                .map(|(&o, &w)| {
                    let e = w * at(o);
                    e * e
                })
                .sum();
        }
        let mut v = 0.0;
        for &(a, b, r) in &self.pairs {
            let ea = self.w[a] * at(self.off[a]);
            v += ea * self.w[b] * at(self.off[b]) * r;
        }
        v
    }
}

/// One axis of one scheme, with everything precomputed for the interior.
pub(crate) struct AxisOp {
    pub axis: Axis,
    pub h: f64,
    pub chain: Vec<Stencil>,
    /// `chain[k]` composed with the smoother (or `chain[k]` itself), with
    /// its correlation gain.
    pub comp: Vec<Shared>,
    /// Half-widths of the box the composite depends on.
    pub comp_box: Vec<(i32, i32)>,
    /// Interior truncation stencil of `comp[k]` and its correlation gain.
    pub bias: Vec<Option<Shared>>,
    /// Cache fingerprints of `comp[k]` (slow paths).
    pub fp_comp: Vec<u64>,
    pub fp_bias: Vec<u64>,
    /// Half-widths (along y, along x) of the truncation fit window.
    pub fit_half: Vec<(i32, i32)>,
    pub flat_d: Flat,
    pub flat_b: Option<Flat>,
    /// Variance of `comp[0]` and of `bias[0]` where every node has a value
    /// (uncertainties not uniform).
    pub var_d: FlatVar,
    pub var_b: Option<FlatVar>,
    /// Half-widths of the box that must be plain for the fast path.
    pub box_r: (usize, usize),
}

const FIT_DEGREE: u32 = 5;
const FIT_DEGREE_LOW: u32 = 3;

/// Half-widths of the fit window for a stencil of the given reach.
fn fit_half(reach: (usize, usize)) -> (i32, i32) {
    let (ry, rx) = (reach.0 as i32, reach.1 as i32);
    match (ry, rx) {
        (0, r) => (0, (r + 2).max(4)),
        (r, 0) => ((r + 2).max(4), 0),
        (a, b) => ((a + 1).max(3), (b + 1).max(3)),
    }
}

/// Monomials of total degree <= `deg` that a window of half-widths `half`
/// can determine (no y terms in a one-row window).
fn terms(deg: u32, half: (i32, i32)) -> Vec<(u32, u32)> {
    crate::stencil::lsq::monomials(deg)
        .into_iter()
        .filter(|&(p, q)| (q == 0 || half.0 > 0) && (p == 0 || half.1 > 0))
        .collect()
}

/// `T[p] - dp/daxis(0)` as a stencil of the data, for the fit on `offsets`.
pub(crate) fn bias_stencil(
    t: &Stencil,
    axis: Axis,
    h: f64,
    offsets: Vec<(i32, i32)>,
    half: (i32, i32),
) -> Option<Stencil> {
    let n = offsets.len();
    for deg in [FIT_DEGREE, FIT_DEGREE_LOW] {
        let tm = terms(deg, half);
        if n < tm.len() + 2 {
            continue;
        }
        if let Some(fit) = PolyFit::with_terms(offsets.clone(), tm) {
            let (p, q) = match axis {
                Axis::X => (1, 0),
                Axis::Y => (0, 1),
            };
            let mut taps: Vec<Tap> = Vec::new();
            for tap in &t.taps {
                taps.extend(fit.value_at(tap.dj, tap.di).scaled(tap.w).taps);
            }
            let d = fit.coefficient(p, q)?.scaled(-1.0 / h);
            taps.extend(d.taps);
            return Some(Stencil::new(taps));
        }
    }
    None
}

pub(crate) fn window(half: (i32, i32)) -> Vec<(i32, i32)> {
    (-half.0..=half.0)
        .flat_map(|j| (-half.1..=half.1).map(move |i| (j, i)))
        .collect()
}

impl AxisOp {
    /// The operator `spec` describes: the scheme's chain of stencils, their
    /// composites with the smoother (`composites`), the truncation stencils
    /// (`bias_stencils`), the cache keys (`fingerprints`) and the flat
    /// views of the first (full-stencil) entry.
    pub(crate) fn new(spec: &OpSpec) -> AxisOp {
        let (scheme, axis, nx) = (spec.scheme, spec.axis, spec.nx);
        let h = match axis {
            Axis::X => spec.dx,
            Axis::Y => spec.dy,
        };
        let chain = chain(scheme, axis, h);
        let (comp, comp_box, fit_half) = composites(spec, &chain);
        let bias = bias_stencils(spec, &comp, &fit_half, h);
        let (fp_comp, fp_bias) = fingerprints(spec, &chain, &comp, &fit_half, h);
        let flat_d = Flat::new(&chain[0], nx);
        let flat_b = bias[0].as_ref().map(|b| Flat::new(&b.0, nx));
        let mut r = chain[0].reach();
        for s in [Some(&comp[0]), bias[0].as_ref().map(|b| &b.0)]
            .into_iter()
            .flatten()
        {
            let q = s.reach();
            r = (r.0.max(q.0), r.1.max(q.1));
        }
        let comp: Vec<Shared> = comp
            .into_iter()
            .map(|c| {
                let g = spec.corr.gain(&c);
                Rc::new((c, g))
            })
            .collect();
        let var_d = FlatVar::new(&comp[0].0, comp[0].1, &spec.corr, nx);
        let var_b = bias[0]
            .as_ref()
            .map(|b| FlatVar::new(&b.0, b.1, &spec.corr, nx));
        AxisOp {
            axis,
            h,
            chain,
            comp,
            comp_box,
            bias,
            fp_comp,
            fp_bias,
            fit_half,
            flat_d,
            flat_b,
            var_d,
            var_b,
            box_r: r,
        }
    }
}

/// Half-widths (rows, columns) of a box of nodes around a node.
type HalfBox = (i32, i32);

/// Each stencil of `chain` composed with the smoother (itself without
/// one), the half-box each composite depends on, and the truncation fit's
/// half-window over that box.
fn composites(spec: &OpSpec, chain: &[Stencil]) -> (Vec<Stencil>, Vec<HalfBox>, Vec<HalfBox>) {
    let comp: Vec<Stencil> = chain
        .iter()
        .map(|d| spec.smoother.map_or_else(|| d.clone(), |s| d.after(s)))
        .collect();
    let sr = spec.smoother.map_or((0, 0), |s| s.reach());
    let comp_box: Vec<(i32, i32)> = chain
        .iter()
        .map(|d| {
            let r = d.reach();
            ((r.0 + sr.0) as i32, (r.1 + sr.1) as i32)
        })
        .collect();
    // The fit window covers the box the composite depends on, so the
    // fit window's validity pattern determines the whole slow path.
    let fit_half: Vec<(i32, i32)> = comp_box
        .iter()
        .map(|&(a, b)| fit_half((a as usize, b as usize)))
        .collect();
    (comp, comp_box, fit_half)
}

/// The truncation stencil of each composite (`bias_stencil` on its fit
/// window) with its correlation gain; all `None` without truncation
/// estimates, and `None` where the fit has too few nodes.
fn bias_stencils(
    spec: &OpSpec,
    comp: &[Stencil],
    fit_half: &[(i32, i32)],
    h: f64,
) -> Vec<Option<Shared>> {
    comp.iter()
        .zip(fit_half)
        .map(|(c, &fh)| {
            if !spec.truncation {
                return None;
            }
            bias_stencil(c, spec.axis, h, window(fh), fh).map(|b| {
                let g = spec.corr.gain(&b);
                Rc::new((b, g))
            })
        })
        .collect()
}

/// The cache keys of the composites and of the truncation stencils. The
/// cached entries hold correlation gains: the model is part of every key.
fn fingerprints(
    spec: &OpSpec,
    chain: &[Stencil],
    comp: &[Stencil],
    fit_half: &[(i32, i32)],
    h: f64,
) -> (Vec<u64>, Vec<u64>) {
    let ax = spec.axis as u64;
    let cf = corr_fingerprint(&spec.corr);
    let sm_fp = spec.smoother.map_or(0, |s| fingerprint(0, s, &[]));
    let fp_comp = chain
        .iter()
        .map(|d| fingerprint(1, d, &[ax, sm_fp, cf]))
        .collect();
    let fp_bias = comp
        .iter()
        .zip(fit_half)
        .map(|(c, fh)| fingerprint(2, c, &[ax, h.to_bits(), fh.0 as u64, fh.1 as u64, cf]))
        .collect();
    (fp_comp, fp_bias)
}

/// A fingerprint of a correlation model (part of every cache key: the
/// cached entries hold correlation gains).
pub(crate) fn corr_fingerprint(c: &Correlation) -> u64 {
    match *c {
        Correlation::Independent => 1,
        Correlation::Window(x) => 2 ^ x.to_bits().rotate_left(3),
        Correlation::Adjacent(x) => 3 ^ x.to_bits().rotate_left(7),
    }
}

/// A fingerprint of a stencil and the context it is used in.
pub(crate) fn fingerprint(tag: u8, s: &Stencil, extra: &[u64]) -> u64 {
    let mut h = DefaultHasher::new();
    tag.hash(&mut h);
    for t in &s.taps {
        (t.dj, t.di, t.w.to_bits()).hash(&mut h);
    }
    extra.hash(&mut h);
    h.finish()
}
