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
//!   Garcia 2010 (`pls`), started from the neighbour-mean fill, with the
//!   known values held fixed.
//!
//! Either way a hole further than `max_distance` nodes (Chebyshev distance,
//! default 3) from the nearest valid vector is not filled but masked: deep
//! inside a large gap (a shadow, a reflection) any value would be invented.
//!
//! # Uncertainty of a filled vector
//!
//! `sigma_u` (and likewise `sigma_v`) at a filled node is
//! `sqrt(s^2 + mean(sigma_nb^2))`: `s` the sample standard deviation (n - 1)
//! of the values of its 8-neighbours that carry values after filling (the
//! local spread: noise plus the variation of the flow across the gap), and
//! `mean(sigma_nb^2)` over those neighbours whose own sigma is finite (input
//! columns, or nodes filled in an earlier round: so uncertainty grows
//! towards a gap's centre). Both are taken over the neighbours used by the
//! neighbour-mean round that filled the node (for inpainting too, which
//! starts from that fill). With fewer than 2 neighbours sigma is NaN (only
//! possible with `min_neighbours = 1`). Valid nodes' sigma is not touched.
//!
//! Cost: no allocation per node; per frame, lists of holes and a distance
//! map. Inpainting costs about 2 x `inpaint_iterations` 2-D DCTs per
//! component and frame with holes.

pub mod pls;

use crate::field::{Field, FILLED, MASKED, REPLACED, VALID};

/// How holes are filled.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
pub enum Method {
    NeighbourMean,
    Inpaint,
}

#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Params {
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

#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
pub struct Counts {
    /// Rejected vectors that were replaced.
    pub replaced: usize,
    /// Missing or invalid input vectors that were filled.
    pub filled: usize,
    /// Nodes that could not be filled (now masked).
    pub unfilled: usize,
}

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
pub fn fill(p: &Params, field: &mut Field) -> Counts {
    crate::validate::ensure_standard_layout(field);
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
    neighbour_mean(p, field, &mut has, &mut open, ny, nx);
    if p.method == Method::Inpaint {
        inpaint(p, field, &has, ny, nx);
    }
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
) {
    let need = p.min_neighbours.clamp(1, 8);
    let mut counts: Vec<u8> = vec![0; open.len()];
    let mut batch: Vec<(usize, [f64; 4])> = Vec::new();
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
                batch.push((k, neighbour_stats(field, has, k, ny, nx)));
            }
        }
        let (us, vs) = (
            field.u.as_slice_mut().unwrap(),
            field.v.as_slice_mut().unwrap(),
        );
        for &(k, st) in &batch {
            us[k] = st[0];
            vs[k] = st[1];
        }
        let (su, sv) = (
            field.sigma_u.as_slice_mut().unwrap(),
            field.sigma_v.as_slice_mut().unwrap(),
        );
        for &(k, st) in &batch {
            su[k] = st[2];
            sv[k] = st[3];
            has[k] = true;
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

/// Mean and filling uncertainty `[u, v, sigma_u, sigma_v]` of node `k` from
/// the 8-neighbours that have values (see the module docs).
fn neighbour_stats(field: &Field, has: &[bool], k: usize, ny: usize, nx: usize) -> [f64; 4] {
    let us = field.u.as_slice().unwrap();
    let vs = field.v.as_slice().unwrap();
    let sus = field.sigma_u.as_slice().unwrap();
    let svs = field.sigma_v.as_slice().unwrap();
    let (j, i) = (k / nx, k % nx);
    let (mut n, mut mu, mut mv, mut qu, mut qv) = (0usize, 0.0, 0.0, 0.0, 0.0);
    let (mut ns, mut s2u, mut s2v) = (0usize, 0.0, 0.0);
    for (dj, di) in NB {
        let (jj, ii) = (j as isize + dj, i as isize + di);
        if jj < 0 || ii < 0 || jj as usize >= ny || ii as usize >= nx {
            continue;
        }
        let q = jj as usize * nx + ii as usize;
        if !has[q] {
            continue;
        }
        // Welford
        n += 1;
        let (du, dv) = (us[q] - mu, vs[q] - mv);
        mu += du / n as f64;
        mv += dv / n as f64;
        qu += du * (us[q] - mu);
        qv += dv * (vs[q] - mv);
        if sus[q].is_finite() && svs[q].is_finite() {
            ns += 1;
            s2u += sus[q] * sus[q];
            s2v += svs[q] * svs[q];
        }
    }
    if n < 2 {
        return [mu, mv, f64::NAN, f64::NAN];
    }
    let (mut vu, mut vv) = (qu / (n - 1) as f64, qv / (n - 1) as f64);
    if ns > 0 {
        vu += s2u / ns as f64;
        vv += s2v / ns as f64;
    }
    [mu, mv, vu.sqrt(), vv.sqrt()]
}

#[cfg(test)]
mod tests;
