//! Filling invalid and rejected vectors from valid neighbours.
//!
//! Owns: giving values (and an uncertainty of their own) to nodes of status
//! `REPLACED` (1) and `FILLED` (2). Nodes that cannot be filled become
//! `MASKED` (3) with NaN. Valid vectors are never changed; nodes masked in
//! the input stay masked and are not counted.
//!
//! # Methods
//!
//! - **Neighbour mean** (`Method::NeighbourMean`, the default; common
//!   practice): in rounds, every hole whose 8-neighbourhood holds the most
//!   nodes with a value (valid or filled in an earlier round) is set to the
//!   mean of those values; all holes of that count are filled from the same
//!   state of the field, so the result does not depend on the sweep order.
//!   Rounds repeat until no hole has `min_neighbours` (default 2) neighbours
//!   with values. A node with 8 valid neighbours is thus filled before one at
//!   the rim of a gap, and gaps close from their rim inwards.
//! - **Inpainting** (`Method::Inpaint`): the DCT penalized least squares of
//!   Garcia 2010 (`stencil::pls`), started from the neighbour-mean fill, with the
//!   known values held fixed.
//!
//! Either way a hole further than `max_distance` nodes (Chebyshev distance,
//! default 3) from the nearest valid vector is not filled but masked: deep
//! inside a large gap (a shadow, a reflection) any value would be invented.
//!
//! # Uncertainty of a filled vector
//!
//! A neighbour-mean value is a linear combination of measured vectors:
//! `f = sum_m W_m f_m` over valid nodes `m`, with `W` the mean's weights
//! `1/n` over the neighbours used, a neighbour filled in an earlier round
//! replaced by its own weights (so `W` always reaches back to valid
//! vectors and sums to 1). `Field::fill_weights` records `W` for every
//! filled node; `derive` propagates the measured vectors' noise through it,
//! `u_noise^2 = sum_a sum_b W_a W_b rho_ab u_a u_b` (GUM, JCGM 100:2008,
//! eq. 13), which counts the noise once, reduced by the averaging (1/sqrt 8
//! for eight independent neighbours) and in step with the correlation model.
//! Before (issue 11 item 4) the spread of the neighbours plus their sigma
//! plus the noise level again gave filled vectors 4-5 x the uncertainty
//! they had.
//!
//! The fill's own (model) error, `sum_m W_m f(x_m) - f(x_0)` for the true
//! flow f, is estimated with the local least-squares quadratic `p` fitted
//! to the valid vectors within 2 nodes of the hole (3 when fewer than 6
//! there; a plane when the quadratic is not determined):
//! `delta = sum_m W_m p(x_m) - p(x_0)` (exact for quadratic flows: the
//! curvature term `(3/8) h^2 laplacian f` of a full 8-neighbour mean, and
//! the gradient term of a one-sided rim). `sigma_u` (`sigma_v`) of a filled
//! node is `|delta|` of that component, and `Field::fill_weights` keeps
//! the stencil of `delta`, so that `derive` can remove the noise of
//! `delta` itself: `delta^2 - u(delta)^2`, floored at 0 (the usual
//! debiasing of a squared estimate).
//! Inpainting starts from the neighbour-mean fill and is given its weights
//! and model error (an approximation: its own operator is not formed).
//! Valid nodes' sigma is not touched. Without a fit (no valid vector
//! within 3 nodes) sigma is NaN.
//!
//! Cost: no allocation per node; per frame, lists of holes and a distance
//! map. Inpainting costs about 2 x `inpaint_iterations` 2-D DCTs per
//! component and frame with holes.

pub(crate) use crate::stencil::pls;

use std::collections::HashMap;

use crate::field::{Field, FillWeights, FILLED, MASKED, REPLACED, VALID};
use crate::stencil::lsq::PolyFit;

/// How holes are filled.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Method {
    /// `"neighbour-mean"`: in rounds, the mean of a hole's neighbours with
    /// values, the holes with the most neighbours first.
    NeighbourMean,
    /// `"inpaint"`: penalized least squares in the DCT basis (Garcia
    /// 2010) with the holes at weight 0, iterated.
    Inpaint,
}

/// The resolved `[fill]` section.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Params {
    /// How holes are filled (`[fill] method`, default neighbour mean).
    pub method: Method,
    /// Holes further than this (Chebyshev, nodes) from a valid vector are
    /// masked; `None` fills every hole connected to data.
    pub max_distance: Option<usize>,
    /// Fewest neighbours with values for a neighbour-mean fill (1..8).
    pub min_neighbours: usize,
    /// Steps of the inpainting iteration (default 30; see the fill tests
    /// for the accuracy at 20, 30 and 60).
    pub inpaint_iterations: usize,
}

impl Default for Params {
    fn default() -> Self {
        Params {
            method: Method::NeighbourMean,
            max_distance: Some(3),
            min_neighbours: 2,
            inpaint_iterations: 30,
        }
    }
}

impl Params {
    /// The filling in plain words, for `curlew check` and the report:
    /// "neighbour mean (holes up to 3 nodes from a valid vector, at least 2
    /// neighbours with values)".
    pub(crate) fn describe(&self) -> String {
        let reach = match self.max_distance {
            Some(d) => format!(
                "holes up to {d} node{} from a valid vector; farther ones stay empty",
                if d == 1 { "" } else { "s" }
            ),
            None => "every hole connected to valid vectors".to_string(),
        };
        match self.method {
            Method::NeighbourMean => format!(
                "neighbour mean ({reach}; at least {} neighbours with values)",
                self.min_neighbours
            ),
            Method::Inpaint => format!(
                "penalized least-squares inpainting, {} iterations ({reach})",
                self.inpaint_iterations
            ),
        }
    }
}

/// What filling did to one frame (the `n_replaced`, `n_filled` and
/// `n_unfilled` columns of `frames.csv`).
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
pub struct Counts {
    /// Rejected vectors that were replaced.
    pub replaced: usize,
    /// Missing or invalid input vectors that were filled.
    pub filled: usize,
    /// Nodes that could not be filled (now masked).
    pub unfilled: usize,
}

/// Weights of a linear combination of nodes: (node number, weight).
type Weights = Vec<(usize, f64)>;

/// The 8-neighbourhood offsets.
const NB: [(isize, isize); 8] = [
    (-1, -1),
    (-1, 0),
    (-1, 1),
    (0, -1),
    (0, 1),
    (1, -1),
    (1, 0),
    (1, 1),
];

/// Fills the holes of `field` (see the module docs); returns the counts.
pub(crate) fn fill(p: &Params, field: &mut Field) -> Counts {
    crate::field::ensure_standard_layout(field);
    let (ny, nx) = field.status.dim();
    let is_hole = |s: u8| s == REPLACED || s == FILLED;
    let holes: Vec<usize> = field
        .status
        .iter()
        .enumerate()
        .filter(|(_, &s)| is_hole(s))
        .map(|(k, _)| k)
        .collect();
    if holes.is_empty() {
        return Counts::default();
    }
    // holes too far from data
    let far = p.max_distance.map(|d| beyond(&field.status, &holes, d));
    // has a value: valid, or filled already (tracked here)
    let mut has: Vec<bool> = field.status.iter().map(|&s| s == VALID).collect();
    let mut open: Vec<usize> = holes
        .iter()
        .copied()
        .filter(|&k| far.as_ref().is_none_or(|f| !f[k]))
        .collect();
    let weights = neighbour_mean(p, field, &mut has, &mut open, ny, nx);
    if p.method == Method::Inpaint {
        inpaint(p, field, &has, ny, nx);
    }
    model_error(field, &weights, nx);
    // uncertainty, counts, masking
    let mut c = Counts::default();
    let status = field.status.as_slice().unwrap().to_vec();
    for &k in &holes {
        if has[k] {
            if status[k] == REPLACED {
                c.replaced += 1;
            } else {
                c.filled += 1;
            }
        } else {
            c.unfilled += 1;
            let idx = (k / nx, k % nx);
            field.status[idx] = MASKED;
            field.u[idx] = f64::NAN;
            field.v[idx] = f64::NAN;
        }
    }
    c
}

/// Which of the `holes` lie further than `d` (Chebyshev) from a valid node:
/// for each hole, a search of the (2d+1)^2 window around it, ring by ring
/// from the nearest, stopping at the first valid node. Exact for the
/// Chebyshev metric (the window is the ball of radius d), and in the usual
/// case of a few scattered holes far cheaper than a distance transform
/// over every node.
fn beyond(status: &ndarray::Array2<u8>, holes: &[usize], d: usize) -> Vec<bool> {
    let (ny, nx) = status.dim();
    let st = status.as_slice().expect("standard layout");
    let mut far = vec![false; st.len()];
    for &k in holes {
        let (j, i) = (k / nx, k % nx);
        let near = (1..=d).any(|r| {
            let (j0, j1) = (j.saturating_sub(r), (j + r).min(ny - 1));
            let (i0, i1) = (i.saturating_sub(r), (i + r).min(nx - 1));
            (j0..=j1).any(|jj| {
                let row = &st[jj * nx..jj * nx + nx];
                if jj.abs_diff(j) == r {
                    row[i0..=i1].contains(&VALID)
                } else {
                    // the ring's two side nodes on this row (when inside)
                    (i >= r && row[i - r] == VALID) || (i + r < nx && row[i + r] == VALID)
                }
            })
        });
        far[k] = !near;
    }
    far
}

/// Rounds of neighbour-mean filling over the `open` holes.
fn neighbour_mean(
    p: &Params,
    field: &mut Field,
    has: &mut [bool],
    open: &mut Vec<usize>,
    ny: usize,
    nx: usize,
) -> Vec<(usize, Vec<(usize, f64)>)> {
    let need = p.min_neighbours.clamp(1, 8);
    let mut weights: HashMap<usize, Vec<(usize, f64)>> = HashMap::new();
    let mut order: Vec<usize> = Vec::new();
    let mut counts: Vec<u8> = vec![0; open.len()];
    let mut batch: Vec<(usize, [f64; 2], Weights)> = Vec::new();
    loop {
        let mut cmax = 0u8;
        for (c, &k) in counts.iter_mut().zip(open.iter()) {
            let (j, i) = (k / nx, k % nx);
            let mut n = 0u8;
            for (dj, di) in NB {
                let (jj, ii) = (j as isize + dj, i as isize + di);
                if jj >= 0
                    && ii >= 0
                    && (jj as usize) < ny
                    && (ii as usize) < nx
                    && has[jj as usize * nx + ii as usize]
                {
                    n += 1;
                }
            }
            *c = n;
            cmax = cmax.max(n);
        }
        if (cmax as usize) < need {
            break;
        }
        batch.clear();
        for (c, &k) in counts.iter().zip(open.iter()) {
            if *c == cmax {
                let (mean, w) = neighbour_mean_at(field, has, &weights, k, ny, nx);
                batch.push((k, mean, w));
            }
        }
        let (us, vs) = (
            field.u.as_slice_mut().unwrap(),
            field.v.as_slice_mut().unwrap(),
        );
        for (k, m, _) in &batch {
            us[*k] = m[0];
            vs[*k] = m[1];
        }
        for (k, _, w) in batch.drain(..) {
            has[k] = true;
            order.push(k);
            weights.insert(k, w);
        }
        let mut w = 0;
        for r in 0..open.len() {
            if !has[open[r]] {
                open[w] = open[r];
                w += 1;
            }
        }
        open.truncate(w);
        counts.truncate(w);
    }
    order
        .into_iter()
        .map(|k| {
            let w = weights.remove(&k).expect("weights of every filled node");
            (k, w)
        })
        .collect()
}

/// Replaces the neighbour-mean values of filled holes by DCT-PLS
/// inpainting (valid values held fixed).
fn inpaint(p: &Params, field: &mut Field, has: &[bool], ny: usize, nx: usize) {
    let solver = pls::Pls::new(ny, nx);
    let status = field.status.as_slice().unwrap();
    let known: Vec<bool> = status.iter().map(|&s| s == VALID).collect();
    for comp in [&mut field.u, &mut field.v] {
        let a = comp.as_slice_mut().unwrap();
        // start: the neighbour-mean fill; nodes without any value start at
        // the mean of the known ones
        let known_vals: Vec<f64> = (0..a.len()).filter(|&k| known[k]).map(|k| a[k]).collect();
        let mean = known_vals.iter().sum::<f64>() / known_vals.len().max(1) as f64;
        let z0: Vec<f64> = (0..a.len())
            .map(|k| if has[k] { a[k] } else { mean })
            .collect();
        let z = solver.inpaint(a, &known, &z0, p.inpaint_iterations);
        for k in 0..a.len() {
            if has[k] && !known[k] {
                a[k] = z[k];
            }
        }
    }
}

/// The mean `[u, v]` of the 8-neighbours of node `k` that have values,
/// and its weights over valid nodes (module docs), sorted by node.
fn neighbour_mean_at(
    field: &Field,
    has: &[bool],
    weights: &HashMap<usize, Vec<(usize, f64)>>,
    k: usize,
    ny: usize,
    nx: usize,
) -> ([f64; 2], Vec<(usize, f64)>) {
    let us = field.u.as_slice().unwrap();
    let vs = field.v.as_slice().unwrap();
    let (j, i) = (k / nx, k % nx);
    let nbs: Vec<usize> = NB
        .iter()
        .filter_map(|&(dj, di)| {
            let (jj, ii) = (j as isize + dj, i as isize + di);
            let inside = jj >= 0 && ii >= 0 && (jj as usize) < ny && (ii as usize) < nx;
            let q = inside.then(|| jj as usize * nx + ii as usize)?;
            has[q].then_some(q)
        })
        .collect();
    let n = nbs.len().max(1) as f64;
    let mean = [
        nbs.iter().map(|&q| us[q]).sum::<f64>() / n,
        nbs.iter().map(|&q| vs[q]).sum::<f64>() / n,
    ];
    let mut w: Vec<(usize, f64)> = Vec::new();
    for &q in &nbs {
        match weights.get(&q) {
            Some(wq) => w.extend(wq.iter().map(|&(m, x)| (m, x / n))),
            None => w.push((q, 1.0 / n)),
        }
    }
    w.sort_by_key(|&(m, _)| m);
    let mut merged: Vec<(usize, f64)> = Vec::with_capacity(w.len());
    for (m, x) in w {
        match merged.last_mut() {
            Some(l) if l.0 == m => l.1 += x,
            _ => merged.push((m, x)),
        }
    }
    (mean, merged)
}

/// Sets `sigma_u`, `sigma_v` of every filled node to its estimated model
/// error and records the weights in `field.fill_weights` (module docs).
fn model_error(field: &mut Field, weights: &[(usize, Vec<(usize, f64)>)], nx: usize) {
    let (ny, _) = field.status.dim();
    let mut out = Vec::with_capacity(weights.len());
    for (k, w) in weights {
        let (j, i) = ((k / nx) as i32, (k % nx) as i32);
        let at = |m: usize| ((m / nx) as i32 - j, (m % nx) as i32 - i);
        let reach = w
            .iter()
            .map(|&(m, _)| {
                let (a, b) = at(m);
                a.abs().max(b.abs())
            })
            .max()
            .unwrap_or(1);
        let mut model = Vec::new();
        for r in [2.max(reach), 3.max(reach)] {
            let offsets: Vec<(i32, i32)> = (-r..=r)
                .flat_map(|a| (-r..=r).map(move |b| (a, b)))
                .filter(|&(a, b)| {
                    let (jj, ii) = (j + a, i + b);
                    jj >= 0
                        && ii >= 0
                        && (jj as usize) < ny
                        && (ii as usize) < nx
                        && field.status[[jj as usize, ii as usize]] == VALID
                })
                .collect();
            let Some(fit) = [2, 1]
                .into_iter()
                .find_map(|d| PolyFit::new(offsets.clone(), d))
            else {
                continue;
            };
            // delta = sum_m W_m p(x_m) - p(0), as a stencil of the data.
            let mut st = fit.value_at(0, 0).scaled(-1.0);
            for &(m, x) in w {
                let (a, b) = at(m);
                st = st.combine(1.0, &fit.value_at(a, b), x);
            }
            model = st
                .taps
                .iter()
                .map(|t| (((j + t.dj) as usize) * nx + (i + t.di) as usize, t.w))
                .collect();
            break;
        }
        let delta = |a: &ndarray::Array2<f64>| {
            if model.is_empty() {
                return f64::NAN;
            }
            let s = a.as_slice().expect("standard layout");
            model.iter().map(|&(m, x)| x * s[m]).sum::<f64>().abs()
        };
        let (du, dv) = (delta(&field.u), delta(&field.v));
        field.sigma_u[[j as usize, i as usize]] = du;
        field.sigma_v[[j as usize, i as usize]] = dv;
        out.push(FillWeights {
            node: *k,
            weights: w.clone(),
            model,
        });
    }
    field.fill_weights = out;
}

#[cfg(test)]
mod tests;
