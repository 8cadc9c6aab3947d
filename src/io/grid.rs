//! Grid inference: from the scattered `(x, y)` of a frame's rows to a regular
//! rectangular grid, and the placement of each row on its node.
//!
//! Owns: the inference kernel (`infer_axis`) and the assembly of parsed rows
//! into a `Field` (`assemble`). Does not own: parsing (`text`, `parquet`).
//!
//! # Method (`infer_axis`, one axis at a time)
//!
//! Common practice for gridded PIV output: vectors sit on a regular lattice
//! `c_i = c0 + i h`, but coordinates are printed with rounding and whole
//! columns may be missing (masks, a model in view).
//!
//! 1. Sort the coordinate values and drop exact repeats: `d_0 < ... < d_m`.
//! 2. Clustering: values closer than `tol h` (h = median of the gaps
//!    `d_{k+1} - d_k`) are one node (re-rounded copies) and merge into a
//!    cluster whose centre is their mean. When the sorted gaps fall into two
//!    populations (the largest ratio of consecutive sorted gaps exceeds
//!    `max(3, (1 - 2 tol) / (2 tol))`, there are at least as many small gaps
//!    as large ones and at least two large ones: jittered copies of each
//!    node, not one stray value far away), the small ones merge instead, split at the geometric mean of the two gaps
//!    at the jump. The pitch estimate `h` is then the median gap between
//!    cluster centres.
//! 3. Node indices are counted from the gaps: `i_{k+1} = i_k + max(1,
//!    round(gap_k / h))`, so a gap of two pitches is one missing column and
//!    rounding errors never accumulate along the axis. A gap farther than
//!    `2 tol` pitches from a whole number of pitches makes the value after
//!    it the offending one.
//! 4. Origin and pitch: the least-squares line `c = c0 + h i` through the
//!    cluster centres (its pitch error from printed rounding of ±r is about
//!    `r sqrt(12 / n^3)`, far below the rounding itself). When the line
//!    through the first and last centres already fits every centre to 1e-9
//!    of a pitch (coordinates without rounding), that exact line is used so
//!    clean inputs give clean grids.
//! 5. Every distinct value must lie within `tol h` of its node; the first
//!    (smallest) that does not is returned as the offending value.
//!
//! Cost: O(n log n) for the sort of n values; the rest is linear.
//! Edge behaviour: fewer than two distinct values is an error (no pitch);
//! non-finite values never reach this kernel (the readers reject them).

use ndarray::Array2;

use crate::error::{Error, Result};
use crate::field::{Field, Grid, FILLED, VALID};

/// One inferred axis, in the file's units.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct Axis {
    pub origin: f64,
    pub pitch: f64,
    pub n: usize,
}

/// Why an axis could not be inferred.
#[derive(Debug, Clone, PartialEq)]
pub(crate) enum AxisError {
    /// Fewer than two distinct values.
    TooFew(usize),
    /// `value` is farther than the tolerance from the nearest node `nearest`.
    Irregular {
        value: f64,
        nearest: f64,
        pitch: f64,
    },
    /// `value` lies `nodes` pitches from the first node, far more than the
    /// values could fill (a stray coordinate).
    Stray { value: f64, pitch: f64, nodes: f64 },
    /// The pitch is too small for the coordinates to resolve (subnormal,
    /// or below 1e-12 of the largest coordinate).
    Unresolved { pitch: f64, largest: f64 },
}

fn gaps(c: &[f64]) -> Vec<f64> {
    c.windows(2).map(|w| w[1] - w[0]).collect()
}

/// The distinct values of `values`, ascending (before `dedup`, which the
/// caller applies). Files list nodes row by row, so x comes as ascending
/// runs over the same few values: the first run gives the set, and each
/// later value is looked up by a pointer that only moves forward within a
/// run (one linear pass). Values not found are collected and merged in by a
/// sort. When the runs are not like that (descending files, say) and the
/// lookups cost more than a few passes, it falls back to sorting everything.
/// Either way the result is the same set.
fn distinct_sorted(values: &[f64]) -> Vec<f64> {
    // Runs of one value (y along a row of a row-ordered file) collapse first.
    let mut v: Vec<f64> = Vec::with_capacity(values.len());
    for &x in values {
        if v.last() != Some(&x) {
            v.push(x);
        }
    }
    let first = v
        .windows(2)
        .position(|w| w[1] <= w[0])
        .map_or(v.len(), |p| p + 1);
    let mut d: Vec<f64> = v[..first].to_vec();
    let mut extra: Vec<f64> = Vec::new();
    let (mut ptr, mut prev, mut steps) = (0usize, f64::NEG_INFINITY, 0usize);
    let budget = 4 * v.len() + 1024;
    for &x in &v[first..] {
        if x < prev {
            ptr = 0;
        }
        prev = x;
        while ptr < d.len() && d[ptr] < x {
            ptr += 1;
            steps += 1;
        }
        if steps > budget {
            v.sort_unstable_by(f64::total_cmp);
            return v;
        }
        if ptr < d.len() && d[ptr] == x {
            continue;
        }
        extra.push(x);
    }
    if !extra.is_empty() {
        d.extend(extra);
        d.sort_unstable_by(f64::total_cmp);
    }
    d
}

/// Infers a regular axis from coordinate values (any order, repeats
/// allowed). `tol` is the tolerance in pitches (0 < tol < 0.5). See the
/// module documentation for the method.
pub(crate) fn infer_axis(values: &[f64], tol: f64) -> std::result::Result<Axis, AxisError> {
    let mut d = distinct_sorted(values);
    d.dedup();
    if d.len() < 2 {
        return Err(AxisError::TooFew(d.len()));
    }
    // Step 2: pitch estimate and clustering.
    let centres = cluster_centres(&d, tol);
    if centres.len() < 2 {
        return Err(AxisError::TooFew(centres.len()));
    }
    let h = crate::robust::median(&mut gaps(&centres));
    let largest = d[0].abs().max(d[d.len() - 1].abs());
    if !h.is_normal() {
        return Err(AxisError::Unresolved { pitch: h, largest });
    }
    // Step 3: indices from the gaps. A grid of more nodes than 8 per value
    // (+ 64) is a stray coordinate, refused before any index can overflow.
    let most = 8.0 * values.len() as f64 + 64.0;
    let idx = node_indices(&centres, h, tol, most)?;
    // Step 4: the line through the centres.
    let (origin, pitch) = line_through(&centres, &idx);
    if !(pitch.is_normal() && pitch > 1e-12 * largest) {
        return Err(AxisError::Unresolved { pitch, largest });
    }
    // Step 5: every value on a node.
    for &x in &d {
        let i = ((x - origin) / pitch).round();
        let nearest = origin + i * pitch;
        if (x - nearest).abs() > tol * pitch {
            return Err(AxisError::Irregular {
                value: x,
                nearest,
                pitch,
            });
        }
    }
    let n = ((d[d.len() - 1] - origin) / pitch).round() as usize + 1;
    Ok(Axis { origin, pitch, n })
}

/// Step 2: the centres of the clusters of the distinct sorted values `d`
/// (values closer than the merge distance are copies of one node).
fn cluster_centres(d: &[f64], tol: f64) -> Vec<f64> {
    let mut gs = gaps(d);
    gs.sort_unstable_by(f64::total_cmp);
    let ratio_limit = ((1.0 - 2.0 * tol) / (2.0 * tol)).max(3.0);
    let (jump, k_jump) = gs
        .windows(2)
        .enumerate()
        .map(|(k, w)| (w[1] / w[0], k))
        .fold((1.0, 0), |best, c| if c.0 > best.0 { c } else { best });
    let (n_small, n_large) = (k_jump + 1, gs.len() - k_jump - 1);
    let merge_below = if jump > ratio_limit && n_large >= 2 && n_small >= n_large {
        // Two populations: copies of a node (small gaps) and pitches.
        (gs[k_jump] * gs[k_jump + 1]).sqrt()
    } else {
        tol * crate::robust::median(&mut gs)
    };
    let mut centres: Vec<f64> = Vec::with_capacity(d.len());
    let (mut sum, mut count) = (d[0], 1usize);
    for w in d.windows(2) {
        if w[1] - w[0] < merge_below {
            sum += w[1];
            count += 1;
        } else {
            centres.push(sum / count as f64);
            sum = w[1];
            count = 1;
        }
    }
    centres.push(sum / count as f64);
    centres
}

/// Step 3: the node index of each centre from the gaps in pitches `h`;
/// more than `most` nodes is a stray value.
fn node_indices(
    centres: &[f64],
    h: f64,
    tol: f64,
    most: f64,
) -> std::result::Result<Vec<usize>, AxisError> {
    let mut idx = Vec::with_capacity(centres.len());
    idx.push(0usize);
    for w in centres.windows(2) {
        let ratio = (w[1] - w[0]) / h;
        let reach = *idx.last().unwrap() as f64 + ratio;
        // NaN or beyond the cap both refuse (a NaN reach is never `<=`).
        if reach.is_nan() || reach > most {
            return Err(AxisError::Stray {
                value: w[1],
                pitch: h,
                nodes: reach,
            });
        }
        let steps = ratio.round().max(1.0);
        if (ratio - steps).abs() > 2.0 * tol {
            return Err(AxisError::Irregular {
                value: w[1],
                nearest: w[0] + steps * h,
                pitch: h,
            });
        }
        idx.push(idx.last().unwrap() + steps as usize);
    }
    Ok(idx)
}

/// Step 4: (origin, pitch) of the line through the centres at their
/// indices: through the end centres when every centre lies on it, else the
/// least-squares line.
fn line_through(centres: &[f64], idx: &[usize]) -> (f64, f64) {
    let last = centres.len() - 1;
    let end_pitch = (centres[last] - centres[0]) / idx[last] as f64;
    let end_fits = centres
        .iter()
        .zip(idx)
        .all(|(&c, &i)| (c - (centres[0] + i as f64 * end_pitch)).abs() <= 1e-9 * end_pitch);
    if end_fits {
        (centres[0], end_pitch)
    } else {
        let n = centres.len() as f64;
        let im = idx.iter().map(|&i| i as f64).sum::<f64>() / n;
        let cm = centres.iter().sum::<f64>() / n;
        let (mut sxy, mut sxx) = (0.0, 0.0);
        for (&c, &i) in centres.iter().zip(idx) {
            let di = i as f64 - im;
            sxy += di * (c - cm);
            sxx += di * di;
        }
        let b = sxy / sxx;
        (cm - b * im, b)
    }
}

/// Rows of one frame as parsed, in the file's units. `invalid[k]` marks a
/// vector the input itself declares invalid (empty, NaN or flagged);
/// `line[k]` is the 1-based physical line (text) or row (parquet).
#[derive(Debug, Default, Clone)]
pub(crate) struct RawRows {
    pub x: Vec<f64>,
    pub y: Vec<f64>,
    pub u: Vec<f64>,
    pub v: Vec<f64>,
    pub sigma_u: Option<Vec<f64>>,
    pub sigma_v: Option<Vec<f64>>,
    pub invalid: Vec<bool>,
    pub line: Vec<usize>,
    /// Rows the input's mask column marks as masked (`crate::mask`).
    pub masked: Option<Vec<bool>>,
    /// Units the header states (text frames; `super::units`).
    pub units: super::units::HeaderUnits,
}

impl RawRows {
    pub(crate) fn len(&self) -> usize {
        self.x.len()
    }
    pub(crate) fn is_empty(&self) -> bool {
        self.x.is_empty()
    }
}

/// `x` to 6 significant digits, in exponent form outside 1e-4 .. 1e7 (a
/// message never prints a 300-digit number).
pub(crate) fn sig6(x: f64) -> String {
    let a = x.abs();
    let e = format!("{x:.5e}");
    if a == 0.0 || !a.is_finite() || (1e-4..1e7).contains(&a) {
        let r: f64 = e.parse().unwrap_or(x);
        format!("{r}")
    } else {
        let (m, p) = e.split_once('e').unwrap_or((&e, "0"));
        let m = if m.contains('.') {
            m.trim_end_matches('0').trim_end_matches('.')
        } else {
            m
        };
        format!("{m}e{p}")
    }
}

/// An axis error as a data error naming the row whose value is nearest the
/// offending one (a cluster centre need not equal any row's value).
fn axis_error(e: AxisError, axis: &str, values: &[f64], rows: &RawRows, tol: f64) -> Error {
    let row_of = |value: f64| {
        let k = (0..values.len())
            .min_by(|&a, &b| {
                (values[a] - value)
                    .abs()
                    .total_cmp(&(values[b] - value).abs())
            })
            .unwrap_or(0);
        (
            values.get(k).copied().unwrap_or(value),
            rows.line.get(k).copied().unwrap_or(0),
        )
    };
    let (message, value) = match e {
        AxisError::TooFew(n) => {
            return Error::data(format!(
                "a grid needs at least 2 distinct {axis} values, found {n}"
            ))
        }
        AxisError::Irregular {
            value,
            nearest,
            pitch,
        } => (
            format!(
                "is not on a regular grid (pitch {}, nearest node {}, tolerance {tol} pitch)",
                sig6(pitch),
                sig6(nearest)
            ),
            value,
        ),
        AxisError::Stray {
            value,
            pitch,
            nodes,
        } => (
            format!(
                "lies {} pitches ({}) from the first node, far outside the other rows; \
                 is this coordinate stray?",
                sig6(nodes),
                sig6(pitch)
            ),
            value,
        ),
        AxisError::Unresolved { pitch, largest } => (
            format!(
                "gives a pitch of {} that the coordinates (up to {}) cannot resolve",
                sig6(pitch),
                sig6(largest)
            ),
            largest,
        ),
    };
    let (v, line) = row_of(value);
    let kind = if message.starts_with("is not on") {
        "irregular grid: "
    } else {
        ""
    };
    let mut err = Error::data(format!("{kind}{axis} = {} {message}", sig6(v))).with_column(axis);
    if line > 0 {
        err = err.with_line(line);
    }
    err
}

/// Infers the grid of `rows` in the file's units (x, y pitches positive).
pub(crate) fn infer_grid(rows: &RawRows, tol: f64) -> Result<(Axis, Axis)> {
    if rows.is_empty() {
        return Err(Error::data("the frame has no rows"));
    }
    let ax = infer_axis(&rows.x, tol).map_err(|e| axis_error(e, "x", &rows.x, rows, tol))?;
    let ay = infer_axis(&rows.y, tol).map_err(|e| axis_error(e, "y", &rows.y, rows, tol))?;
    // A stray coordinate far outside the others (on the lattice by chance)
    // would make a huge, nearly empty grid: refuse rather than allocate it.
    let nodes = ax.n.saturating_mul(ay.n);
    if nodes > 8 * rows.len() + 64 {
        return Err(Error::data(format!(
            "the rows span a {} x {} grid but only {} nodes have a row; is a coordinate stray? \
             x spans {} .. {}, y spans {} .. {}",
            ax.n,
            ay.n,
            rows.len(),
            ax.origin,
            ax.origin + (ax.n - 1) as f64 * ax.pitch,
            ay.origin,
            ay.origin + (ay.n - 1) as f64 * ay.pitch
        )));
    }
    Ok((ax, ay))
}

/// The grid in SI from file-unit axes.
pub(crate) fn grid_si(ax: Axis, ay: Axis, length_scale: f64) -> Grid {
    Grid {
        nx: ax.n,
        ny: ay.n,
        x0: ax.origin * length_scale,
        y0: ay.origin * length_scale,
        dx: ax.pitch * length_scale,
        dy: ay.pitch * length_scale,
    }
}

/// Places every row on its node and returns the field in SI. Invalid input
/// vectors and nodes with no row get status FILLED and NaN velocities.
/// Two rows on one node are an error naming both lines.
pub(crate) fn assemble(
    rows: &RawRows,
    tol: f64,
    length_scale: f64,
    velocity_scale: f64,
    what: &str,
) -> Result<Field> {
    let (ax, ay) = infer_grid(rows, tol)?;
    let grid = grid_si(ax, ay, length_scale);
    let mut f = Field::empty(grid);
    f.status.fill(FILLED);
    // The line (or row) that gave each node; 0 = none yet.
    let mut owner: Array2<usize> = Array2::zeros(grid.shape());
    let (rx, ry) = (1.0 / ax.pitch, 1.0 / ay.pitch);
    for k in 0..rows.len() {
        // In range: infer_grid put every value within tolerance of a node,
        // so the scaled offset is >= -tol and +0.5 then truncation rounds
        // (without a libm call: `round` was 3 % of a frame read in a profile).
        let i = ((rows.x[k] - ax.origin) * rx + 0.5) as usize;
        let j = ((rows.y[k] - ay.origin) * ry + 0.5) as usize;
        if i >= ax.n || j >= ay.n {
            return Err(Error::data(format!(
                "x = {}, y = {} falls outside the inferred {} x {} grid",
                sig6(rows.x[k]),
                sig6(rows.y[k]),
                ax.n,
                ay.n
            ))
            .with_line(rows.line[k]));
        }
        let o = &mut owner[[j, i]];
        if *o != 0 {
            return Err(Error::data(format!(
                "duplicate node (x = {}, y = {}): {what}s {} and {} both give it",
                rows.x[k], rows.y[k], *o, rows.line[k]
            ))
            .with_line(rows.line[k]));
        }
        *o = rows.line[k];
        if let Some(s) = &rows.sigma_u {
            f.sigma_u[[j, i]] = s[k] * velocity_scale;
        }
        if let Some(s) = &rows.sigma_v {
            f.sigma_v[[j, i]] = s[k] * velocity_scale;
        }
        if !rows.invalid[k] {
            f.u[[j, i]] = rows.u[k] * velocity_scale;
            f.v[[j, i]] = rows.v[k] * velocity_scale;
            f.status[[j, i]] = VALID;
        }
    }
    Ok(f)
}

#[cfg(test)]
mod tests;
