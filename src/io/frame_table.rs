//! The frame table: time and phase of each frame, from a CSV with the
//! columns `frame` and `time_s` and/or `phase_deg` (docs/interface.md),
//! and optionally the run's frequency as `frequency_hz` or `period_s` (a
//! value per row, e.g. from a reference probe; the run uses their mean).
//!
//! Owns: its column rules: a present column needs a number in every row
//! (no empty cells: a frame without its phase would silently leave the
//! phase average), phase is kept as given (stats takes it modulo 360), a
//! frame listed twice is an error naming both lines; a frequency or period
//! must be positive, and a table may not hold both. Lines and cells follow
//! `text` (comments, quotes, physical line numbers).

use std::path::Path;

use crate::error::{Error, Result};

use super::text::{clip, for_cells, header, is_comment_or_blank, lines, number, show};
use super::{Format, FrameTable, TableFrequency};

/// Reads a frame table: CSV with `frame` and `time_s` and/or `phase_deg`.
/// A column that is present must have a number in every row; a duplicate
/// frame is an error naming both lines.
pub(crate) fn parse_frame_table(bytes: &[u8], path: &Path) -> Result<FrameTable> {
    let mut it = lines(bytes);
    let (hline, names) = header(&mut it, Format::Csv, 0, path)?;
    let fcol = super::text::find(&names, "frame", path, hline)?;
    let tcol = names.iter().position(|n| n == "time_s");
    let pcol = names.iter().position(|n| n == "phase_deg");
    let fq = frequency_column(&names, path, hline)?;
    if tcol.is_none() && pcol.is_none() {
        return Err(Error::data(format!(
            "a frame table needs a 'time_s' or a 'phase_deg' column; the header has: {}",
            names.join(", ")
        ))
        .with_path(path)
        .with_line(hline));
    }
    let cols = TableColumns {
        path,
        ncol: names.len(),
        fcol,
        tcol,
        pcol,
        fq,
    };
    let mut table = FrameTable::default();
    let mut seen: std::collections::HashMap<String, usize> = Default::default();
    let mut freqs: Vec<f64> = Vec::new();
    for (no, line) in it {
        if is_comment_or_blank(line) {
            continue;
        }
        let row = cols.row(no, line)?;
        freqs.extend(row.hz);
        if let Some(first) = seen.insert(row.name.clone(), no) {
            return Err(Error::data(format!(
                "frame '{}' is listed twice, on lines {first} and {no}",
                clip(&row.name)
            ))
            .with_path(path)
            .with_line(no)
            .with_column("frame"));
        }
        table.rows.push((row.name, row.time, row.phase));
    }
    if let (Some((_, column)), false) = (fq, freqs.is_empty()) {
        let hz = freqs.iter().sum::<f64>() / freqs.len() as f64;
        let spread = freqs
            .iter()
            .fold(0.0_f64, |m, f| m.max((f - hz).abs() / hz));
        table.frequency = Some(TableFrequency {
            column,
            hz,
            spread,
            rows: freqs.len(),
        });
    }
    Ok(table)
}

/// Where the frame table's columns are.
struct TableColumns<'a> {
    path: &'a Path,
    /// Cells the header names.
    ncol: usize,
    fcol: usize,
    tcol: Option<usize>,
    pcol: Option<usize>,
    /// The frequency or period column and its name.
    fq: Option<(usize, &'static str)>,
}

/// One row of the frame table.
struct Row {
    name: String,
    time: Option<f64>,
    phase: Option<f64>,
    /// The row's frequency in Hz (from `frequency_hz` or `period_s`).
    hz: Option<f64>,
}

impl TableColumns<'_> {
    /// Reads data line `no`; every present column needs a number.
    fn row(&self, no: usize, line: &[u8]) -> Result<Row> {
        let path = self.path;
        let (fq, fcol, tcol, pcol) = (self.fq, self.fcol, self.tcol, self.pcol);
        let (mut frame, mut t, mut p, mut fc): (&[u8], &[u8], &[u8], &[u8]) = (b"", b"", b"", b"");
        let n = for_cells(line, Format::Csv, |k, c| {
            if Some(k) == fq.map(|q| q.0) {
                fc = c;
            }
            if k == fcol {
                frame = c;
            }
            if Some(k) == tcol {
                t = c;
            }
            if Some(k) == pcol {
                p = c;
            }
        });
        if n != self.ncol {
            return Err(Error::data(format!(
                "the line has {n} cells, the header names {}",
                self.ncol
            ))
            .with_path(path)
            .with_line(no));
        }
        if frame.is_empty() {
            return Err(Error::data("empty frame name")
                .with_path(path)
                .with_line(no)
                .with_column("frame"));
        }
        let name = show(frame);
        let time = self.value(no, t, tcol, "time_s")?;
        let phase = self.value(no, p, pcol, "phase_deg")?;
        let mut hz = None;
        if let Some((col, name)) = fq {
            let x = self.value(no, fc, Some(col), name)?.unwrap_or(f64::NAN);
            if !(x.is_finite() && x > 0.0) {
                return Err(
                    Error::data(format!("{name} = {x} must be a positive number"))
                        .with_path(path)
                        .with_line(no)
                        .with_column(name),
                );
            }
            hz = Some(if name == "period_s" { 1.0 / x } else { x });
        }
        Ok(Row {
            name,
            time,
            phase,
            hz,
        })
    }

    /// The number in `cell` of column `name` on line `no`, or None when the
    /// table has no such column (`col`).
    fn value(&self, no: usize, cell: &[u8], col: Option<usize>, name: &str) -> Result<Option<f64>> {
        if col.is_none() {
            return Ok(None);
        }
        match number(cell) {
            Ok(Some(x)) => Ok(Some(x)),
            Ok(None) => Err(Error::data(format!(
                "'{}' is not a number",
                clip(&show(cell))
            ))),
            Err(m) => Err(Error::data(m)),
        }
        .map_err(|e| e.with_path(self.path).with_line(no).with_column(name))
    }
}

/// The column holding the run's frequency (`frequency_hz`) or period
/// (`period_s`), if any; both at once is an error.
fn frequency_column(
    names: &[String],
    path: &Path,
    hline: usize,
) -> Result<Option<(usize, &'static str)>> {
    let f = names.iter().position(|n| n == "frequency_hz");
    let p = names.iter().position(|n| n == "period_s");
    match (f, p) {
        (Some(_), Some(_)) => Err(Error::data(
            "a frame table may give 'frequency_hz' or 'period_s', not both",
        )
        .with_path(path)
        .with_line(hline)),
        (Some(k), None) => Ok(Some((k, "frequency_hz"))),
        (None, Some(k)) => Ok(Some((k, "period_s"))),
        (None, None) => Ok(None),
    }
}
