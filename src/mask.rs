//! Geometry masks: nodes where there is no flow (a body, a wall, a shadow).
//!
//! Owns: `[mask]` and `[run.mask]` once resolved (`MaskSpec`), the node mask
//! of a run's grid (`NodeMask`), the mask file reader, and setting masked
//! nodes of a frame to status `MASKED` (3) with NaN values. Does not own: the
//! frame files' mask column (`io` parses it with the other columns) or what
//! the stages do with status 3 (they skip it: `fill` never fills it,
//! `validate` never counts it, stencils treat it as a node without a value
//! under the stencil module's edge rule, `stats` leaves it out, `plot` draws
//! it grey).
//!
//! Masked is "no flow here"; invalid (status 2) is "flow, not measured".
//!
//! # Sources of a mask (their union)
//!
//! - `polygons`: closed polygons, vertices in the input's length unit and
//!   axes (as written in the frame files). A node is masked when its
//!   position lies inside, by the even–odd crossing-number rule (common
//!   practice in computational geometry): a ray from the node towards +x
//!   crosses the edges an odd number of times. An edge counts when one end
//!   lies strictly above the node's y and the other at or below it, so a
//!   node exactly level with a vertex is counted once.
//! - `circles`: `[x_centre, y_centre, radius]` in the input's unit; a node
//!   is masked when its distance from the centre is at most the radius.
//! - `file`: a text file (comma or whitespace separated, `#` comments):
//!   either a header naming the input's x and y columns and one row per
//!   masked node (each within the grid tolerance of a node, else an error
//!   naming the line), or a grid of 0/1 with one line per grid row, the
//!   first line at the smallest y *as written in the frame files* and the
//!   first column at the smallest x; its shape must be the run's grid.
//!
//! A run's `[run.mask]` adds to the campaign's `[mask]` unless it says
//! `inherit = false`.

use std::path::{Path, PathBuf};

use ndarray::Array2;
use serde::{Deserialize, Serialize};

use crate::error::{Error, Result};
pub(crate) use crate::field::{mask_node, node_of};
use crate::field::{Field, Grid};
use crate::io::Orientation;

/// `[mask]` / `[run.mask]` as written.
#[derive(Debug, Clone, Default, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct RawMask {
    /// Closed polygons: lists of `[x, y]` vertices, input length unit.
    pub polygons: Option<Vec<Vec<[f64; 2]>>>,
    /// `[x_centre, y_centre, radius]`, input length unit.
    pub circles: Option<Vec<[f64; 3]>>,
    /// A mask file: nodes listed (x, y) or a 0/1 grid.
    pub file: Option<String>,
    /// `[run.mask]` only: also apply the campaign's `[mask]` (default true).
    pub inherit: Option<bool>,
}

/// A mask file as read: what it lists, before a grid is known.
#[derive(Debug, Clone, PartialEq)]
enum FileMask {
    /// Masked node positions in curlew's frame, SI, with their lines.
    Nodes(Vec<(f64, f64, usize)>),
    /// Rows of 0/1 as written (first row: smallest y in the files).
    Grid(Vec<Vec<bool>>),
}

/// The resolved mask of one run, in SI and curlew's frame (y up).
#[derive(Debug, Clone, Default, PartialEq)]
pub struct MaskSpec {
    polygons: Vec<Vec<(f64, f64)>>,
    circles: Vec<(f64, f64, f64)>,
    files: Vec<(PathBuf, FileMask)>,
    y_down: bool,
}

/// Which nodes of a grid are masked (`(ny, nx)`, true = masked).
pub(crate) type NodeMask = Array2<bool>;

impl MaskSpec {
    /// Resolves the campaign's and the run's mask. Coordinates are taken in
    /// the input's unit (`length_scale` metres each) and orientation; mask
    /// files resolve against `base_dir`. Errors name the key or the file.
    pub(crate) fn resolve(
        campaign: Option<&RawMask>,
        run: Option<&RawMask>,
        length_scale: f64,
        orientation: Orientation,
        base_dir: &Path,
        what: &str,
    ) -> Result<MaskSpec> {
        let mut spec = MaskSpec {
            y_down: orientation.y_down,
            ..Default::default()
        };
        let inherit = run.and_then(|r| r.inherit).unwrap_or(true);
        if campaign.and_then(|c| c.inherit).is_some() {
            return Err(Error::usage(
                "[mask] inherit is a key of [run.mask] only (a run's mask adds to the campaign's)",
            ));
        }
        let raws = [campaign.filter(|_| inherit), run];
        let si = |x: f64, y: f64| {
            let (x, y) = orientation.position(x, y);
            (x * length_scale, y * length_scale)
        };
        for raw in raws.into_iter().flatten() {
            for (k, poly) in raw.polygons.iter().flatten().enumerate() {
                if poly.len() < 3 || poly.iter().flatten().any(|v| !v.is_finite()) {
                    return Err(Error::usage(format!(
                        "{what}: mask polygon {} needs at least 3 vertices [x, y] of finite numbers, \
                         it has {}",
                        k + 1,
                        poly.len()
                    )));
                }
                spec.polygons
                    .push(poly.iter().map(|&[x, y]| si(x, y)).collect());
            }
            for &[x, y, r] in raw.circles.iter().flatten() {
                if !(x.is_finite() && y.is_finite() && r.is_finite() && r > 0.0) {
                    return Err(Error::usage(format!(
                        "{what}: mask circle [{x}, {y}, {r}] needs a finite centre and a positive radius"
                    )));
                }
                let (cx, cy) = si(x, y);
                spec.circles.push((cx, cy, r * length_scale));
            }
            if let Some(f) = &raw.file {
                let path = crate::io::resolve_path(base_dir, f);
                let fm = read_file(&path, length_scale, orientation)?;
                spec.files.push((path, fm));
            }
        }
        Ok(spec)
    }

    /// True when the mask masks nothing.
    pub fn is_empty(&self) -> bool {
        self.polygons.is_empty() && self.circles.is_empty() && self.files.is_empty()
    }

    /// The masked nodes of `grid`; `tol` is the grid tolerance in pitches
    /// for nodes listed in a file. Errors name the mask file and line.
    pub fn nodes(&self, grid: &Grid, tol: f64) -> Result<NodeMask> {
        let mut m = NodeMask::from_elem(grid.shape(), false);
        for ((j, i), masked) in m.indexed_iter_mut() {
            let (x, y) = (grid.x(i), grid.y(j));
            *masked = self
                .circles
                .iter()
                .any(|&(cx, cy, r)| (x - cx).hypot(y - cy) <= r)
                || self.polygons.iter().any(|p| inside(p, x, y));
        }
        for (path, fm) in &self.files {
            match fm {
                FileMask::Nodes(list) => {
                    for &(x, y, line) in list {
                        let (i, j) = node_of(grid, x, y, tol).ok_or_else(|| {
                            Error::data(format!(
                                "mask node ({}, {}) m is not on the run's grid (x {}..{} m, \
                                 y {}..{} m, pitch {} x {} m, tolerance {tol} pitch)",
                                x,
                                y,
                                grid.x0,
                                grid.x(grid.nx - 1),
                                grid.y0,
                                grid.y(grid.ny - 1),
                                grid.dx,
                                grid.dy
                            ))
                            .with_path(path)
                            .with_line(line)
                        })?;
                        m[[j, i]] = true;
                    }
                }
                FileMask::Grid(rows) => {
                    let ncol = rows.first().map_or(0, Vec::len);
                    if rows.len() != grid.ny || ncol != grid.nx {
                        return Err(Error::data(format!(
                            "the 0/1 mask grid is {} rows x {ncol} columns; the run's grid is {} \
                             rows (y) x {} columns (x)",
                            rows.len(),
                            grid.ny,
                            grid.nx
                        ))
                        .with_path(path));
                    }
                    for (r, row) in rows.iter().enumerate() {
                        let j = if self.y_down { grid.ny - 1 - r } else { r };
                        for (i, &b) in row.iter().enumerate() {
                            m[[j, i]] |= b;
                        }
                    }
                }
            }
        }
        Ok(m)
    }
}

/// Sets every masked node of `field` to status `MASKED` with NaN values
/// and uncertainties.
pub(crate) fn apply(mask: &NodeMask, field: &mut Field) {
    for ((j, i), &m) in mask.indexed_iter() {
        if m {
            mask_node(field, j, i);
        }
    }
}

/// The nodes a run's figures draw grey (node order), `None` when there is
/// none: the geometry mask's nodes and every node masked in every frame
/// the statistics counted (a mask column of the frame files), read from
/// the ensemble's status counts: a node that was never valid, replaced or
/// filled in any of its frames was masked in all of them. A node masked
/// in some frames only (a moving body) keeps its statistics of the others
/// and is drawn as data.
pub(crate) fn figure_mask(
    geometry: Option<&NodeMask>,
    ensemble: &crate::field::NodeTable,
) -> Option<Vec<bool>> {
    let n = ensemble.grid.len();
    let mut m: Vec<bool> = geometry.map_or_else(|| vec![false; n], |g| g.iter().copied().collect());
    if let (Some(nv), Some(fo), Some(ff)) = (
        ensemble.get("n_valid"),
        ensemble.get("outlier_frac"),
        ensemble.get("filled_frac"),
    ) {
        for (k, b) in m.iter_mut().enumerate() {
            // fractions are NaN when no frame was counted: nothing to say
            *b |= nv[k] == 0.0 && fo[k] == 0.0 && ff[k] == 0.0;
        }
    }
    m.iter().any(|&b| b).then_some(m)
}

/// Even–odd rule: is `(x, y)` inside the closed polygon `p`?
fn inside(p: &[(f64, f64)], x: f64, y: f64) -> bool {
    let mut odd = false;
    let n = p.len();
    for k in 0..n {
        let (xa, ya) = p[k];
        let (xb, yb) = p[(k + 1) % n];
        if (ya > y) != (yb > y) {
            let xc = xa + (y - ya) / (yb - ya) * (xb - xa);
            if x < xc {
                odd = !odd;
            }
        }
    }
    odd
}

/// Reads a mask file (see the module documentation for the two layouts).
fn read_file(path: &Path, length_scale: f64, o: Orientation) -> Result<FileMask> {
    let text = std::fs::read_to_string(path).map_err(|e| Error::io(path, e))?;
    let mut lines = text
        .lines()
        .enumerate()
        .map(|(k, l)| (k + 1, l.trim()))
        .filter(|(_, l)| !l.is_empty() && !l.starts_with('#'));
    let Some((first_no, first)) = lines.next() else {
        return Err(Error::data("the mask file is empty").with_path(path));
    };
    let head = mask_cells(first);
    let numeric = |c: &str| c.parse::<f64>().is_ok();
    if head.iter().all(|c| numeric(c)) {
        // A 0/1 grid.
        return read_grid(path, std::iter::once((first_no, first)).chain(lines));
    }
    // Nodes listed under a header with x and y.
    let col = |name: &str| {
        head.iter().position(|h| h == name).ok_or_else(|| {
            Error::data(format!(
                "a mask file lists nodes under a header with columns x and y (or is a 0/1 \
                 grid); the header has: {}",
                head.join(", ")
            ))
            .with_path(path)
            .with_line(first_no)
        })
    };
    let (kx, ky) = (col("x")?, col("y")?);
    read_nodes(path, lines, (kx, ky), length_scale, o)
}

/// The cells of a mask file's line: split at commas, semicolons and
/// blanks, quotes removed.
fn mask_cells(line: &str) -> Vec<String> {
    line.split(|c: char| c == ',' || c == ';' || c.is_whitespace())
        .filter(|c| !c.is_empty())
        .map(|c| c.trim_matches('"').to_string())
        .collect()
}

/// A 0/1 grid mask from its numbered lines; every row as long as the first.
fn read_grid<'a>(path: &Path, lines: impl Iterator<Item = (usize, &'a str)>) -> Result<FileMask> {
    let mut rows = Vec::new();
    for (no, line) in lines {
        let row: Result<Vec<bool>> = mask_cells(line)
            .iter()
            .map(|c| match c.as_str() {
                "0" => Ok(false),
                "1" => Ok(true),
                other => Err(
                    Error::data(format!("'{other}': a 0/1 mask grid holds only 0 and 1"))
                        .with_path(path)
                        .with_line(no),
                ),
            })
            .collect();
        let row = row?;
        if let Some(r0) = rows.first().map(Vec::len).filter(|&n| n != row.len()) {
            return Err(Error::data(format!(
                "the row has {} cells, the first row {r0}",
                row.len()
            ))
            .with_path(path)
            .with_line(no));
        }
        rows.push(row);
    }
    Ok(FileMask::Grid(rows))
}

/// The masked nodes listed on the data lines below the header, x and y in
/// cells `kx` and `ky`, scaled to metres and oriented.
fn read_nodes<'a>(
    path: &Path,
    lines: impl Iterator<Item = (usize, &'a str)>,
    (kx, ky): (usize, usize),
    length_scale: f64,
    o: Orientation,
) -> Result<FileMask> {
    let mut nodes = Vec::new();
    for (no, line) in lines {
        let c = mask_cells(line);
        let get = |k: usize, name: &str| -> Result<f64> {
            c.get(k)
                .and_then(|s| s.parse::<f64>().ok())
                .filter(|v| v.is_finite())
                .ok_or_else(|| {
                    Error::data(format!(
                        "'{}': a masked node's {name} must be a number",
                        c.get(k).map_or("", String::as_str)
                    ))
                    .with_path(path)
                    .with_line(no)
                    .with_column(name)
                })
        };
        let (x, y) = o.position(get(kx, "x")?, get(ky, "y")?);
        nodes.push((x * length_scale, y * length_scale, no));
    }
    Ok(FileMask::Nodes(nodes))
}

#[cfg(test)]
mod tests;
