//! The header's column roles and the data rows of a text frame (the
//! steps of `text::parse_frame`, moved out of text.rs to keep it under 600
//! lines).

use std::path::Path;

use crate::error::{Error, Result};

use super::{clip, find, for_cells, is_comment_or_blank, scan_row, show, Lines};
use super::{FLAG, MASK, NONE, SU, SV, U, V, X, Y};
use crate::io::grid::RawRows;
use crate::io::{ColumnMap, Format};

/// The units of a units line right below the header, with its line
/// number; `it` then moves past it. None (and `it` unmoved) when the next
/// line is data.
pub(super) fn units_line(
    it: &mut Lines<'_>,
    format: Format,
    names: &[String],
    cols: &ColumnMap,
) -> Option<(usize, Vec<Option<String>>)> {
    let mut peek = it.clone();
    let (no, line) = peek.find(|(_, l)| !is_comment_or_blank(l))?;
    let mut cells = Vec::new();
    for_cells(line, format, |_, c| cells.push(show(c)));
    if !crate::io::units::is_units_line(&cells, names, cols) {
        return None;
    }
    let units = cells
        .iter()
        .map(|c| Some(crate::io::units::unit_cell(c)).filter(|u| !u.is_empty()))
        .collect();
    *it = peek;
    Some((no, units))
}

/// Which header cell holds which mapped column (`X`, `Y`, ... `MASK`).
pub(super) struct Roles<'c> {
    /// The role of each header cell, or `NONE`.
    of: Vec<u8>,
    /// The column name of each role (for errors).
    name: [&'c str; 8],
    /// Whether each role is read.
    present: [bool; 8],
}

impl<'c> Roles<'c> {
    /// Finds the wanted columns of `cols` in the header `names` (line
    /// `hline`); a missing or doubled column is an error.
    pub(super) fn map(
        names: &[String],
        cols: &'c ColumnMap,
        grid_only: bool,
        path: &Path,
        hline: usize,
    ) -> Result<Self> {
        let mut wanted: Vec<(usize, &str)> = vec![(X, &cols.x), (Y, &cols.y)];
        if let Some(c) = &cols.mask {
            wanted.push((MASK, c));
        }
        if !grid_only {
            wanted.push((U, &cols.u));
            wanted.push((V, &cols.v));
            for (role, c) in [(SU, &cols.sigma_u), (SV, &cols.sigma_v), (FLAG, &cols.flag)] {
                if let Some(c) = c {
                    wanted.push((role, c));
                }
            }
        }
        let mut role_of = vec![NONE; names.len()];
        let mut role_name = [""; 8];
        for &(role, name) in &wanted {
            let k = find(names, name, path, hline)?;
            if let Some(k2) = names[k + 1..].iter().position(|n| n == name) {
                return Err(Error::data(format!(
                    "the header names column '{}' twice (cells {} and {}); which one is meant?",
                    clip(name),
                    k + 1,
                    k + k2 + 2
                ))
                .with_path(path)
                .with_line(hline)
                .with_column(name));
            }
            role_of[k] = role as u8;
            role_name[role] = name;
        }
        let mut present = [false; 8];
        for w in &wanted {
            present[w.0] = true;
        }
        Ok(Roles {
            of: role_of,
            name: role_name,
            present,
        })
    }
}

/// Reads the data lines of one text frame.
pub(super) struct RowParser<'a> {
    pub(super) path: &'a Path,
    pub(super) format: Format,
    /// The header's line number.
    pub(super) hline: usize,
    /// Cells the header names.
    pub(super) ncol: usize,
    pub(super) roles: Roles<'a>,
    pub(super) grid_only: bool,
}

impl RowParser<'_> {
    /// Empty rows with room for every line of `bytes`.
    pub(super) fn empty_rows(&self, bytes: &[u8], units: crate::io::units::HeaderUnits) -> RawRows {
        let grid_only = self.grid_only;
        let has = |r: usize| self.roles.present[r];
        let cap = memchr::memchr_iter(b'\n', bytes).count() + 1;
        let vec = || Vec::with_capacity(cap);
        RawRows {
            x: vec(),
            y: vec(),
            u: if grid_only { Vec::new() } else { vec() },
            v: if grid_only { Vec::new() } else { vec() },
            sigma_u: has(SU).then(vec),
            sigma_v: has(SV).then(vec),
            invalid: Vec::with_capacity(cap),
            line: Vec::with_capacity(cap),
            masked: has(MASK).then(|| Vec::with_capacity(cap)),
            units,
        }
    }

    /// Parses data line `no` into `rows` (`vals` is scratch space).
    pub(super) fn push_row(
        &self,
        rows: &mut RawRows,
        no: usize,
        line: &[u8],
        vals: &mut [Option<f64>; 8],
    ) -> Result<()> {
        let (path, role_name) = (self.path, &self.roles.name);
        let n = scan_row(line, self.format, &self.roles.of, vals).map_err(|(r, m)| {
            Error::data(m)
                .with_path(path)
                .with_line(no)
                .with_column(role_name[r])
        })?;
        let (hline, ncol) = (self.hline, self.ncol);
        if n != ncol {
            return Err(Error::data(format!(
                "the line has {n} cells, the header (line {hline}) names {ncol}"
            ))
            .with_path(path)
            .with_line(no));
        }
        let pos = |r: usize| -> Result<f64> {
            vals[r].ok_or_else(|| {
                Error::data("empty or NaN cell: a node position must be a number")
                    .with_path(path)
                    .with_line(no)
                    .with_column(role_name[r])
            })
        };
        rows.x.push(pos(X)?);
        rows.y.push(pos(Y)?);
        rows.line.push(no);
        if let Some(m) = rows.masked.as_mut() {
            m.push(vals[MASK].is_some_and(|c| c != 0.0));
        }
        if self.grid_only {
            rows.invalid.push(false);
            return Ok(());
        }
        self.push_values(rows, no, vals)
    }

    /// Pushes the velocity, uncertainty and validity of a parsed line.
    fn push_values(&self, rows: &mut RawRows, no: usize, vals: &[Option<f64>; 8]) -> Result<()> {
        let (u, v) = (vals[U], vals[V]);
        let flagged = self.roles.present[FLAG] && vals[FLAG].is_some_and(|f| f != 0.0);
        for (r, dst) in [(SU, &mut rows.sigma_u), (SV, &mut rows.sigma_v)] {
            if let Some(dst) = dst {
                let s = vals[r].unwrap_or(f64::NAN);
                if s < 0.0 {
                    return Err(
                        Error::data(format!("'{s}': an uncertainty cannot be negative"))
                            .with_path(self.path)
                            .with_line(no)
                            .with_column(self.roles.name[r]),
                    );
                }
                dst.push(s);
            }
        }
        let invalid = u.is_none() || v.is_none() || flagged;
        rows.u.push(u.unwrap_or(f64::NAN));
        rows.v.push(v.unwrap_or(f64::NAN));
        rows.invalid.push(invalid);
        Ok(())
    }
}
