//! Reading frames and frame tables; writing tables, node tables and the
//! manifest; atomic output folders.
//!
//! Owns: every byte that enters or leaves curlew. Does not own: what the
//! values mean (stages) or which files a run has (the plan lists them).
//!
//! Rooms: `text` (csv, tsv, whitespace text and the frame table, parsed
//! from bytes), `parquet` (long tables and parquet outputs), `grid` (grid
//! inference and placing rows on nodes), `gridded` (named arrays to rows:
//! NetCDF-3 via `netcdf`, MATLAB MAT via `mat`; `nctime` splits a NetCDF
//! time dimension into frames), `write` (CSV output, atomic files,
//! hashes), `outdir` (output folders: safety, leftovers, signals), `inspect` (summaries for `curlew inspect`), `natural` (natural sort order of frame files), `frame_table` (time and
//! phase per frame).

pub(crate) mod blob;
pub mod cf;
mod frame_table;
pub(crate) mod grid;
mod gridded;
pub mod inspect;
pub mod mat;
mod natural;
mod nctime;
pub mod netcdf;
pub(crate) mod orient;
pub mod outdir;
pub mod parquet;
mod text;
pub mod units;
mod write;

use std::path::{Path, PathBuf};

use crate::error::{Error, Result};
pub(crate) use crate::field::table::{self, Table, Values};
use crate::field::{Field, Grid, NodeTable};
pub(crate) use orient::Orientation;
pub use outdir::OutputDir;
pub(crate) use text::clip as clip_text;
pub(crate) use write::{
    atomic_bytes, atomic_path, hash_bytes, hash_file, write_csv, write_csv_rows,
};

/// The text formats and parquet.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Format {
    /// Comma-separated text with a header line (`csv`).
    Csv,
    /// Tab-separated text with a header line (`tsv`).
    Tsv,
    /// Whitespace-separated, `#` comment lines.
    Text,
    /// A parquet long table holding every frame of a run, told apart by
    /// the integer `frame` column (`parquet`).
    Parquet,
    /// NetCDF-3 (classic or 64-bit offset), one frame per file or one per
    /// index of a time dimension.
    NetCdf,
    /// MATLAB MAT file of version 5 or 7 (level 5, not HDF5), one frame
    /// per file.
    Mat,
}

impl Format {
    /// The name, as in the pipeline file (`[input] format`).
    pub fn name(&self) -> &'static str {
        match self {
            Format::Csv => "csv",
            Format::Tsv => "tsv",
            Format::Text => "text",
            Format::Parquet => "parquet",
            Format::NetCdf => "netcdf",
            Format::Mat => "mat",
        }
    }
}

/// Header names of the columns in the input files.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct ColumnMap {
    /// The x coordinate's column (`columns.x`; for `netcdf` and `mat`, the
    /// variable name).
    pub x: String,
    /// The y coordinate's column (`columns.y`).
    pub y: String,
    /// The x velocity's column (`columns.u`).
    pub u: String,
    /// The y velocity's column (`columns.v`).
    pub v: String,
    /// Per-vector standard uncertainty of u (`columns.sigma_u`); `None`:
    /// the files have none.
    pub sigma_u: Option<String>,
    /// Per-vector standard uncertainty of v (`columns.sigma_v`); `None`:
    /// the files have none.
    pub sigma_v: Option<String>,
    /// A column whose nonzero cells mark invalid vectors (`columns.flag`);
    /// `None`: no flag column.
    pub flag: Option<String>,
    /// The integer frame column of a parquet long table.
    pub frame: String,
    /// A column whose nonzero cells mark masked nodes (`mask`).
    pub mask: Option<String>,
}

/// Everything a reader needs, resolved to SI factors.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct InputSpec {
    /// How the frames are stored (`[input] format`).
    pub format: Format,
    /// The names of the columns or variables to read (`[input] columns`).
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
    /// Which way y and v point in the files (`orient`).
    pub orientation: Orientation,
    /// The units the pipeline states (`m`, `mm`, `px`; `m/s`, `mm/s`,
    /// `px`), `None` where it states none: a text header's units are then
    /// taken (`units`), else metres and metres per second are assumed.
    pub length_unit: Option<String>,
    /// The velocity unit the pipeline states (`m/s`, `mm/s`, `px`), `None`
    /// where it states none (as `length_unit`).
    pub velocity_unit: Option<String>,
    /// What the first frame's header settled where the pipeline states no
    /// unit (`units::settle`; the unit is then also in `length_unit` or
    /// `velocity_unit`); `None` where nothing was read.
    pub units_from_header: Option<units::Settled>,
}

/// Where one frame comes from.
#[derive(Debug, Clone, PartialEq)]
pub enum FrameSource {
    /// One file, one snapshot.
    File(PathBuf),
    /// One frame id of a parquet long table.
    Parquet {
        /// The long table.
        path: PathBuf,
        /// The frame id, a value of its frame column.
        frame: i64,
    },
    /// One index (0-based) of the time dimension of a NetCDF-3 file
    /// (`nctime`).
    Indexed {
        /// The NetCDF-3 file.
        path: PathBuf,
        /// Index along its time dimension, from 0.
        index: usize,
    },
}

/// Expands a run's `frames` pattern (a glob in natural sort order, or one
/// parquet file) into frame sources with their names. Error (data) if
/// nothing matches, naming the pattern.
pub(crate) fn list_frames(spec: &InputSpec, pattern: &str) -> Result<Vec<(String, FrameSource)>> {
    let entries = glob::glob(pattern)
        .map_err(|e| Error::usage(format!("frames = '{pattern}' is not a valid pattern: {e}")))?;
    let mut paths: Vec<PathBuf> = Vec::new();
    for entry in entries {
        let p = entry.map_err(|e| Error::io(e.path(), std::io::Error::other(e.to_string())))?;
        if p.is_file() {
            paths.push(p);
        }
    }
    if paths.is_empty() {
        return Err(Error::data(format!("frames = '{pattern}' matches no file")));
    }
    paths.sort_by(|a, b| natural::compare(&a.to_string_lossy(), &b.to_string_lossy()));
    let mut out = Vec::new();
    if spec.format == Format::Parquet {
        for p in paths {
            for id in parquet::frame_ids(&p, &spec.columns.frame)? {
                out.push((
                    id.to_string(),
                    FrameSource::Parquet {
                        path: p.clone(),
                        frame: id,
                    },
                ));
            }
        }
    } else {
        for p in paths {
            let name = p
                .file_stem()
                .map(|s| s.to_string_lossy().into_owned())
                .unwrap_or_default();
            let times = match spec.format {
                Format::NetCdf => nctime::frame_count(&p, &spec.columns)?,
                _ => None,
            };
            match times {
                None => out.push((name, FrameSource::File(p))),
                Some(n) => {
                    for (index, name) in nctime::frame_names(&name, n).into_iter().enumerate() {
                        let path = p.clone();
                        out.push((name, FrameSource::Indexed { path, index }));
                    }
                }
            }
        }
    }
    let mut seen: std::collections::HashMap<&str, &FrameSource> = Default::default();
    for (name, src) in &out {
        if let Some(first) = seen.insert(name, src) {
            return Err(Error::data(format!(
                "frames = '{pattern}': two frames are named '{name}' ({} and {})",
                source_label(first),
                source_label(src)
            )));
        }
    }
    Ok(out)
}

fn source_label(s: &FrameSource) -> String {
    match s {
        FrameSource::File(p) => p.display().to_string(),
        FrameSource::Parquet { path, frame } => format!("{} frame {frame}", path.display()),
        FrameSource::Indexed { path, index } => {
            format!("{} time index {index}", path.display())
        }
    }
}

impl FrameSource {
    /// The file the frame is in.
    pub fn path(&self) -> &Path {
        match self {
            FrameSource::File(p) => p,
            FrameSource::Parquet { path, .. } | FrameSource::Indexed { path, .. } => path,
        }
    }

    /// Whether the file holds other frames too (a parquet long table, a
    /// NetCDF time dimension): such a file is hashed and checked once,
    /// not once per frame.
    pub(crate) fn shares_file(&self) -> bool {
        !matches!(self, FrameSource::File(_))
    }
}

/// A reader of the formats that store named arrays (`gridded`).
type ArrayReader = fn(&[u8], &Path, &ColumnMap) -> Result<grid::RawRows>;

/// The size and SHA-256 of a frame file, when the frame came from one.
pub(crate) type FileHash = Option<(u64, String)>;

thread_local! {
    /// The read buffer of text frames, reused from frame to frame on each
    /// thread: one allocation instead of one fresh (and freshly
    /// page-faulted) buffer per file.
    static READ_BUF: std::cell::RefCell<Vec<u8>> = const { std::cell::RefCell::new(Vec::new()) };
}

fn read_rows(
    spec: &InputSpec,
    source: &FrameSource,
    grid_only: bool,
    hash: bool,
) -> Result<(grid::RawRows, FileHash)> {
    let (mut rows, h) = read_rows_as_written(spec, source, grid_only, hash)?;
    spec.orientation.apply(&mut rows);
    Ok((rows, h))
}

fn read_rows_as_written(
    spec: &InputSpec,
    source: &FrameSource,
    grid_only: bool,
    hash: bool,
) -> Result<(grid::RawRows, FileHash)> {
    match source {
        FrameSource::File(path) => {
            if spec.format == Format::Parquet {
                return Err(Error::usage(
                    "a parquet frame needs a frame id (FrameSource::Parquet)",
                )
                .with_path(path));
            }
            READ_BUF.with(|buf| {
                let mut bytes = buf.borrow_mut();
                text::read_into(path, &mut bytes)?;
                let arrays = match spec.format {
                    Format::NetCdf => Some(gridded::netcdf_rows as ArrayReader),
                    Format::Mat => Some(gridded::mat_rows as ArrayReader),
                    _ => None,
                };
                if let Some(read) = arrays {
                    let rows = read(&bytes, path, &spec.columns)?;
                    return Ok((rows, hash.then(|| hash_bytes(&bytes))));
                }
                let rows = text::parse_frame(
                    &bytes,
                    path,
                    spec.format,
                    spec.skip_lines,
                    &spec.columns,
                    grid_only,
                )?;
                Ok((rows, hash.then(|| hash_bytes(&bytes))))
            })
        }
        FrameSource::Parquet { path, frame } => Ok((
            parquet::read_rows(path, *frame, &spec.columns, grid_only)?,
            None,
        )),
        FrameSource::Indexed { path, index } => {
            Ok((nctime::rows(path, &spec.columns, *index)?, None))
        }
    }
}

/// Reads one frame into a field on its inferred grid, in SI: x, y times
/// `length_scale`; u, v, sigma_u, sigma_v times `velocity_scale`. Invalid
/// input vectors (empty, NaN, flagged) and missing nodes get status FILLED
/// with NaN velocities; see `text` for the cell rules and `grid` for the
/// inference.
pub fn read_frame(spec: &InputSpec, source: &FrameSource) -> Result<Field> {
    Ok(read_frame_hashed(spec, source, false)?.0)
}

/// `read_frame`, and with `hash` the size and SHA-256 of the frame's file
/// (text frames; parquet files are hashed once per file by the caller),
/// taken from the very bytes that were parsed: each file is read once.
pub(crate) fn read_frame_hashed(
    spec: &InputSpec,
    source: &FrameSource,
    hash: bool,
) -> Result<(Field, FileHash)> {
    let (rows, h) = read_rows(spec, source, false, hash)?;
    let (length_scale, velocity_scale) = units::scales(spec, &rows.units, source.path())?;
    let what = match (source, spec.format) {
        (FrameSource::File(_), Format::Csv | Format::Tsv | Format::Text) => "line",
        (FrameSource::Parquet { .. }, _) => "row",
        _ => "value",
    };
    let mut f = grid::assemble(
        &rows,
        spec.grid_tolerance,
        length_scale,
        velocity_scale,
        what,
    )
    .map_err(|e| e.with_path(source.path()))?;
    mask_rows(&rows, length_scale, &mut f);
    Ok((f, h))
}

/// Masks the nodes of the rows the input's mask column marks (every row
/// lies on a node: `assemble` checked it).
fn mask_rows(rows: &grid::RawRows, length_scale: f64, f: &mut Field) {
    let Some(masked) = &rows.masked else { return };
    for (k, _) in masked.iter().enumerate().filter(|(_, &m)| m) {
        let (x, y) = (rows.x[k] * length_scale, rows.y[k] * length_scale);
        if let Some((i, j)) = crate::field::node_of(&f.grid, x, y, 0.5) {
            crate::field::mask_node(f, j, i);
        }
    }
}

/// Reads only what `check` needs: the grid of one frame (header and x, y).
pub fn read_grid(spec: &InputSpec, source: &FrameSource) -> Result<Grid> {
    let (rows, _) = read_rows(spec, source, true, false)?;
    let (length_scale, _) = units::scales(spec, &rows.units, source.path())?;
    let (ax, ay) =
        grid::infer_grid(&rows, spec.grid_tolerance).map_err(|e| e.with_path(source.path()))?;
    Ok(grid::grid_si(ax, ay, length_scale))
}

/// Time and phase of frames, keyed by frame name (file stem or parquet id).
#[derive(Debug, Clone, Default)]
pub(crate) struct FrameTable {
    pub rows: Vec<(String, Option<f64>, Option<f64>)>,
    /// The run's frequency, when the table has a `frequency_hz` or a
    /// `period_s` column.
    pub frequency: Option<TableFrequency>,
}

/// A frequency given in the frame table (a column with a value per frame).
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct TableFrequency {
    /// `frequency_hz` or `period_s`.
    pub column: &'static str,
    /// Mean over the rows of the per-row frequency (Hz).
    pub hz: f64,
    /// Largest |f_row - hz| / hz over the rows.
    pub spread: f64,
    pub rows: usize,
}

impl FrameTable {
    /// Time and phase of frame `name`: the row with that exact name, else
    /// (for parquet frame ids) the row whose name is the same integer, so
    /// `007` in a table matches frame id `7`.
    pub(crate) fn lookup(&self, name: &str) -> Option<(Option<f64>, Option<f64>)> {
        let found = self.rows.iter().find(|r| r.0 == name).or_else(|| {
            let id: i64 = name.trim().parse().ok()?;
            self.rows
                .iter()
                .find(|r| r.0.trim().parse::<i64>().ok() == Some(id))
        });
        found.map(|r| (r.1, r.2))
    }
}

/// Reads a frame table: CSV with `frame` and `time_s` and/or `phase_deg`
/// (phase kept as given), optionally `frequency_hz` or `period_s`. Errors name the line and value; a duplicate frame
/// names both lines.
pub(crate) fn read_frame_table(path: &Path) -> Result<FrameTable> {
    let bytes = text::read_bytes(path)?;
    frame_table::parse_frame_table(&bytes, path)
}

/// Writes `table` as parquet (F64 → Float64, I64 → Int64, Str → String);
/// atomic like `write_csv`.
pub(crate) fn write_parquet(path: &Path, table: &Table) -> Result<()> {
    parquet::write_table(path, table)
}

/// Reads any table curlew writes or reads (csv, tsv, text, parquet) into
/// F64 columns where every cell is a number or empty, else Str (for
/// `inspect` and tests).
pub(crate) fn read_table(path: &Path, format: Format, skip_lines: usize) -> Result<Table> {
    if format == Format::Parquet {
        return parquet::read_table(path);
    }
    let bytes = text::read_bytes(path)?;
    let mut cells: Vec<Vec<String>> = Vec::new();
    let names = text::scan_table(&bytes, path, format, skip_lines, |_, k, c| {
        if cells.len() <= k {
            cells.resize_with(k + 1, Vec::new);
        }
        cells[k].push(String::from_utf8_lossy(c).into_owned());
        Ok(())
    })?;
    let mut t = Table::new();
    let n = cells.first().map_or(0, Vec::len);
    for (k, name) in names.iter().enumerate() {
        let col = cells.get(k).cloned().unwrap_or_default();
        if col.len() != n {
            return Err(Error::data(format!(
                "column '{name}' has {} cells, the first column {n}",
                col.len()
            ))
            .with_path(path));
        }
        let nums: Option<Vec<f64>> = col
            .iter()
            .map(|c| {
                text::number(c.as_bytes())
                    .ok()
                    .map(|v| v.unwrap_or(f64::NAN))
            })
            .collect();
        match nums {
            Some(v) => t.push(name.clone(), Values::F64(v)),
            None => t.push(name.clone(), Values::Str(col)),
        }
    }
    Ok(t)
}

/// A node table as a `Table` with `x`, `y` first, then its columns.
pub(crate) fn node_table_to_table(nt: &NodeTable) -> Table {
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

/// `p` if absolute, else `base/p`.
pub(crate) fn resolve_path(base: &Path, p: &str) -> PathBuf {
    let pb = PathBuf::from(p);
    if pb.is_absolute() {
        pb
    } else {
        base.join(pb)
    }
}

#[cfg(test)]
mod tests;
#[cfg(test)]
mod tests_gridded;
#[cfg(test)]
mod tests_mat;
#[cfg(test)]
mod tests_parquet;
#[cfg(test)]
mod tests_units;
