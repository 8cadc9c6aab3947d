//! Text frames (csv, tsv, whitespace text) parsed from bytes, and the frame
//! table.
//!
//! Owns: splitting lines and cells without allocating per cell, the cell
//! rules of docs/interface.md, and the errors that name file, line, column and
//! value. Does not own: the grid (`grid`), the frame table's columns
//! (`frame_table`, which uses the same line and cell rules).
//!
//! The whole file is read into one buffer; lines and cells are slices of it
//! and numbers are parsed straight from the bytes with `fast-float2`
//! (Eisel–Lemire with a correct fallback: Lemire 2021, "Number parsing at a
//! gigabyte per second", Software: Practice and Experience 51(8)), so there
//! is no per-cell allocation and every decimal string maps to the nearest
//! double, bit for bit as `str::parse::<f64>` does (checked on 600 000
//! random strings when it was adopted) and about 2x faster on this machine.
//!
//! Lines: `\n` or `\r\n` endings; numbered 1-based as physical lines of the
//! file. The first `skip_lines` lines are a preamble; after it, blank lines
//! and lines whose first non-blank character is `#` are comments. The first
//! other line is the header. Cells: csv splits at `,`, tsv at tab, text at
//! runs of spaces and tabs. Cells are trimmed; one pair of surrounding
//! double quotes is removed (quoted cells may not contain the delimiter or a
//! line break).

use std::path::Path;

use crate::error::{Error, Result, WithPath};

use super::grid::RawRows;
use super::{ColumnMap, Format};
use number::{parse_number, parse_partial};
use rows::{units_line, Roles, RowParser};

/// A line of the file: its 1-based number and its bytes (no line ending).
#[derive(Clone)]
pub(super) struct Lines<'a> {
    rest: &'a [u8],
    number: usize,
    /// `\n`, or `\r` for a file with classic Mac line endings (CR only).
    end: u8,
}

impl<'a> Iterator for Lines<'a> {
    type Item = (usize, &'a [u8]);
    fn next(&mut self) -> Option<Self::Item> {
        if self.rest.is_empty() {
            return None;
        }
        self.number += 1;
        let (line, rest) = match memchr::memchr(self.end, self.rest) {
            Some(p) => (&self.rest[..p], &self.rest[p + 1..]),
            None => (self.rest, &self.rest[self.rest.len()..]),
        };
        self.rest = rest;
        let line = line.strip_suffix(b"\r").unwrap_or(line);
        Some((self.number, line))
    }
}

pub(super) fn lines(bytes: &[u8]) -> Lines<'_> {
    let bytes = bytes.strip_prefix(b"\xEF\xBB\xBF").unwrap_or(bytes); // UTF-8 BOM
    let cr_only = memchr::memchr(b'\n', bytes).is_none() && memchr::memchr(b'\r', bytes).is_some();
    Lines {
        rest: bytes,
        number: 0,
        end: if cr_only { b'\r' } else { b'\n' },
    }
}

pub(super) fn is_comment_or_blank(line: &[u8]) -> bool {
    match line.iter().position(|b| !b.is_ascii_whitespace()) {
        None => true,
        Some(p) => line[p] == b'#',
    }
}

fn trim(cell: &[u8]) -> &[u8] {
    let cell = cell.trim_ascii();
    if cell.len() >= 2 && cell[0] == b'"' && cell[cell.len() - 1] == b'"' {
        cell[1..cell.len() - 1].trim_ascii()
    } else {
        cell
    }
}

/// Calls `each(index, cell)` for every cell of `line`; returns the count.
#[inline]
pub(super) fn for_cells<'a>(
    line: &'a [u8],
    format: Format,
    mut each: impl FnMut(usize, &'a [u8]),
) -> usize {
    let mut n = 0;
    match format {
        Format::Text => {
            for c in line
                .split(|&b| b == b' ' || b == b'\t')
                .filter(|c| !c.is_empty())
            {
                each(n, trim(c));
                n += 1;
            }
        }
        _ => {
            let delim = if format == Format::Tsv { b'\t' } else { b',' };
            for c in line.split(|&b| b == delim) {
                each(n, trim(c));
                n += 1;
            }
        }
    }
    n
}

#[inline]
fn is_blank(b: u8) -> bool {
    b == b' ' || b == b'\t'
}

/// The end of the cell starting at `p`: the next delimiter (csv, tsv) or
/// blank (text), or the end of the line.
#[inline]
fn cell_end(line: &[u8], p: usize, format: Format) -> usize {
    let rest = &line[p..];
    let found = match format {
        Format::Text => rest.iter().position(|&b| is_blank(b)),
        Format::Tsv => memchr::memchr(b'\t', rest),
        _ => memchr::memchr(b',', rest),
    };
    found.map_or(line.len(), |i| p + i)
}

/// One pass over a data line: for every cell `k` with a role `r =
/// role_of[k]`, sets `vals[r]` to its number (`None` for empty or NaN).
/// Returns the number of cells, or the role and message of the first bad
/// cell. Fast path: the number is parsed in place at the cell start and must
/// be followed (after blanks) by the delimiter or the line end; anything else
/// (quotes, empty, text) goes through `number` on the trimmed cell.
#[inline]
fn scan_row(
    line: &[u8],
    format: Format,
    role_of: &[u8],
    vals: &mut [Option<f64>; 8],
) -> std::result::Result<usize, (usize, String)> {
    let n = line.len();
    let text = format == Format::Text;
    let delim = if format == Format::Tsv { b'\t' } else { b',' };
    let at_end = |e: usize| {
        e == n
            || if text {
                is_blank(line[e])
            } else {
                line[e] == delim
            }
    };
    let mut p = 0;
    if text {
        while p < n && is_blank(line[p]) {
            p += 1;
        }
    }
    let mut k = 0;
    loop {
        let role = role_of.get(k).copied().unwrap_or(NONE);
        let mut e = usize::MAX;
        if role != NONE {
            let r = role as usize;
            let mut q = p;
            while q < n && line[q] == b' ' {
                q += 1;
            }
            if let Some((x, used, plain)) = parse_number(&line[q..]) {
                let mut end = q + used;
                while end < n && line[end] == b' ' && !at_end(end) {
                    end += 1;
                }
                // `plain` values are finite by construction: deciding on
                // the flag rather than on `x` lets the division behind `x`
                // finish while the next cells are scanned
                if at_end(end) && (plain || x.is_finite()) {
                    vals[r] = Some(x);
                    e = end;
                }
            }
            if e == usize::MAX {
                e = cell_end(line, p, format);
                vals[r] = number(trim(&line[p..e])).map_err(|m| (r, m))?;
            }
        } else {
            e = cell_end(line, p, format);
        }
        k += 1;
        if text {
            while e < n && is_blank(line[e]) {
                e += 1;
            }
            if e >= n {
                return Ok(k);
            }
            p = e;
        } else {
            if e >= n {
                return Ok(k);
            }
            p = e + 1;
        }
    }
}

pub(super) fn show(cell: &[u8]) -> String {
    String::from_utf8_lossy(cell).into_owned()
}

/// Longest piece of a file echoed in a message, in characters.
const CLIP: usize = 60;

/// Text from a file as a message shows it: control characters escaped
/// (a stray CR prints as `\r`), clipped to `CLIP` characters with the
/// length of the rest.
pub(crate) fn clip(text: &str) -> String {
    let mut out = String::new();
    for (n, c) in text.chars().enumerate() {
        if n == CLIP {
            let rest = text.chars().count() - n;
            out.push_str(&format!("... ({rest} more characters)"));
            return out;
        }
        if c.is_control() {
            out.extend(c.escape_debug());
        } else {
            out.push(c);
        }
    }
    out
}

/// A cell as a number: `Ok(None)` for empty or NaN (any case), an error for
/// anything else that is not a finite number.
#[inline]
pub(crate) fn number(cell: &[u8]) -> std::result::Result<Option<f64>, String> {
    if cell.is_empty() {
        return Ok(None);
    }
    if let Some((x, used)) = parse_partial(cell) {
        if used == cell.len() && x.is_finite() {
            return Ok(Some(x));
        }
    }
    match fast_float2::parse::<f64, _>(cell) {
        Ok(x) if x.is_finite() => Ok(Some(x)),
        Ok(x) if x.is_nan() => Ok(None),
        Ok(_) => Err(format!("'{}' is not a finite number", clip(&show(cell)))),
        Err(_) => Err(format!("'{}' is not a number", clip(&show(cell)))),
    }
}

/// Reads the file, with the path in any error.
pub(crate) fn read_bytes(path: &Path) -> Result<Vec<u8>> {
    std::fs::read(path).with_path(path)
}

/// Reads the whole file into `buf` (cleared first, its capacity reused).
pub(crate) fn read_into(path: &Path, buf: &mut Vec<u8>) -> Result<()> {
    use std::io::Read;
    buf.clear();
    let mut f = std::fs::File::open(path).with_path(path)?;
    if let Ok(m) = f.metadata() {
        buf.reserve(m.len() as usize + 1);
    }
    f.read_to_end(buf).with_path(path)?;
    Ok(())
}

/// The header line: its number and cell names.
pub(super) fn header<'a>(
    it: &mut Lines<'a>,
    format: Format,
    skip_lines: usize,
    path: &Path,
) -> Result<(usize, Vec<String>)> {
    for _ in 0..skip_lines {
        if it.next().is_none() {
            return Err(Error::data(format!(
                "the file ends within the {skip_lines} preamble lines to skip"
            ))
            .with_path(path));
        }
    }
    for (no, line) in it.by_ref() {
        if is_comment_or_blank(line) {
            continue;
        }
        let mut names = Vec::new();
        for_cells(line, format, |_, c| names.push(show(c)));
        return Ok((no, names));
    }
    Err(Error::data("the file has no header line").with_path(path))
}

/// Index of column `name` in `names`, or the error naming what was found.
pub(super) fn find(names: &[String], name: &str, path: &Path, line: usize) -> Result<usize> {
    names.iter().position(|n| n == name).ok_or_else(|| {
        let numeric = names
            .iter()
            .all(|n| matches!(number(n.as_bytes()), Ok(Some(_))));
        let hint = if numeric {
            " (this line looks like data: is the header missing, commented out with '#', \
             or is skip_lines too large?)"
        } else {
            ""
        };
        let shown: Vec<String> = names.iter().take(20).map(|n| clip(n)).collect();
        let more = if names.len() > 20 {
            format!(" and {} more", names.len() - 20)
        } else {
            String::new()
        };
        Error::data(format!(
            "missing column '{}'; the header has: {}{more}{hint}",
            clip(name),
            shown.join(", ")
        ))
        .with_path(path)
        .with_line(line)
        .with_column(name)
    })
}

// Roles of the mapped columns, in the order of `cells` below.
const X: usize = 0;
const Y: usize = 1;
const U: usize = 2;
const V: usize = 3;
const SU: usize = 4;
const SV: usize = 5;
const FLAG: usize = 6;
const MASK: usize = 7;
const NONE: u8 = u8::MAX;

/// Parses a text frame into rows. With `grid_only`, only x and y are read
/// (for `check`).
pub(crate) fn parse_frame(
    bytes: &[u8],
    path: &Path,
    format: Format,
    skip_lines: usize,
    cols: &ColumnMap,
    grid_only: bool,
) -> Result<RawRows> {
    let mut it = lines(bytes);
    let (hline, mut names) = header(&mut it, format, skip_lines, path)?;
    let mut units = super::units::strip(&mut names, &super::units::mapped(cols));
    let mut uline = hline;
    // a units line right below the header
    if let Some((no, cells)) = units_line(&mut it, format, &names, cols) {
        units = cells;
        uline = no;
    }
    let header_units = super::units::collect(&names, &units, cols, path, uline)?;
    let roles = Roles::map(&names, cols, grid_only, path, hline)?;
    let parser = RowParser {
        path,
        format,
        hline,
        ncol: names.len(),
        roles,
        grid_only,
    };
    let mut rows = parser.empty_rows(bytes, header_units);
    let mut vals: [Option<f64>; 8] = [None; 8];
    for (no, line) in it {
        if is_comment_or_blank(line) {
            continue;
        }
        parser.push_row(&mut rows, no, line, &mut vals)?;
    }
    if rows.is_empty() {
        return Err(Error::data("the file has a header but no data rows").with_path(path));
    }
    Ok(rows)
}

/// The header names and data cells of a generic text table (for
/// `inspect`): calls `each(line, column index, cell)` for every cell.
pub(crate) fn scan_table(
    bytes: &[u8],
    path: &Path,
    format: Format,
    skip_lines: usize,
    mut each: impl FnMut(usize, usize, &[u8]) -> Result<()>,
) -> Result<Vec<String>> {
    let mut it = lines(bytes);
    let (_, names) = header(&mut it, format, skip_lines, path)?;
    for (no, line) in it {
        if is_comment_or_blank(line) {
            continue;
        }
        let mut err = None;
        for_cells(line, format, |k, c| {
            if err.is_none() {
                err = each(no, k, c).err();
            }
        });
        if let Some(e) = err {
            return Err(e.with_path(path).with_line(no));
        }
    }
    Ok(names)
}

mod number;
mod rows;
#[cfg(test)]
mod tests;
