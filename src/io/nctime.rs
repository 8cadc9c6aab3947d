//! NetCDF-3 files of many frames: a time dimension split into frames, read
//! one at a time.
//!
//! Owns: deciding whether a file has a time dimension, naming its frames,
//! and reading one frame's values straight from the file (the header, then
//! only that frame's bytes of each variable). Does not own: the byte layout
//! (`netcdf`) or placing values on the grid (`gridded::array_rows`, the
//! same path as a file of one frame).
//!
//! # Which dimension is time
//!
//! The first dimension of the u variable, when u has two or more
//! dimensions, the x and y variables exist, and that dimension is the
//! record (unlimited) dimension or is a dimension of neither x nor y. So
//! `u(time, y, x)` with `x(x)`, `y(y)` (or a mesh `x(y, x)`) and
//! `u(time, node)` with `x(node)`, `y(node)` are files of many frames;
//! `u(y, x)` with `x(x)` is one frame. Every variable whose first
//! dimension is the time dimension is sliced (positions may change from
//! frame to frame); the others are the same for every frame. A time
//! dimension elsewhere than first is not read (the one-frame reader names
//! the third dimension).
//!
//! # Frame names
//!
//! Index `k` (0-based, as `ncdump` and `xarray.isel` count) of file
//! `run07.nc` is the frame `run07_t<k>`, `k` zero-padded to the width of
//! the largest index so that names sort in time order (`run07_t003`); a
//! file whose time dimension has length 1 keeps the plain name `run07`. A
//! frame table lists frames by these names.
//!
//! # Cost
//!
//! Memory: one frame's variables. Each frame reads the header (cached per
//! thread for the file last read, keyed by path, size and modification
//! time) and then only its own bytes, so a run over a file of T frames
//! reads the file once in all, not T times.

use std::cell::RefCell;
use std::fs::File;
use std::io::{Read, Seek, SeekFrom};
use std::path::{Path, PathBuf};
use std::rc::Rc;
use std::time::SystemTime;

use super::grid::RawRows;
use super::gridded::{array_rows, fill_to_nan, missing};
use super::netcdf::{Dataset, Layout};
use super::ColumnMap;
use crate::error::{Error, Result};

type Header = Rc<(Dataset, Vec<Layout>)>;

/// A cached header with the path, size and modification time it is of.
type Cached = (PathBuf, u64, Option<SystemTime>, Header);

thread_local! {
    /// The header of the file this thread read last.
    static LAST: RefCell<Option<Cached>> =
        const { RefCell::new(None) };
}

/// The header of `path`, read from a growing prefix of the file (8 KiB,
/// then 8 times more until it fits), cached per thread.
fn header(path: &Path) -> Result<Header> {
    let io = |e| Error::io(path, e);
    let meta = std::fs::metadata(path).map_err(io)?;
    let (len, mtime) = (meta.len(), meta.modified().ok());
    let hit = LAST.with(|c| {
        c.borrow()
            .as_ref()
            .filter(|(p, l, m, _)| p == path && *l == len && *m == mtime)
            .map(|x| x.3.clone())
    });
    if let Some(h) = hit {
        return Ok(h);
    }
    let mut f = File::open(path).map_err(io)?;
    let mut want = 8192.min(len);
    let mut buf = Vec::new();
    let h = loop {
        buf.clear();
        (&mut f).take(want).read_to_end(&mut buf).map_err(io)?;
        f.rewind().map_err(io)?;
        match Dataset::header(&buf, len as usize) {
            Ok(h) => break Rc::new(h),
            Err(e) if want < len && e.contains("truncated") => want = (want * 8).min(len),
            Err(e) => return Err(Error::data(e).with_path(path)),
        }
    };
    LAST.with(|c| *c.borrow_mut() = Some((path.to_path_buf(), len, mtime, h.clone())));
    Ok(h)
}

/// The time dimension of `ds` under the module's rule, if any.
fn time_dim(ds: &Dataset, cols: &ColumnMap) -> Option<usize> {
    let u = ds.var(&cols.u)?;
    let (x, y) = (ds.var(&cols.x)?, ds.var(&cols.y)?);
    let &t = u.dims.first()?;
    if u.dims.len() < 2 {
        return None;
    }
    let shared = x.dims.contains(&t) || y.dims.contains(&t);
    (ds.unlimited == Some(t) || !shared).then_some(t)
}

/// The number of frames of `path` when it has a time dimension (`None`: a
/// file of one frame). Reads the header only.
pub(crate) fn frame_count(path: &Path, cols: &ColumnMap) -> Result<Option<usize>> {
    let h = header(path)?;
    Ok(time_dim(&h.0, cols).map(|t| h.0.dims[t].1))
}

/// The names of the `n` frames of the file of stem `stem` (module doc).
pub(crate) fn frame_names(stem: &str, n: usize) -> Vec<String> {
    if n == 1 {
        return vec![stem.to_string()];
    }
    let w = (n - 1).to_string().len();
    (0..n).map(|k| format!("{stem}_t{k:0w$}")).collect()
}

/// The rows of frame `index` of the time dimension of `path`.
pub(crate) fn rows(path: &Path, cols: &ColumnMap, index: usize) -> Result<RawRows> {
    let h = header(path)?;
    let (ds, layout) = (&h.0, &h.1);
    let t = time_dim(ds, cols).ok_or_else(|| {
        Error::data(format!(
            "variable '{}' has no time dimension (first, and not one of '{}' and '{}')",
            cols.u, cols.x, cols.y
        ))
        .with_path(path)
    })?;
    let nt = ds.dims[t].1;
    if index >= nt {
        return Err(
            Error::data(format!("time index {index} is past the file's {nt} frames"))
                .with_path(path),
        );
    }
    let file = RefCell::new(File::open(path).map_err(|e| Error::io(path, e))?);
    let get = |name: &str| -> Result<(Vec<f64>, Vec<usize>)> {
        let k = ds
            .vars
            .iter()
            .position(|v| v.name == name)
            .ok_or_else(|| missing(ds, path, name))?;
        let (v, l) = (&ds.vars[k], &layout[k]);
        let mut shape = ds.shape(v);
        let range = if v.dims.first() == Some(&t) {
            shape.remove(0);
            let per: usize = shape.iter().product();
            if l.rec {
                l.range(index)
            } else {
                l.values(0, index * per, per)
            }
        } else {
            l.range(0)
        };
        if shape.len() > 2 {
            return Err(Error::data(format!(
                "variable '{name}' has {} dimensions {shape:?} besides time; a frame is 1-D or 2-D",
                shape.len()
            ))
            .with_path(path)
            .with_column(name));
        }
        let mut raw = vec![0u8; range.len()];
        let mut f = file.borrow_mut();
        f.seek(SeekFrom::Start(range.start as u64))
            .and_then(|_| f.read_exact(&mut raw))
            .map_err(|e| {
                Error::data(format!(
                    "variable '{name}': frame {index} cannot be read ({e}); is the file truncated?"
                ))
                .with_path(path)
                .with_column(name)
            })?;
        let mut vals = Vec::with_capacity(range.len() / 4);
        l.decode(&raw, &mut vals);
        fill_to_nan(v, &mut vals);
        Ok((vals, shape))
    };
    array_rows(path, cols, &get)
}
