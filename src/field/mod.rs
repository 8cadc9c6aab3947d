//! The grid, the vector field of one snapshot, and the status of each vector.
//!
//! Owns: `Grid` (a regular rectangular grid in SI metres), `Field` (u, v, the
//! per-vector standard uncertainties and a status per node) and `Status`.
//! Does not own: how a grid is inferred from scattered rows (that is `io`),
//! nor what changes the status (`validate`, `fill`).
//!
//! Layout invariant, used everywhere: arrays are shaped `(ny, nx)`; element
//! `[j, i]` is the node at `x = x0 + i*dx`, `y = y0 + j*dy`. Tables list nodes
//! row by row: `j` outer, `i` inner, so node number `k = j*nx + i`.
//! `dx` and `dy` are positive.

use ndarray::Array2;

pub mod conditions;
pub mod table;

pub use conditions::{Conditions, Extra};
pub use table::{Table, Values};

/// A regular rectangular grid, in metres.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Grid {
    /// Number of nodes along x (columns).
    pub nx: usize,
    /// Number of nodes along y (rows).
    pub ny: usize,
    /// x of the first column, m.
    pub x0: f64,
    /// y of the first row, m.
    pub y0: f64,
    /// Pitch along x, m.
    pub dx: f64,
    /// Pitch along y, m.
    pub dy: f64,
}

impl Grid {
    /// x of column `i`, m.
    pub fn x(&self, i: usize) -> f64 {
        self.x0 + i as f64 * self.dx
    }
    /// y of row `j`, m.
    pub fn y(&self, j: usize) -> f64 {
        self.y0 + j as f64 * self.dy
    }
    /// Number of nodes.
    pub fn len(&self) -> usize {
        self.nx * self.ny
    }
    /// True when the grid has no node.
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }
    /// Array shape `(ny, nx)`: rows are y, columns x.
    pub fn shape(&self) -> (usize, usize) {
        (self.ny, self.nx)
    }
    /// Describes how `other` differs from `self`, or `None` when both are the
    /// same grid within `rel_tol` of the pitch (printed rounding).
    pub fn difference(&self, other: &Grid, rel_tol: f64) -> Option<String> {
        if self.nx != other.nx || self.ny != other.ny {
            return Some(format!(
                "grid is {} x {} nodes, expected {} x {}",
                other.nx, other.ny, self.nx, self.ny
            ));
        }
        let tx = rel_tol * self.dx;
        let ty = rel_tol * self.dy;
        if (self.dx - other.dx).abs() > tx || (self.dy - other.dy).abs() > ty {
            return Some(format!(
                "grid pitch is {:.6} x {:.6} mm, expected {:.6} x {:.6} mm",
                other.dx * 1e3,
                other.dy * 1e3,
                self.dx * 1e3,
                self.dy * 1e3
            ));
        }
        if (self.x0 - other.x0).abs() > tx || (self.y0 - other.y0).abs() > ty {
            return Some(format!(
                "grid origin is ({:.6}, {:.6}) mm, expected ({:.6}, {:.6}) mm",
                other.x0 * 1e3,
                other.y0 * 1e3,
                self.x0 * 1e3,
                self.y0 * 1e3
            ));
        }
        None
    }
}

/// The status of one vector, as written in the per-frame `status` column.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
#[repr(u8)]
pub enum Status {
    /// A valid measurement.
    Valid = 0,
    /// Rejected by a validation test; after filling, replaced.
    Replaced = 1,
    /// Missing or invalid in the input; after filling, filled.
    Filled = 2,
    /// Masked: no value (outside the measured domain, or not fillable).
    Masked = 3,
}

impl Status {
    /// The numeric code written in the `status` column.
    pub const fn code(self) -> u8 {
        self as u8
    }
}

/// Status code 0: a valid measurement.
pub const VALID: u8 = Status::Valid as u8;
/// Status code 1: an outlier replaced by filling.
pub const REPLACED: u8 = Status::Replaced as u8;
/// Status code 2: invalid in the input and filled.
pub const FILLED: u8 = Status::Filled as u8;
/// Status code 3: masked, no value.
pub const MASKED: u8 = Status::Masked as u8;

/// One snapshot on its grid, in SI.
///
/// `u`, `v` hold NaN where there is no value (status 1 or 2 before filling,
/// 3 always). `sigma_u`, `sigma_v` are per-vector standard uncertainties in
/// m/s: from input columns when given, otherwise NaN until the uncertainty
/// stage sets them.
#[derive(Debug, Clone)]
pub struct Field {
    /// The grid the arrays sit on.
    pub grid: Grid,
    /// Velocity component along x, m/s, shape `(ny, nx)`; NaN where there is no value.
    pub u: Array2<f64>,
    /// Velocity component along y, m/s, shape `(ny, nx)`; NaN where there is no value.
    pub v: Array2<f64>,
    /// Standard uncertainty of u, m/s; NaN until known.
    pub sigma_u: Array2<f64>,
    /// Standard uncertainty of v, m/s; NaN until known.
    pub sigma_v: Array2<f64>,
    /// Per-node status code (`VALID`, `REPLACED`, `FILLED`, `MASKED`).
    pub status: Array2<u8>,
    /// One record per vector the fill stage gave a value (`fill`, `derive`);
    /// empty before filling.
    pub fill_weights: Vec<FillWeights>,
}

/// A filled vector as a linear combination of valid vectors (node numbers
/// `k = j*nx + i` with weights), so that its noise and its correlation with
/// those vectors follow from the weights, and the stencil of valid vectors
/// that estimates its model error (see `fill`).
#[derive(Debug, Clone, PartialEq)]
pub struct FillWeights {
    /// The filled node, `k = j*nx + i`.
    pub node: usize,
    /// The valid nodes and weights whose sum gives the filled value.
    pub weights: Vec<(usize, f64)>,
    /// Empty when the model error could not be estimated.
    pub model: Vec<(usize, f64)>,
}

impl Field {
    /// An all-masked field on `grid`.
    pub fn empty(grid: Grid) -> Self {
        let sh = grid.shape();
        Field {
            grid,
            u: Array2::from_elem(sh, f64::NAN),
            v: Array2::from_elem(sh, f64::NAN),
            sigma_u: Array2::from_elem(sh, f64::NAN),
            sigma_v: Array2::from_elem(sh, f64::NAN),
            status: Array2::from_elem(sh, MASKED),
            fill_weights: Vec::new(),
        }
    }

    /// Builds a field from `u(x, y)`, `v(x, y)` evaluated at every node; every
    /// vector valid. For tests and synthetic data.
    pub fn from_fn(grid: Grid, f: impl Fn(f64, f64) -> (f64, f64)) -> Self {
        let mut fld = Field::empty(grid);
        for j in 0..grid.ny {
            for i in 0..grid.nx {
                let (u, v) = f(grid.x(i), grid.y(j));
                fld.u[[j, i]] = u;
                fld.v[[j, i]] = v;
                fld.status[[j, i]] = VALID;
            }
        }
        fld
    }

    /// A field from measured velocity arrays (m/s, shape `(ny, nx)` of
    /// `grid`): finite pairs are valid measurements, any other node is
    /// marked missing in the input (status `FILLED`, NaN) for the fill
    /// stage. Errors when a shape does not match the grid.
    pub fn from_velocity(grid: Grid, u: Array2<f64>, v: Array2<f64>) -> crate::Result<Self> {
        for (name, a) in [("u", &u), ("v", &v)] {
            if a.dim() != grid.shape() {
                return Err(crate::Error::usage(format!(
                    "{name} has shape {:?}, the grid {:?} (ny, nx)",
                    a.dim(),
                    grid.shape()
                )));
            }
        }
        let mut f = Field::empty(grid);
        for (((j, i), &a), &b) in u.indexed_iter().zip(v.iter()) {
            let ok = a.is_finite() && b.is_finite();
            f.u[[j, i]] = if ok { a } else { f64::NAN };
            f.v[[j, i]] = if ok { b } else { f64::NAN };
            f.status[[j, i]] = if ok { VALID } else { FILLED };
        }
        Ok(f)
    }

    /// Number of nodes whose status is `code`.
    pub fn count(&self, code: u8) -> usize {
        self.status.iter().filter(|&&s| s == code).count()
    }

    /// True where the node carries a value usable by a stencil (valid,
    /// replaced or filled).
    pub fn has_value(&self, j: usize, i: usize) -> bool {
        self.status[[j, i]] != MASKED && self.u[[j, i]].is_finite() && self.v[[j, i]].is_finite()
    }
}

/// Node-by-node columns on a grid (the ensemble or one phase bin), in the
/// node order of the layout invariant above.
#[derive(Debug, Clone)]
pub struct NodeTable {
    /// The grid the columns sit on.
    pub grid: Grid,
    /// Named columns, one value per node in node order; NaN where empty.
    pub columns: Vec<(String, Vec<f64>)>,
}

impl NodeTable {
    /// An empty table on `grid`.
    pub fn new(grid: Grid) -> Self {
        NodeTable {
            grid,
            columns: Vec::new(),
        }
    }
    /// Appends a column; panics if its length is not the number of nodes
    /// (a programming error, not a data error).
    pub fn push(&mut self, name: impl Into<String>, data: Vec<f64>) {
        let name = name.into();
        assert_eq!(
            data.len(),
            self.grid.len(),
            "column '{name}' has {} values for {} nodes",
            data.len(),
            self.grid.len()
        );
        self.columns.push((name, data));
    }
    /// The column named `name`, if present.
    pub fn get(&self, name: &str) -> Option<&[f64]> {
        self.columns
            .iter()
            .find(|(n, _)| n == name)
            .map(|(_, d)| d.as_slice())
    }
    /// A column as an `(ny, nx)` array.
    pub fn array(&self, name: &str) -> Option<Array2<f64>> {
        self.get(name)
            .map(|d| Array2::from_shape_vec(self.grid.shape(), d.to_vec()).expect("column length"))
    }
}

/// Mean of the finite values of `v` (one per node, `k = j*nx + i`, on a
/// grid of `nx` x `ny` nodes) over the box of half-width `half` around node
/// `(j, i)`, cut by the grid's edges; NaN and infinite entries (masked or
/// unknown nodes) are left out. `None` when the box holds no finite value.
/// Summed row by row, `j` outer: the one neighbourhood mean of the `auto`
/// scheme's choice and of the pooled truncation (`stats::systematic`).
pub(crate) fn box_mean(
    v: &[f64],
    nx: usize,
    ny: usize,
    j: usize,
    i: usize,
    half: usize,
) -> Option<f64> {
    let (mut sum, mut cnt) = (0.0, 0usize);
    for jj in j.saturating_sub(half)..(j + half + 1).min(ny) {
        for x in &v[jj * nx + i.saturating_sub(half)..jj * nx + (i + half + 1).min(nx)] {
            if x.is_finite() {
                sum += x;
                cnt += 1;
            }
        }
    }
    (cnt > 0).then(|| sum / cnt as f64)
}

/// Makes every array of `field` row-major contiguous (a no-op for fields
/// built by io), so kernels can index flat slices by `k = j*nx + i`.
pub(crate) fn ensure_standard_layout(field: &mut Field) {
    fn fix<T: Clone>(a: &mut ndarray::Array2<T>) {
        if !a.is_standard_layout() {
            *a = a.as_standard_layout().to_owned();
        }
    }
    fix(&mut field.u);
    fix(&mut field.v);
    fix(&mut field.sigma_u);
    fix(&mut field.sigma_v);
    fix(&mut field.status);
}

/// One node to status `MASKED`, NaN values and uncertainties.
pub fn mask_node(field: &mut Field, j: usize, i: usize) {
    field.status[[j, i]] = MASKED;
    field.u[[j, i]] = f64::NAN;
    field.v[[j, i]] = f64::NAN;
    field.sigma_u[[j, i]] = f64::NAN;
    field.sigma_v[[j, i]] = f64::NAN;
}

/// The node `(i, j)` within `tol` pitches of `(x, y)` (SI), if any.
pub fn node_of(grid: &Grid, x: f64, y: f64, tol: f64) -> Option<(usize, usize)> {
    let fi = (x - grid.x0) / grid.dx;
    let fj = (y - grid.y0) / grid.dy;
    let (ri, rj) = (fi.round(), fj.round());
    let ok = (fi - ri).abs() <= tol
        && (fj - rj).abs() <= tol
        && ri >= 0.0
        && rj >= 0.0
        && (ri as usize) < grid.nx
        && (rj as usize) < grid.ny;
    ok.then_some((ri as usize, rj as usize))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn grid_difference_names_what_differs() {
        let g = Grid {
            nx: 4,
            ny: 3,
            x0: 0.0,
            y0: 0.0,
            dx: 1e-3,
            dy: 1e-3,
        };
        assert!(g.difference(&g, 1e-3).is_none());
        let mut h = g;
        h.nx = 5;
        assert!(g.difference(&h, 1e-3).unwrap().contains("5 x 3"));
        let mut h = g;
        h.dx = 1.1e-3;
        assert!(g.difference(&h, 1e-3).unwrap().contains("pitch"));
    }
}

/// Where a snapshot sits in its run: its index in natural order (0-based,
/// over the whole run, the same in every shard), its name (the frame file's
/// name without extension, or the parquet frame id), and time and phase from
/// the frame table when it gives them.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct FrameMeta {
    /// Index of the frame in the run's natural order, from 0.
    pub index: usize,
    /// The frame's name: file name without extension, or the parquet frame id.
    pub name: String,
    /// Time from the frame table, s; `None` when it gives none.
    pub time_s: Option<f64>,
    /// Phase from the frame table, degrees; `None` when it gives none.
    pub phase_deg: Option<f64>,
}
