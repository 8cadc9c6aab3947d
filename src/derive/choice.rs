//! `scheme = "auto"` chosen from ensemble estimates: one map of schemes for
//! the mean fields and one for the instantaneous fields, fixed for a run.
//!
//! Why not per frame: each frame's error estimates are noisy, so a choice
//! made frame by frame splits a uniform stream at random between schemes,
//! and it minimises the error of one snapshot while the main outputs are
//! means, whose noise falls as 1/sqrt(N) while truncation does not.
//!
//! Method (the weighing of truncation against noise is the principle of
//! Foucaut & Stanislas 2002, Meas. Sci. Technol. 13:1058): a pilot of up
//! to `PILOT_FRAMES` frames spread evenly over the whole run (the same
//! frames for every shard, so a sharded run chooses as a single run does)
//! is validated, filled and differentiated with every candidate. Per
//! candidate c and node, over the pilot's K frames: the mean propagated
//! variance of one vorticity value V_c; the mean b_c, sample variance
//! s_c² and mean square of the signed truncation estimate b; and the mean
//! noise variance of that estimate vb_c. Then
//!
//! - mean fields: E_c = V_c / N + (b_c² − s_c² / K), with N the frames of
//!   the run: the noise of a mean of N frames plus its debiased squared
//!   truncation (the truncation of a mean is the mean of the truncations),
//!   the latter counted only where the pilot detects it, b_c² > 9 s_c² / K
//!   (3 standard errors): in a uniform stream the truncation estimator's
//!   noise would otherwise pick the scheme at random;
//! - instantaneous fields: E_c = V_c + max(0, mean(b²) − vb_c), the error
//!   of one snapshot;
//!
//! each averaged over the node's 5 x 5 neighbourhood (the nodes where the
//! candidate has a value) before the least is taken, so that a region, not
//! a node's own noisy estimate, decides; ties go to the first candidate.
//! Where no candidate has an estimate the map holds `u8::MAX` and the
//! first candidate that has a value there is used. Without truncation
//! estimates (`truncation = false`) the truncation terms are 0 and the
//! least noisy candidate wins everywhere.

use ndarray::Array2;

use super::gradient::Grad;
use super::quantities::{clip0, debias, linear, Node};
use super::workspace::Workspace;
use crate::field::box_mean;

/// Frames the pilot uses at most.
pub(crate) const PILOT_FRAMES: usize = 32;

/// Half width of the neighbourhood over which errors are averaged.
const REGION: usize = 2;

/// Indices of the pilot frames among `n` frames: evenly spread, first and
/// last included, in increasing order.
pub(crate) fn pilot_indices(n: usize) -> Vec<usize> {
    let k = n.min(PILOT_FRAMES);
    if k <= 1 {
        return (0..k).collect();
    }
    (0..k)
        .map(|i| (i * (n - 1) + (k - 1) / 2) / (k - 1))
        .collect()
}

/// Sums of one candidate's vorticity error estimates per node.
#[derive(Debug, Clone)]
struct Sums {
    /// Frames with a value; Σ variance; Σ b, Σ b², Σ vb over frames with a
    /// finite truncation estimate, and their count.
    n: Vec<f64>,
    var: Vec<f64>,
    nb: Vec<f64>,
    b: Vec<f64>,
    b2: Vec<f64>,
    vb: Vec<f64>,
}

/// The pilot's accumulated estimates, per candidate.
#[derive(Debug, Clone)]
pub(crate) struct Pilot {
    shape: (usize, usize),
    sums: Vec<Sums>,
    frames: usize,
}

impl Pilot {
    pub(crate) fn new(candidates: usize, shape: (usize, usize)) -> Pilot {
        let z = vec![0.0; shape.0 * shape.1];
        let s = Sums {
            n: z.clone(),
            var: z.clone(),
            nb: z.clone(),
            b: z.clone(),
            b2: z.clone(),
            vb: z,
        };
        Pilot {
            shape,
            sums: vec![s; candidates],
            frames: 0,
        }
    }

    /// Adds one frame's gradients of every candidate (in candidate order).
    pub(crate) fn push(&mut self, grads: &[Grad], ok: &Array2<bool>) {
        self.frames += 1;
        for (g, s) in grads.iter().zip(&mut self.sums) {
            for ((j, i), &o) in ok.indexed_iter() {
                if !o {
                    continue;
                }
                let n = Node::load(g, j, i);
                let (val, var, b, vb) = linear(&n, [0.0, -1.0, 1.0, 0.0]);
                if !(val.is_finite() && var.is_finite()) {
                    continue;
                }
                let k = j * self.shape.1 + i;
                s.n[k] += 1.0;
                s.var[k] += var;
                if b.is_finite() && vb.is_finite() {
                    s.nb[k] += 1.0;
                    s.b[k] += b;
                    s.b2[k] += b * b;
                    s.vb[k] += vb;
                }
            }
        }
    }

    /// The two maps for a run of `n_run` frames.
    pub(crate) fn finish(&self, n_run: usize) -> Choice {
        let nodes = self.shape.0 * self.shape.1;
        let nr = n_run.max(1) as f64;
        let mut mean_err = Vec::with_capacity(self.sums.len());
        let mut inst_err = Vec::with_capacity(self.sums.len());
        for s in &self.sums {
            let (mut em, mut ei) = (vec![f64::NAN; nodes], vec![f64::NAN; nodes]);
            for k in 0..nodes {
                if s.n[k] == 0.0 {
                    continue;
                }
                let v = s.var[k] / s.n[k];
                let (mut tm, mut ti) = (0.0, 0.0);
                if s.nb[k] >= 2.0 {
                    let kb = s.nb[k];
                    let m = s.b[k] / kb;
                    let s2 = clip0((s.b2[k] - kb * m * m) / (kb - 1.0));
                    // Only a truncation the pilot detects (beyond 3
                    // standard errors) moves the choice of the means:
                    // otherwise the estimator's noise, not the flow,
                    // would pick the scheme.
                    if m * m > 9.0 * s2 / kb {
                        tm = m * m - s2 / kb;
                    }
                    ti = clip0(s.b2[k] / kb - s.vb[k] / kb);
                }
                em[k] = v / nr + tm;
                ei[k] = v + ti;
            }
            mean_err.push(em);
            inst_err.push(ei);
        }
        Choice {
            mean: self.least(&mean_err),
            inst: self.least(&inst_err),
            pilot_frames: self.frames,
            fields: true,
        }
    }

    /// Per node, the candidate with the least error averaged over the
    /// neighbourhood.
    fn least(&self, err: &[Vec<f64>]) -> Array2<u8> {
        let (ny, nx) = self.shape;
        Array2::from_shape_fn(self.shape, |(j, i)| {
            let mut best = (f64::INFINITY, u8::MAX);
            for (c, e) in err.iter().enumerate() {
                if !e[j * nx + i].is_finite() {
                    continue;
                }
                // the node's own value is finite, so the box holds one
                let m = box_mean(e, nx, ny, j, i, REGION).unwrap_or(f64::INFINITY);
                if m < best.0 {
                    best = (m, c as u8);
                }
            }
            best.1
        })
    }
}

/// The run's scheme maps (indices into the candidates; `u8::MAX` where no
/// candidate had an estimate).
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct Choice {
    /// For everything the statistics see (means, deviations, phase bins).
    pub mean: Array2<u8>,
    /// For the instantaneous fields written per frame.
    pub inst: Array2<u8>,
    pub pilot_frames: usize,
    /// Whether per-frame fields are written: only then is the
    /// instantaneous map applied (`derive_with`), and counted.
    pub fields: bool,
}

/// The tensor kept at each node of one frame, with the scheme map applied.
pub(super) struct Kept {
    pub grad: Grad,
    /// The scheme at each node (`u8::MAX`: none).
    pub map: Array2<u8>,
    /// Nodes per scheme.
    pub counts: Vec<usize>,
    /// The instantaneous vorticity under the run's instantaneous map, with
    /// its counts (`Derived::inst_omega`).
    pub inst_omega: Option<([Array2<f64>; 2], Vec<usize>)>,
}

/// Keeps, per node, one of the candidates' tensors `grads`: the run's
/// choice where there is one (`keep_map`), else this frame's least
/// estimated error (`choose`).
pub(super) fn keep(
    ws: &mut Workspace,
    grads: Vec<Grad>,
    ok: &Array2<bool>,
    choice: Option<&Choice>,
) -> Kept {
    let n = grads.len();
    let counts = |map: &Array2<u8>| {
        let mut c = vec![0usize; n];
        for &m in map.iter() {
            if (m as usize) < c.len() {
                c[m as usize] += 1;
            }
        }
        c
    };
    let choice = choice.filter(|_| n > 1);
    let inst_omega = choice.filter(|c| c.fields && c.inst != c.mean).map(|c| {
        let (om, map) = omega_from_map(&grads, ok, &c.inst);
        (om, counts(&map))
    });
    let (grad, map) = match choice {
        Some(c) => keep_map(ws, grads, ok, &c.mean),
        None => choose(ws, grads, ok),
    };
    Kept {
        counts: counts(&map),
        grad,
        map,
        inst_omega,
    }
}

/// Whether `g` has both vorticity components at a node.
fn has_omega(g: &Grad, j: usize, i: usize) -> bool {
    g.val[1][[j, i]].is_finite() && g.val[2][[j, i]].is_finite()
}

/// The scheme a fixed map gives at a node: the map's, where that
/// candidate has a value there, else the first candidate that has one
/// (`u8::MAX`: none).
fn scheme_at(grads: &[Grad], map: &Array2<u8>, j: usize, i: usize) -> u8 {
    let m = map[[j, i]] as usize;
    if m < grads.len() && has_omega(&grads[m], j, i) {
        return m as u8;
    }
    grads
        .iter()
        .position(|g| has_omega(g, j, i))
        .map_or(u8::MAX, |k| k as u8)
}

/// The vorticity and its standard uncertainty under a fixed scheme map,
/// with the map as applied.
fn omega_from_map(
    grads: &[Grad],
    ok: &Array2<bool>,
    map: &Array2<u8>,
) -> ([Array2<f64>; 2], Array2<u8>) {
    let sh = ok.dim();
    let mut om = Array2::from_elem(sh, f64::NAN);
    let mut unc = Array2::from_elem(sh, f64::NAN);
    let mut used = Array2::from_elem(sh, u8::MAX);
    for ((j, i), &o) in ok.indexed_iter() {
        if !o {
            continue;
        }
        let m = scheme_at(grads, map, j, i);
        if m == u8::MAX {
            continue;
        }
        let n = Node::load(&grads[m as usize], j, i);
        let (val, var, _, _) = linear(&n, [0.0, -1.0, 1.0, 0.0]);
        om[[j, i]] = val;
        unc[[j, i]] = var.sqrt();
        used[[j, i]] = m;
    }
    ([om, unc], used)
}

/// Measures the truncation of `g` against the reference tensor at a node,
/// where the reference has a value and an estimate and `g` a value:
/// `b = (T_c - T_ref) + b_ref`, the difference of the two schemes applied
/// to the same data plus the reference's own estimate, with noise variance
/// `var_c + var_ref + bvar_ref` (an upper bound: the two schemes' errors
/// are positively correlated). Elsewhere `g` keeps its own estimate. The
/// degree-5 fit (`gradient`) estimates a second-order scheme's leading
/// error well but a fourth-order scheme's poorly where a core spans few
/// nodes: on a Lamb-Oseen core of 1.5 pitches, 60 frames, the fit gave
/// Richardson's mean truncation as 4 1/s where it was 25 1/s, the
/// reference route 27 1/s.
fn against_reference_at(reference: &Grad, g: &mut Grad, j: usize, i: usize) {
    for c in 0..4 {
        let (tr, br) = (reference.val[c][[j, i]], reference.bias[c][[j, i]]);
        let (vr, bvr) = (reference.var[c][[j, i]], reference.bvar[c][[j, i]]);
        if tr.is_finite() && br.is_finite() && g.val[c][[j, i]].is_finite() {
            g.bias[c][[j, i]] = g.val[c][[j, i]] - tr + br;
            g.bvar[c][[j, i]] = g.var[c][[j, i]] + vr + bvr;
        }
    }
}

/// The truncation of a fixed scheme that the fit cannot estimate
/// (`DiffScheme::truncation_from_reference`) measured against the
/// reference scheme's tensor at every node (`against_reference_at`).
/// Nothing happens without truncation estimates.
pub(super) fn against_reference(reference: &Grad, g: &mut Grad) {
    if !(reference.has_truncation() && g.has_truncation()) {
        return;
    }
    let (ny, nx) = g.val[1].dim();
    for j in 0..ny {
        for i in 0..nx {
            against_reference_at(reference, g, j, i);
        }
    }
}

/// Keeps, per node, the scheme of a fixed map (`scheme_at`). The
/// truncation of a scheme other than the first candidate (the reference,
/// least squares by default) is measured against the reference
/// (`against_reference_at`).
fn keep_map(
    ws: &mut Workspace,
    mut grads: Vec<Grad>,
    ok: &Array2<bool>,
    map: &Array2<u8>,
) -> (Grad, Array2<u8>) {
    let sh = ok.dim();
    let mut used = Array2::from_elem(sh, u8::MAX);
    for ((j, i), m) in used.indexed_iter_mut() {
        if ok[[j, i]] {
            *m = scheme_at(&grads, map, j, i);
        }
    }
    if grads[0].has_truncation() {
        let (reference, others) = grads.split_first_mut().expect("candidates");
        for ((j, i), &m) in used.indexed_iter() {
            if m == u8::MAX || m == 0 {
                continue;
            }
            against_reference_at(reference, &mut others[m as usize - 1], j, i);
        }
    }
    let out = merge_by_map(ws, &mut grads, &used);
    (out, used)
}

/// The first gradient with every node the map gives to another candidate
/// copied in from that candidate; recycles the others.
fn merge_by_map(ws: &mut Workspace, grads: &mut Vec<Grad>, map: &Array2<u8>) -> Grad {
    let mut out = grads.remove(0);
    for ((j, i), &m) in map.indexed_iter() {
        if m == u8::MAX || m == 0 {
            continue;
        }
        let src = &grads[m as usize - 1];
        for c in 0..4 {
            out.val[c][[j, i]] = src.val[c][[j, i]];
            out.var[c][[j, i]] = src.var[c][[j, i]];
            if out.has_truncation() {
                out.bias[c][[j, i]] = src.bias[c][[j, i]];
                out.bvar[c][[j, i]] = src.bvar[c][[j, i]];
            }
        }
    }
    for g in grads.drain(..) {
        g.recycle(ws);
    }
    out
}

/// The estimated total squared error of the vorticity of `g` at a node:
/// propagated variance plus the squared debiased truncation (the latter
/// taken as 0 where it could not be estimated).
fn omega_error2(g: &Grad, j: usize, i: usize) -> f64 {
    let n = Node::load(g, j, i);
    let (_, var, b, vb) = linear(&n, [0.0, -1.0, 1.0, 0.0]);
    let t = debias(b, vb);
    var + if t.is_finite() { t * t } else { 0.0 }
}

/// Keeps, per node, the scheme with the least estimated error averaged over
/// the node's 3 x 3 neighbourhood (a single scheme is kept whole).
fn choose(ws: &mut Workspace, mut grads: Vec<Grad>, ok: &Array2<bool>) -> (Grad, Array2<u8>) {
    let sh = ok.dim();
    let has =
        |g: &Grad, j: usize, i: usize| g.val[1][[j, i]].is_finite() && g.val[2][[j, i]].is_finite();
    let mut map = Array2::from_elem(sh, u8::MAX);
    if grads.len() == 1 {
        let g = grads.pop().unwrap();
        for ((j, i), m) in map.indexed_iter_mut() {
            if ok[[j, i]] && has(&g, j, i) {
                *m = 0;
            }
        }
        return (g, map);
    }
    // Each scheme's estimated error, then its mean over the 3 x 3
    // neighbourhood: choosing by a node's own noisy estimate alone would
    // favour, node by node, whichever scheme's truncation happens to be
    // underestimated there (a selection bias that erodes coverage).
    let err: Vec<Array2<f64>> = grads
        .iter()
        .map(|g| {
            Array2::from_shape_fn(sh, |(j, i)| {
                if ok[[j, i]] && has(g, j, i) {
                    omega_error2(g, j, i)
                } else {
                    f64::NAN
                }
            })
        })
        .collect();
    let (ny, nx) = sh;
    for ((j, i), m) in map.indexed_iter_mut() {
        if !ok[[j, i]] {
            continue;
        }
        let mut best = (f64::INFINITY, u8::MAX);
        for (k, e) in err.iter().enumerate() {
            if !e[[j, i]].is_finite() {
                continue;
            }
            let (mut s, mut n) = (0.0, 0);
            for jj in j.saturating_sub(1)..(j + 2).min(ny) {
                for ii in i.saturating_sub(1)..(i + 2).min(nx) {
                    let x = e[[jj, ii]];
                    if x.is_finite() {
                        s += x;
                        n += 1;
                    }
                }
            }
            let mean = s / n as f64;
            if mean < best.0 || best.1 == u8::MAX {
                best = (mean, k as u8);
            }
        }
        *m = best.1;
    }
    let out = merge_by_map(ws, &mut grads, &map);
    (out, map)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn pilot_frames_spread_over_the_run() {
        assert_eq!(pilot_indices(0), Vec::<usize>::new());
        assert_eq!(pilot_indices(1), vec![0]);
        assert_eq!(pilot_indices(5), vec![0, 1, 2, 3, 4]);
        let p = pilot_indices(1000);
        assert_eq!(p.len(), PILOT_FRAMES);
        assert_eq!((p[0], p[PILOT_FRAMES - 1]), (0, 999));
        assert!(p.windows(2).all(|w| w[1] > w[0] && w[1] - w[0] >= 32));
    }
}
