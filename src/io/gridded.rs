//! Frames stored as named arrays (NetCDF-3, one frame per file): the
//! variables named by `[input] columns` turned into the rows every other
//! reader gives, so the grid inference and its checks are the same as for
//! CSV.
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
//! third dimension (a time dimension: one frame per file for now).
//! NaN or the variable's `_FillValue` marks an invalid vector, as an empty
//! cell does in text.

use std::path::Path;

use super::grid::RawRows;
use super::netcdf::{Attr, Dataset};
use super::ColumnMap;
use crate::error::{Error, Result};

/// The rows of the one frame in a NetCDF-3 file.
pub fn netcdf_rows(bytes: &[u8], path: &Path, cols: &ColumnMap) -> Result<RawRows> {
    let ds = Dataset::from_bytes(bytes).map_err(|e| Error::data(e).with_path(path))?;
    let get = |name: &str| -> Result<(Vec<f64>, Vec<usize>)> {
        let v = ds.var(name).ok_or_else(|| {
            let have: Vec<&str> = ds.vars.iter().map(|v| v.name.as_str()).collect();
            Error::data(format!(
                "no variable '{name}'; the file has: {}",
                have.join(", ")
            ))
            .with_path(path)
            .with_column(name)
        })?;
        let shape = ds.shape(v);
        if shape.len() > 2 {
            return Err(Error::data(format!(
                "variable '{name}' has {} dimensions {shape:?}; a frame is 1-D or 2-D (one frame per file)",
                shape.len()
            ))
            .with_path(path)
            .with_column(name));
        }
        let mut vals = v.data.to_f64();
        if let Some(Attr::Num(f)) = v.attr("_FillValue") {
            if let Some(&fill) = f.first() {
                vals.iter_mut()
                    .filter(|x| **x == fill)
                    .for_each(|x| *x = f64::NAN);
            }
        }
        Ok((vals, shape))
    };
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
