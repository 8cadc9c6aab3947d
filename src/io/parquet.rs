//! Parquet long tables (all frames of a run in one file, with an integer
//! frame column) and parquet output tables, through polars.
//!
//! Owns: the per-file frame index, frame reads that touch only the row
//! groups holding the frame, and the parquet writers. Does not own: the cell
//! rules and the grid (`grid`), which apply unchanged.
//!
//! Memory and speed: the first access to a file builds an index of where
//! each frame's rows are (runs of consecutive rows), decoding only the frame
//! column, one row group at a time; the index is kept in a process-wide
//! cache keyed by path, frame column, size and modification time, behind a mutex, so
//! `read_frame` may be called from many threads. A frame read decodes only
//! the mapped columns of the row groups its rows fall in (a polars slice
//! read), so a 1000-frame file is never held decoded at once. A file written
//! with a single huge row group is decoded once per frame: correct but slow;
//! `write_frames_parquet` writes one row group per frame.

use std::collections::{BTreeMap, HashMap};
use std::fs::File;
use std::path::{Path, PathBuf};
use std::sync::{Arc, Mutex, OnceLock};

use polars::prelude::*;

use crate::error::{Error, Result, WithPath};
#[cfg(test)]
use crate::field::{Field, MASKED};

use super::grid::RawRows;
use super::table::{Table, Values};
use super::ColumnMap;

fn perr(path: &Path, e: PolarsError) -> Error {
    Error::data(format!("cannot read parquet: {e}")).with_path(path)
}

/// A failure while writing (a full disk, say): an I/O error that says so.
fn werr(path: &Path, e: PolarsError) -> Error {
    Error::new(
        crate::error::ErrorKind::Io,
        format!("cannot write parquet: {e}"),
    )
    .with_path(path)
}

/// Where each frame's rows are, and the file's metadata.
pub(crate) struct FrameIndex {
    metadata: polars::io::parquet::metadata::FileMetadataRef,
    /// Frame id → runs of rows `(offset, length)`, in file order.
    pub frames: BTreeMap<i64, Vec<(usize, usize)>>,
    pub columns: Vec<String>,
}

/// Path, frame column, size and modification time.
type Key = (PathBuf, String, u64, Option<std::time::SystemTime>);

fn cache() -> &'static Mutex<HashMap<Key, Arc<FrameIndex>>> {
    static CACHE: OnceLock<Mutex<HashMap<Key, Arc<FrameIndex>>>> = OnceLock::new();
    CACHE.get_or_init(Default::default)
}

fn open(path: &Path) -> Result<File> {
    File::open(path).with_path(path)
}

/// The frame index of `path` (built once per file version).
pub(crate) fn index(path: &Path, frame_col: &str) -> Result<Arc<FrameIndex>> {
    let meta = std::fs::metadata(path).with_path(path)?;
    let key = (
        path.to_path_buf(),
        frame_col.to_string(),
        meta.len(),
        meta.modified().ok(),
    );
    let mut guard = cache().lock().unwrap_or_else(|p| p.into_inner());
    if let Some(ix) = guard.get(&key) {
        return Ok(ix.clone());
    }
    let ix = Arc::new(build_index(path, frame_col)?);
    guard.retain(|k, _| k.0 != key.0 || k.1 != key.1);
    guard.insert(key, ix.clone());
    Ok(ix)
}

fn build_index(path: &Path, frame_col: &str) -> Result<FrameIndex> {
    let mut reader = ParquetReader::new(open(path)?);
    let metadata = reader.get_metadata().map_err(|e| perr(path, e))?.clone();
    let schema = reader.schema().map_err(|e| perr(path, e))?;
    let columns: Vec<String> = schema.iter_names().map(|n| n.to_string()).collect();
    if !columns.iter().any(|c| c == frame_col) {
        return Err(Error::data(format!(
            "missing frame column '{frame_col}'; the table has: {}",
            columns.join(", ")
        ))
        .with_path(path)
        .with_column(frame_col));
    }
    let mut frames: BTreeMap<i64, Vec<(usize, usize)>> = BTreeMap::new();
    let mut offset = 0usize;
    let mut current: Option<(i64, usize, usize)> = None; // frame, start, length
    for rg in &metadata.row_groups {
        let n = rg.num_rows();
        let mut r = ParquetReader::new(open(path)?)
            .with_columns(Some(vec![frame_col.to_string()]))
            .with_slice(Some((offset, n)))
            .read_parallel(ParallelStrategy::None);
        r.set_metadata(metadata.clone());
        let df = r.finish().map_err(|e| perr(path, e))?;
        let col = df
            .column(frame_col)
            .and_then(|c| c.cast(&DataType::Int64))
            .map_err(|e| perr(path, e))?;
        let ca = col.i64().map_err(|e| perr(path, e))?.clone();
        for (k, f) in ca.iter().enumerate() {
            let row = offset + k;
            let f = f.ok_or_else(|| {
                Error::data(format!("row {}: the frame id is empty", row + 1))
                    .with_path(path)
                    .with_column(frame_col)
            })?;
            match &mut current {
                Some((cf, _, len)) if *cf == f => *len += 1,
                _ => {
                    if let Some((cf, s, len)) = current.take() {
                        frames.entry(cf).or_default().push((s, len));
                    }
                    current = Some((f, row, 1));
                }
            }
        }
        offset += n;
    }
    if let Some((cf, s, len)) = current {
        frames.entry(cf).or_default().push((s, len));
    }
    if frames.is_empty() {
        return Err(Error::data("the parquet table has no rows").with_path(path));
    }
    Ok(FrameIndex {
        metadata,
        frames,
        columns,
    })
}

fn f64_column(df: &DataFrame, name: &str, path: &Path) -> Result<Vec<f64>> {
    let col = df
        .column(name)
        .and_then(|c| c.cast(&DataType::Float64))
        .map_err(|e| perr(path, e).with_column(name))?;
    let ca = col.f64().map_err(|e| perr(path, e))?;
    Ok(ca.iter().map(|v| v.unwrap_or(f64::NAN)).collect())
}

/// The rows of frame `frame` of the long table at `path`, in file units.
/// Rows are numbered 1-based over the whole table in errors.
pub(crate) fn read_rows(
    path: &Path,
    frame: i64,
    cols: &ColumnMap,
    grid_only: bool,
) -> Result<RawRows> {
    let ix = index(path, &cols.frame)?;
    let runs = ix
        .frames
        .get(&frame)
        .ok_or_else(|| Error::data(format!("frame {frame} is not in the table")).with_path(path))?;
    let wanted = wanted_columns(cols, grid_only, &ix, path)?;
    let mut rows = RawRows {
        sigma_u: (!grid_only && cols.sigma_u.is_some()).then(Vec::new),
        sigma_v: (!grid_only && cols.sigma_v.is_some()).then(Vec::new),
        masked: cols.mask.is_some().then(Vec::new),
        ..RawRows::default()
    };
    let reader = RowReader { path, cols };
    for &(offset, len) in runs {
        let mut r = ParquetReader::new(open(path)?)
            .with_columns(Some(wanted.iter().map(|s| s.to_string()).collect()))
            .with_slice(Some((offset, len)))
            .read_parallel(ParallelStrategy::None);
        r.set_metadata(ix.metadata.clone());
        let df = r.finish().map_err(|e| perr(path, e))?;
        reader.push_positions(&mut rows, &df, offset, len)?;
        if grid_only {
            rows.invalid.extend(std::iter::repeat_n(false, len));
            continue;
        }
        reader.push_velocities(&mut rows, &df, offset, len)?;
    }
    Ok(rows)
}

/// The mapped columns a frame read decodes; error if the table lacks one.
fn wanted_columns<'c>(
    cols: &'c ColumnMap,
    grid_only: bool,
    ix: &FrameIndex,
    path: &Path,
) -> Result<Vec<&'c str>> {
    let mut wanted: Vec<&str> = vec![&cols.x, &cols.y];
    if !grid_only {
        wanted.push(&cols.u);
        wanted.push(&cols.v);
        for c in [&cols.sigma_u, &cols.sigma_v, &cols.flag]
            .into_iter()
            .flatten()
        {
            wanted.push(c);
        }
    }
    if let Some(c) = &cols.mask {
        wanted.push(c);
    }
    for w in &wanted {
        if !ix.columns.iter().any(|c| c == w) {
            return Err(Error::data(format!(
                "missing column '{w}'; the table has: {}",
                ix.columns.join(", ")
            ))
            .with_path(path)
            .with_column(*w));
        }
    }
    Ok(wanted)
}

/// Appends the decoded rows of one run of a frame (`len` rows from table
/// row `offset`) to `RawRows`, checking them.
struct RowReader<'a> {
    path: &'a Path,
    cols: &'a ColumnMap,
}

impl RowReader<'_> {
    /// Appends the node positions, line numbers and mask of the run.
    fn push_positions(
        &self,
        rows: &mut RawRows,
        df: &DataFrame,
        offset: usize,
        len: usize,
    ) -> Result<()> {
        let (path, cols) = (self.path, self.cols);
        let x = f64_column(df, &cols.x, path)?;
        let y = f64_column(df, &cols.y, path)?;
        for (k, (&xv, &yv)) in x.iter().zip(&y).enumerate() {
            for (name, val) in [(&cols.x, xv), (&cols.y, yv)] {
                if !val.is_finite() {
                    return Err(Error::data(format!(
                        "row {}: node position {val} is not a finite number",
                        offset + k + 1
                    ))
                    .with_path(path)
                    .with_line(offset + k + 1)
                    .with_column(name.as_str()));
                }
            }
        }
        rows.line.extend((0..len).map(|k| offset + k + 1));
        rows.x.extend(x);
        rows.y.extend(y);
        if let (Some(name), Some(dst)) = (&cols.mask, rows.masked.as_mut()) {
            let m = f64_column(df, name, path)?;
            dst.extend(m.iter().map(|&c| c.is_finite() && c != 0.0));
        }
        Ok(())
    }

    /// Appends the velocities, their validity and uncertainties of the run.
    fn push_velocities(
        &self,
        rows: &mut RawRows,
        df: &DataFrame,
        offset: usize,
        len: usize,
    ) -> Result<()> {
        let (path, cols) = (self.path, self.cols);
        let u = f64_column(df, &cols.u, path)?;
        let v = f64_column(df, &cols.v, path)?;
        let flag = match &cols.flag {
            Some(c) => Some(f64_column(df, c, path)?),
            None => None,
        };
        for k in 0..len {
            let bad = |x: f64| x.is_infinite();
            if bad(u[k]) || bad(v[k]) {
                return Err(Error::data(format!(
                    "row {}: velocity ({}, {}) is not finite",
                    offset + k + 1,
                    u[k],
                    v[k]
                ))
                .with_path(path)
                .with_line(offset + k + 1));
            }
            let flagged = flag
                .as_ref()
                .is_some_and(|f| f[k].is_finite() && f[k] != 0.0);
            rows.invalid.push(u[k].is_nan() || v[k].is_nan() || flagged);
        }
        rows.u.extend(u);
        rows.v.extend(v);
        for (name, dst) in [
            (&cols.sigma_u, &mut rows.sigma_u),
            (&cols.sigma_v, &mut rows.sigma_v),
        ] {
            if let (Some(name), Some(dst)) = (name, dst) {
                let s = f64_column(df, name, path)?;
                if let Some(k) = s.iter().position(|&x| x < 0.0 || x.is_infinite()) {
                    return Err(Error::data(format!(
                        "row {}: uncertainty {} must be a finite non-negative number",
                        offset + k + 1,
                        s[k]
                    ))
                    .with_path(path)
                    .with_line(offset + k + 1)
                    .with_column(name.as_str()));
                }
                dst.extend(s);
            }
        }
        Ok(())
    }
}

/// The column names of a parquet file (its schema; no data is decoded).
pub(crate) fn column_names(path: &Path) -> Result<Vec<String>> {
    let mut reader = ParquetReader::new(open(path)?);
    let schema = reader.schema().map_err(|e| perr(path, e))?;
    Ok(schema.iter_names().map(|n| n.to_string()).collect())
}

/// Frame ids of a long table, ascending.
pub(crate) fn frame_ids(path: &Path, frame_col: &str) -> Result<Vec<i64>> {
    Ok(index(path, frame_col)?.frames.keys().copied().collect())
}

#[cfg(test)]
fn frame_df(id: i64, f: &Field) -> PolarsResult<DataFrame> {
    let g = f.grid;
    let mut cols: [Vec<f64>; 6] = Default::default();
    for j in 0..g.ny {
        for i in 0..g.nx {
            if f.status[[j, i]] == MASKED {
                continue;
            }
            let vals = [
                g.x(i),
                g.y(j),
                f.u[[j, i]],
                f.v[[j, i]],
                f.sigma_u[[j, i]],
                f.sigma_v[[j, i]],
            ];
            for (c, v) in cols.iter_mut().zip(vals) {
                c.push(v);
            }
        }
    }
    let n = cols[0].len();
    let [x, y, u, v, su, sv] = cols;
    DataFrame::new(
        n,
        vec![
            Column::new("frame".into(), vec![id; n]),
            Column::new("x".into(), x),
            Column::new("y".into(), y),
            Column::new("u".into(), u),
            Column::new("v".into(), v),
            Column::new("sigma_u".into(), su),
            Column::new("sigma_v".into(), sv),
        ],
    )
}

/// Writes frames as one parquet long table, in SI (x, y in m; u, v,
/// sigma_u, sigma_v in m/s), with the columns `frame, x, y, u, v, sigma_u,
/// sigma_v` and one row group per frame. Masked nodes get no row; a vector
/// without a value is written as NaN (read back as invalid). Frames are
/// encoded one at a time, so memory holds one frame. Atomic: written to a
/// temporary sibling and renamed.
#[cfg(test)]
pub(crate) fn write_frames_parquet(path: &Path, frames: &[(i64, &Field)]) -> Result<()> {
    let Some(&(id0, f0)) = frames.first() else {
        return Err(Error::data("no frames to write").with_path(path));
    };
    let first = frame_df(id0, f0).map_err(|e| werr(path, e))?;
    super::write::atomic_file(path, |file| {
        let mut w = ParquetWriter::new(file)
            .set_parallel(false)
            .batched(first.schema())
            .map_err(|e| werr(path, e))?;
        w.write_batch(&first).map_err(|e| werr(path, e))?;
        for &(id, f) in &frames[1..] {
            let df = frame_df(id, f).map_err(|e| werr(path, e))?;
            w.write_batch(&df).map_err(|e| werr(path, e))?;
        }
        w.finish().map_err(|e| werr(path, e))?;
        Ok(())
    })
}

/// Writes `table` as parquet: F64 → Float64, I64 → Int64, Str → String.
pub(crate) fn write_table(path: &Path, table: &Table) -> Result<()> {
    let n = table.n_rows();
    let columns = table
        .columns
        .iter()
        .map(|(name, vals)| match vals {
            Values::F64(v) => Column::new(name.as_str().into(), v.as_slice()),
            Values::I64(v) => Column::new(name.as_str().into(), v.as_slice()),
            Values::Str(v) => Column::new(
                name.as_str().into(),
                v.iter().map(String::as_str).collect::<Vec<_>>(),
            ),
        })
        .collect();
    let mut df = DataFrame::new(n, columns).map_err(|e| werr(path, e))?;
    super::write::atomic_file(path, |file| {
        ParquetWriter::new(file)
            .finish(&mut df)
            .map_err(|e| werr(path, e))?;
        Ok(())
    })
}

/// A parquet table read whole into a `Table` (for `inspect`): numeric
/// columns as F64 (nulls as NaN), others as Str.
pub(crate) fn read_table(path: &Path) -> Result<Table> {
    let df = ParquetReader::new(open(path)?)
        .finish()
        .map_err(|e| perr(path, e))?;
    let mut t = Table::new();
    for c in df.columns() {
        let name = c.name().to_string();
        if c.dtype().is_primitive_numeric() {
            t.push(name.clone(), Values::F64(f64_column(&df, &name, path)?));
        } else {
            let s = c.cast(&DataType::String).map_err(|e| perr(path, e))?;
            let ca = s.str().map_err(|e| perr(path, e))?;
            t.push(
                name,
                Values::Str(ca.iter().map(|v| v.unwrap_or("").to_string()).collect()),
            );
        }
    }
    Ok(t)
}
