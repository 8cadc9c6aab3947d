//! Frames stored as named arrays (NetCDF-3 and MATLAB MAT files): the
//! variables named by `[input] columns` turned into the rows every other
//! reader gives, so the grid inference and its checks are the same as for
//! CSV. One mechanism for both formats: each format supplies its arrays
//! row-major with their shape (`Arrays`), `array_rows` pairs values with
//! positions.
//!
//! Accepted layouts, per variable, in the file's units:
//! - long vectors: x, y, u, v (and sigma_u, sigma_v, flag, mask) all of the
//!   same length n, one node each (any order, as in a table);
//! - gridded 2-D arrays: u, v of shape (ny, nx) or (nx, ny) with x and y
//!   either 1-D coordinate vectors of lengths nx and ny, or 2-D arrays of
//!   the same shape as u (a mesh); either memory order works, because each
//!   value is paired with its own x and y.
//!
//! Not accepted (errors naming the file and the variable): a missing
//! variable (listing those present), a shape that fits neither layout, a
//! third dimension (in NetCDF, a time dimension is split into frames
//! before this: `nctime`), a non-numeric MAT variable.
//! NaN (or a NetCDF variable's `_FillValue`) marks an invalid vector, as an
//! empty cell does in text.

use std::path::Path;

use super::grid::RawRows;
use super::netcdf::{Attr, Dataset};
use super::ColumnMap;
use crate::error::{Error, Result};

/// A frame's named arrays: values in row-major order (the last dimension
/// fastest) with their shape, or an error naming the file and variable.
pub(crate) type Arrays<'a> = dyn Fn(&str) -> Result<(Vec<f64>, Vec<usize>)> + 'a;

/// The rows of the one frame in a NetCDF-3 file.
pub(crate) fn netcdf_rows(bytes: &[u8], path: &Path, cols: &ColumnMap) -> Result<RawRows> {
    let ds = Dataset::from_bytes(bytes).map_err(|e| Error::data(e).with_path(path))?;
    let get = |name: &str| -> Result<(Vec<f64>, Vec<usize>)> {
        let v = ds.var(name).ok_or_else(|| missing(&ds, path, name))?;
        let shape = ds.shape(v);
        if shape.len() > 2 {
            return Err(Error::data(format!(
                "variable '{name}' has {} dimensions {shape:?}; a frame is 1-D or 2-D \
                 (a file of many frames has the time as the first dimension of '{}' only)",
                shape.len(),
                cols.u
            ))
            .with_path(path)
            .with_column(name));
        }
        let mut vals = v.data.to_f64();
        fill_to_nan(v, &mut vals);
        Ok((vals, shape))
    };
    array_rows(path, cols, &get)
}

/// The error for a variable the file lacks, listing those it has.
pub(crate) fn missing(ds: &Dataset, path: &Path, name: &str) -> Error {
    let have: Vec<&str> = ds.vars.iter().map(|v| v.name.as_str()).collect();
    Error::data(format!(
        "no variable '{name}'; the file has: {}",
        have.join(", ")
    ))
    .with_path(path)
    .with_column(name)
}

/// The variable's `_FillValue` (if any) read as NaN: an invalid vector.
pub(crate) fn fill_to_nan(v: &super::netcdf::Var, vals: &mut [f64]) {
    if let Some(Attr::Num(f)) = v.attr("_FillValue") {
        if let Some(&fill) = f.first() {
            vals.iter_mut()
                .filter(|x| **x == fill)
                .for_each(|x| *x = f64::NAN);
        }
    }
}

/// The rows of the one frame in a MATLAB MAT file (level 5, compressed or
/// not). MATLAB's column-major arrays are turned row-major in MATLAB's own
/// shape (rows first), so messages quote the shape MATLAB shows; vectors
/// (`n x 1` or `1 x n`) are 1-D.
pub(crate) fn mat_rows(bytes: &[u8], path: &Path, cols: &ColumnMap) -> Result<RawRows> {
    let names = column_names(cols);
    let vars = super::mat::parse(bytes, &|n| names.contains(&n))
        .map_err(|e| Error::data(e).with_path(path))?;
    let get = |name: &str| -> Result<(Vec<f64>, Vec<usize>)> {
        let err = |m: String| Error::data(m).with_path(path).with_column(name);
        let v = vars.iter().find(|v| v.name == name).ok_or_else(|| {
            let have: Vec<&str> = vars.iter().map(|v| v.name.as_str()).collect();
            err(format!(
                "no variable '{name}'; the file has: {}",
                have.join(", ")
            ))
        })?;
        if !v.is_numeric() {
            return Err(err(format!(
                "variable '{name}' is a {} array, not a numeric one",
                v.class_name()
            )));
        }
        match v.dims.as_slice() {
            [r, c] if *r == 1 || *c == 1 => Ok((v.data.clone(), vec![r * c])),
            &[r, c] => {
                let mut t = Vec::with_capacity(r * c);
                for i in 0..r {
                    t.extend((0..c).map(|j| v.data[i + j * r]));
                }
                Ok((t, vec![r, c]))
            }
            d => Err(err(format!(
                "variable '{name}' has {} dimensions {d:?}; a MAT frame is a 2-D array or a vector",
                d.len()
            ))),
        }
    };
    array_rows(path, cols, &get)
}

/// The names `cols` maps, for readers that decode only what is asked.
fn column_names(c: &ColumnMap) -> Vec<&str> {
    let mut v = vec![c.x.as_str(), c.y.as_str(), c.u.as_str(), c.v.as_str()];
    for o in [&c.sigma_u, &c.sigma_v, &c.flag, &c.mask]
        .into_iter()
        .flatten()
    {
        v.push(o.as_str());
    }
    v
}

/// Pairs every value of u with its x and y (long vectors, or 2-D arrays
/// with 1-D or 2-D coordinates, either memory order) into rows.
pub(crate) fn array_rows(path: &Path, cols: &ColumnMap, get: &Arrays) -> Result<RawRows> {
    let (u, su) = get(&cols.u)?;
    let (v, sv) = get(&cols.v)?;
    let (x, sx) = get(&cols.x)?;
    let (y, sy) = get(&cols.y)?;
    if sv != su {
        return Err(Error::data(format!(
            "variable '{}' has shape {sv:?}, '{}' {su:?}",
            cols.v, cols.u
        ))
        .with_path(path)
        .with_column(cols.v.as_str()));
    }
    let n = u.len();
    // positions of every value of u
    let (px, py): (Vec<f64>, Vec<f64>) = if sx == su && sy == su {
        (x, y)
    } else if su.len() == 2 && sx.len() == 1 && sy.len() == 1 {
        let (a, b) = (su[0], su[1]);
        if sy[0] == a && sx[0] == b {
            (0..n).map(|k| (x[k % b], y[k / b])).unzip()
        } else if sx[0] == a && sy[0] == b {
            (0..n).map(|k| (x[k / b], y[k % b])).unzip()
        } else {
            return Err(shape_error(path, cols, &su, &sx, &sy));
        }
    } else {
        return Err(shape_error(path, cols, &su, &sx, &sy));
    };
    let mut rows = RawRows::default();
    let opt = |c: &Option<String>| -> Result<Option<Vec<f64>>> {
        match c {
            None => Ok(None),
            Some(name) => {
                let (vals, s) = get(name)?;
                if s != su {
                    return Err(Error::data(format!(
                        "variable '{name}' has shape {s:?}, '{}' {su:?}",
                        cols.u
                    ))
                    .with_path(path)
                    .with_column(name.as_str()));
                }
                Ok(Some(vals))
            }
        }
    };
    rows.sigma_u = opt(&cols.sigma_u)?;
    rows.sigma_v = opt(&cols.sigma_v)?;
    let flag = opt(&cols.flag)?;
    rows.masked = opt(&cols.mask)?.map(|m| m.iter().map(|&c| c.is_finite() && c != 0.0).collect());
    for k in 0..n {
        if !(px[k].is_finite() && py[k].is_finite()) {
            return Err(Error::data(format!(
                "value {k} (0-based) of '{}' has no finite position ({}, {})",
                cols.u, px[k], py[k]
            ))
            .with_path(path)
            .with_column(cols.x.as_str()));
        }
        let flagged = flag
            .as_ref()
            .is_some_and(|f| f[k].is_finite() && f[k] != 0.0);
        rows.invalid.push(u[k].is_nan() || v[k].is_nan() || flagged);
        rows.line.push(k + 1);
    }
    rows.x = px;
    rows.y = py;
    rows.u = u;
    rows.v = v;
    Ok(rows)
}

fn shape_error(path: &Path, c: &ColumnMap, su: &[usize], sx: &[usize], sy: &[usize]) -> Error {
    Error::data(format!(
        "variable '{}' has shape {su:?} but '{}' {sx:?} and '{}' {sy:?}: expected x and y of u's shape, \
         or 1-D x and y whose lengths are u's two dimensions",
        c.u, c.x, c.y
    ))
    .with_path(path)
    .with_column(c.u.as_str())
}
