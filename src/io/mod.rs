//! Reading frames and frame tables; writing tables, node tables and the
//! manifest; atomic output folders.
//!
//! Owns: every byte that enters or leaves curlew. Does not own: what the
//! values mean (stages) or which files a run has (the plan lists them).
//!
//! STUB (skeleton): signatures agreed between the stages; the io owner
//! replaces the `todo!()` bodies.

pub mod table;

use std::path::{Path, PathBuf};

use crate::error::Result;
use crate::field::{Field, Grid, NodeTable};
pub use table::{Table, Values};

/// The text formats and parquet.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
pub enum Format {
    Csv,
    Tsv,
    /// Whitespace-separated, `#` comment lines.
    Text,
    Parquet,
}

/// Header names of the columns in the input files.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct ColumnMap {
    pub x: String,
    pub y: String,
    pub u: String,
    pub v: String,
    pub sigma_u: Option<String>,
    pub sigma_v: Option<String>,
    pub flag: Option<String>,
    /// The integer frame column of a parquet long table.
    pub frame: String,
}

/// Everything a reader needs, resolved to SI factors.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct InputSpec {
    pub format: Format,
    pub columns: ColumnMap,
    /// Metres per unit of x and y (1e-3 for mm, the pixel size for px).
    pub length_scale: f64,
    /// (m/s) per unit of u and v (and sigma_u, sigma_v): 1e-3 for mm/s,
    /// pixel_size / pulse_separation for px displacement.
    pub velocity_scale: f64,
    /// Lines to skip before the header (text preambles).
    pub skip_lines: usize,
    /// Relative tolerance on node positions, in grid pitches, for printed
    /// rounding when inferring the grid.
    pub grid_tolerance: f64,
}

/// Where one frame comes from.
#[derive(Debug, Clone, PartialEq)]
pub enum FrameSource {
    /// One file, one snapshot.
    File(PathBuf),
    /// One frame id of a parquet long table.
    Parquet { path: PathBuf, frame: i64 },
}

/// Expands a run's `frames` pattern (a glob in natural sort order, or one
/// parquet file) into frame sources with their names. Error (data) if
/// nothing matches, naming the pattern.
pub fn list_frames(spec: &InputSpec, pattern: &str) -> Result<Vec<(String, FrameSource)>> {
    let _ = (spec, pattern);
    todo!("io: list_frames")
}

/// Reads one frame into a field on its inferred grid, in SI.
pub fn read_frame(spec: &InputSpec, source: &FrameSource) -> Result<Field> {
    let _ = (spec, source);
    todo!("io: read_frame")
}

/// Reads only what `check` needs: the grid of one frame (header and x, y).
pub fn read_grid(spec: &InputSpec, source: &FrameSource) -> Result<Grid> {
    let _ = (spec, source);
    todo!("io: read_grid")
}

/// Time and phase of frames, keyed by frame name (file stem or parquet id).
#[derive(Debug, Clone, Default)]
pub struct FrameTable {
    pub rows: Vec<(String, Option<f64>, Option<f64>)>,
}

impl FrameTable {
    pub fn lookup(&self, name: &str) -> Option<(Option<f64>, Option<f64>)> {
        self.rows.iter().find(|r| r.0 == name).map(|r| (r.1, r.2))
    }
}

pub fn read_frame_table(path: &Path) -> Result<FrameTable> {
    let _ = path;
    todo!("io: read_frame_table")
}

/// Writes `table` as CSV (header line, full-precision floats, NaN as empty).
pub fn write_csv(path: &Path, table: &Table) -> Result<()> {
    let _ = (path, table);
    todo!("io: write_csv")
}

/// Writes `table` as parquet.
pub fn write_parquet(path: &Path, table: &Table) -> Result<()> {
    let _ = (path, table);
    todo!("io: write_parquet")
}

/// A node table as a `Table` with `x`, `y` first, then its columns.
pub fn node_table_to_table(nt: &NodeTable) -> Table {
    let mut t = Table::new();
    let g = nt.grid;
    let mut xs = Vec::with_capacity(g.len());
    let mut ys = Vec::with_capacity(g.len());
    for j in 0..g.ny {
        for i in 0..g.nx {
            xs.push(g.x(i));
            ys.push(g.y(j));
        }
    }
    t.push("x", Values::F64(xs));
    t.push("y", Values::F64(ys));
    for (name, data) in &nt.columns {
        t.push(name.clone(), Values::F64(data.clone()));
    }
    t
}

/// Size in bytes and SHA-256 (hex) of a file.
pub fn hash_file(path: &Path) -> Result<(u64, String)> {
    let _ = path;
    todo!("io: hash_file")
}

/// An output folder that appears only when the work succeeded: everything
/// is written into a temporary sibling folder, and `commit` swaps it in place
/// of the old one.
pub struct OutputDir {
    pub final_path: PathBuf,
    pub temp_path: PathBuf,
}

impl OutputDir {
    pub fn begin(final_path: &Path) -> Result<OutputDir> {
        let _ = final_path;
        todo!("io: OutputDir::begin")
    }
    pub fn path(&self) -> &Path {
        &self.temp_path
    }
    pub fn commit(self) -> Result<()> {
        todo!("io: OutputDir::commit")
    }
}
