//! Units stated in the header of a text frame (csv, tsv, text): `x [mm]`,
//! `u (m/s)`, `x[mm]`, a bracketed cell after a name in whitespace text
//! (`x [mm]` splits into two cells there, `u (m s-1)` into three), or a
//! units line right below the header (`mm mm m/s m/s`, or
//! `[mm] [mm] [m/s] [m/s]`).
//!
//! Owns: reading those units, matching column names without them, settling
//! a run's units from its first frame, and the scales each frame is read
//! with. Does not own: the pipeline's units (`plan::input`).
//!
//! Rules (docs/formats.md): a unit the pipeline states (`length_unit`,
//! `velocity_unit`) and a header contradicts is an error naming the file,
//! the line, the column and both units; a unit the pipeline does not state
//! is settled by the header of the run's first frame (`m`, `mm`; `m/s`,
//! `mm/s`) and every later frame that states one must agree; pixels need
//! the pipeline's calibration, so a header in pixels where the pipeline
//! states no unit is an error asking for it; with neither, metres and
//! metres per second are assumed, and `check` and the manifest say which.
//! The units of x and y must agree, as must those of u, v, sigma_u and
//! sigma_v. A column the pipeline maps by its full header cell
//! (`x = "x [mm]"`) keeps matching, and its unit is read all the same.

use std::path::Path;

use super::{ColumnMap, Format, FrameSource, InputSpec};
use crate::error::{Error, Result};

/// One unit a header states for a mapped column.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Stated {
    /// Canonical: `m`, `mm`, `px`; `m/s`, `mm/s`, `px`.
    pub unit: &'static str,
    /// The column's name without its unit (`x` of `x [mm]`).
    pub column: String,
    /// The unit as written in the header (`mm`, `m/s`, …), before canonicalisation.
    pub written: String,
    /// The line it was written on (the header or the units line).
    pub line: usize,
}

impl Stated {
    /// `'x [mm]'`, for messages.
    pub(crate) fn cell(&self) -> String {
        format!("'{} [{}]'", self.column, self.written)
    }
}

/// The units a header states for the mapped columns.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct HeaderUnits {
    /// The length unit of the x and y columns; `None`: the header states
    /// none.
    pub length: Option<Stated>,
    /// The velocity unit of the u and v columns; `None`: the header states
    /// none.
    pub velocity: Option<Stated>,
}

/// What the header of a run's first frame settled where the pipeline
/// states no unit (`InputSpec::units_from_header`): `length`, `velocity`
/// are the units it stated (`None`: assumed m, m/s, and later frames may
/// state only those).
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Settled {
    /// The first frame's file name.
    pub file: String,
    /// The length unit the header stated; `None`: m assumed.
    pub length: Option<Stated>,
    /// The velocity unit the header stated; `None`: m/s assumed.
    pub velocity: Option<Stated>,
}

/// `x [mm]` → (`x`, `mm`); `u(m/s)` → (`u`, `m/s`); `x` → (`x`, none).
pub(crate) fn split_name(cell: &str) -> (&str, Option<&str>) {
    let c = cell.trim();
    for (open, close) in [('[', ']'), ('(', ')')] {
        if let (Some(stripped), Some(p)) = (c.strip_suffix(close), c.rfind(open)) {
            let name = c[..p].trim();
            if !name.is_empty() {
                return (name, Some(stripped[p + 1..].trim()));
            }
        }
    }
    (c, None)
}

/// A cell of a units line as a unit: `[mm]` or `mm` → `mm`.
pub(crate) fn unit_cell(c: &str) -> String {
    bracketed(c).unwrap_or(c.trim()).to_string()
}

/// A cell that is only a bracketed unit (`[mm]`, `(m/s)`).
fn bracketed(cell: &str) -> Option<&str> {
    let c = cell.trim();
    [('[', ']'), ('(', ')')]
        .iter()
        .find_map(|&(o, e)| c.strip_prefix(o)?.strip_suffix(e))
        .map(str::trim)
}

/// The canonical length unit of a header's spelling.
pub(crate) fn length_unit(u: &str) -> Option<&'static str> {
    match u.trim() {
        "m" => Some("m"),
        "mm" => Some("mm"),
        "px" | "pix" | "pixel" | "pixels" => Some("px"),
        _ => None,
    }
}

/// The canonical velocity unit of a header's spelling (white space
/// ignored: `m s-1`, `m s^-1`, `m·s⁻¹`).
pub(crate) fn velocity_unit(u: &str) -> Option<&'static str> {
    let c: String = u.chars().filter(|c| !c.is_whitespace()).collect();
    let per_s = |base: &str| {
        [
            "/s", "s-1", "s^-1", "*s^-1", ".s-1", "·s-1", "·s^-1", "s⁻¹", "·s⁻¹",
        ]
        .iter()
        .any(|t| c.strip_prefix(base) == Some(*t))
    };
    if per_s("mm") {
        Some("mm/s")
    } else if per_s("m") {
        Some("m/s")
    } else if matches!(c.as_str(), "px" | "pix" | "pixel" | "pixels") {
        Some("px")
    } else {
        None
    }
}

/// Splits units off the header's names and returns each column's unit, if
/// stated. A whitespace header's bracket cells (`[mm]`, or `(m` `s-1)`)
/// join the name before them. A cell equal to one of `keep` (a name the
/// pipeline maps in full, like `x [mm]`) stays whole.
pub(crate) fn strip(names: &mut Vec<String>, keep: &[&str]) -> Vec<Option<String>> {
    let mut out: Vec<(String, Option<String>)> = Vec::with_capacity(names.len());
    let mut cells = std::mem::take(names).into_iter();
    while let Some(cell) = cells.next() {
        let t = cell.trim();
        let opens = t.starts_with('[') || t.starts_with('(');
        if let (true, Some(last)) = (opens, out.last_mut()) {
            if last.1.is_none() {
                let close = if t.starts_with('[') { ']' } else { ')' };
                let mut unit = t.to_string();
                while !unit.ends_with(close) {
                    match cells.next() {
                        Some(more) => {
                            unit.push(' ');
                            unit.push_str(more.trim());
                        }
                        None => break,
                    }
                }
                if let Some(u) = bracketed(&unit) {
                    last.1 = Some(u.to_string());
                    continue;
                }
                out.push((unit, None));
                continue;
            }
        }
        if keep.contains(&t) {
            out.push((t.to_string(), split_name(t).1.map(str::to_string)));
            continue;
        }
        let (n, u) = split_name(t);
        out.push((n.to_string(), u.map(str::to_string)));
    }
    out.into_iter()
        .map(|(n, u)| {
            names.push(n);
            u
        })
        .collect()
}

/// The mapped column names of `cols`, for `strip`'s `keep`.
pub(crate) fn mapped(cols: &ColumnMap) -> Vec<&str> {
    let mut v = vec![
        cols.x.as_str(),
        cols.y.as_str(),
        cols.u.as_str(),
        cols.v.as_str(),
    ];
    for c in [&cols.sigma_u, &cols.sigma_v, &cols.flag, &cols.mask]
        .into_iter()
        .flatten()
    {
        v.push(c);
    }
    v
}

/// Whether `cells` (the line after the header) is a units line: as many
/// cells as names, none a number, and x's and u's cells known units.
pub(crate) fn is_units_line(cells: &[String], names: &[String], cols: &ColumnMap) -> bool {
    let at = |name: &str| {
        names
            .iter()
            .position(|n| n == name)
            .and_then(|k| cells.get(k))
    };
    cells.len() == names.len()
        && cells.iter().all(|c| c.trim().parse::<f64>().is_err())
        && at(&cols.x).is_some_and(|c| length_unit(&unit_cell(c)).is_some())
        && at(&cols.u).is_some_and(|c| velocity_unit(&unit_cell(c)).is_some())
}

/// The units of the mapped columns written on `line`, checked to be known
/// and to agree (x with y; u, v, sigma_u, sigma_v with each other).
pub(crate) fn collect(
    names: &[String],
    units: &[Option<String>],
    cols: &ColumnMap,
    path: &Path,
    line: usize,
) -> Result<HeaderUnits> {
    let err = |col: &str, m: String| {
        Error::data(m)
            .with_path(path)
            .with_line(line)
            .with_column(col)
    };
    let mut h = HeaderUnits::default();
    let lengths = [Some(&cols.x), Some(&cols.y)];
    let speeds = [
        Some(&cols.u),
        Some(&cols.v),
        cols.sigma_u.as_ref(),
        cols.sigma_v.as_ref(),
    ];
    for (group, is_len) in [(&lengths[..], true), (&speeds[..], false)] {
        for col in group.iter().flatten() {
            let Some(k) = names.iter().position(|n| n == *col) else {
                continue;
            };
            let Some(u) = units.get(k).and_then(|u| u.as_deref()) else {
                continue;
            };
            let (canon, kind) = if is_len {
                (length_unit(u), "length")
            } else {
                (velocity_unit(u), "velocity")
            };
            let canon = canon.ok_or_else(|| {
                err(
                    col,
                    format!(
                        "the header gives '{col}' the unit '{u}', which is not a {kind} unit \
                         curlew knows (m, mm, px; m/s, mm/s, px)"
                    ),
                )
            })?;
            let slot = if is_len {
                &mut h.length
            } else {
                &mut h.velocity
            };
            match slot {
                Some(first) if first.unit != canon => {
                    return Err(err(
                        col,
                        format!(
                            "the header gives '{col}' the unit '{u}' but {} another; \
                             x and y must share a unit, as must u, v and their sigmas",
                            first.cell()
                        ),
                    ));
                }
                Some(_) => {}
                None => {
                    *slot = Some(Stated {
                        unit: canon,
                        column: col.to_string(),
                        written: u.to_string(),
                        line,
                    })
                }
            }
        }
    }
    Ok(h)
}

/// Metres (or m/s) per unit, for the units a header may settle.
fn si(unit: &str) -> Option<f64> {
    match unit {
        "m" | "m/s" => Some(1.0),
        "mm" | "mm/s" => Some(1e-3),
        _ => None,
    }
}

/// The length and velocity scales (SI per file unit) of a frame whose
/// header states `h`, under the rules of the module doc.
pub(crate) fn scales(spec: &InputSpec, h: &HeaderUnits, path: &Path) -> Result<(f64, f64)> {
    let settled = spec.units_from_header.as_ref();
    let one = |stated: &Option<String>,
               by_first: Option<&Stated>,
               found: &Option<Stated>,
               scale: f64,
               key: &str|
     -> Result<f64> {
        let Some(f) = found else {
            return Ok(scale);
        };
        let msg = match stated {
            Some(s) if s == f.unit => return Ok(scale),
            Some(s) => match (by_first, settled) {
                (Some(first), Some(st)) => format!(
                    "the header states {} but the run's first frame {} states {} \
                     (line {}); the frames of a run must share their units",
                    f.cell(),
                    st.file,
                    first.cell(),
                    first.line
                ),
                _ => format!(
                    "the header states {} but the pipeline says {key} = '{s}'",
                    f.cell()
                ),
            },
            None => match (si(f.unit), settled) {
                (Some(s), Some(st)) if s != 1.0 => format!(
                    "the header states {} but the run's first frame {} states no {key} \
                     (so the run assumes {}); the frames of a run must share their units",
                    f.cell(),
                    st.file,
                    if key == "length_unit" { "m" } else { "m/s" }
                ),
                (Some(s), _) => return Ok(s),
                (None, _) => format!(
                    "the header states {} (pixels) and the pipeline states no {key}: \
                     give {key} = \"px\" with pixel_size{} in [input]",
                    f.cell(),
                    if key == "velocity_unit" {
                        " and pulse_separation"
                    } else {
                        ""
                    }
                ),
            },
        };
        Err(Error::data(msg)
            .with_path(path)
            .with_line(f.line)
            .with_column(f.column.clone()))
    };
    Ok((
        one(
            &spec.length_unit,
            settled.and_then(|s| s.length.as_ref()),
            &h.length,
            spec.length_scale,
            "length_unit",
        )?,
        one(
            &spec.velocity_unit,
            settled.and_then(|s| s.velocity.as_ref()),
            &h.velocity,
            spec.velocity_scale,
            "velocity_unit",
        )?,
    ))
}

/// The units the header of the first frame of `pattern` settles for a run
/// read with `spec`: those the pipeline does not state and the header does
/// (pixels excepted: they need the calibration, and reading the frame says
/// so); a unit neither states stays assumed, and later frames must then
/// state none. `None` for formats without headers, when the pipeline
/// states both units, or when the frame cannot be read here (its reading
/// then reports why).
pub fn settle(spec: &InputSpec, pattern: &str) -> Option<Settled> {
    if !matches!(spec.format, Format::Csv | Format::Tsv | Format::Text)
        || (spec.length_unit.is_some() && spec.velocity_unit.is_some())
    {
        return None;
    }
    let frames = super::list_frames(spec, pattern).ok()?;
    let (_, first) = frames.first()?;
    let h = header_units(spec, first).ok()?;
    let take = |stated: &Option<String>, found: Option<Stated>| {
        found.filter(|f| stated.is_none() && si(f.unit).is_some())
    };
    let length = take(&spec.length_unit, h.length);
    let velocity = take(&spec.velocity_unit, h.velocity);
    let p = first.path();
    Some(Settled {
        file: p
            .file_name()
            .map_or_else(|| p.display().to_string(), |n| n.to_string_lossy().into()),
        length,
        velocity,
    })
}

/// The units the header of one frame states (none for other formats).
pub fn header_units(spec: &InputSpec, source: &FrameSource) -> Result<HeaderUnits> {
    Ok(super::read_rows(spec, source, true, false)?.0.units)
}

/// How the units of a run were settled, for `check` and the manifest:
/// stated by the pipeline, from the first frame's header, or assumed.
pub fn describe(spec: &InputSpec) -> String {
    let st = spec.units_from_header.as_ref();
    let part = |stated: &Option<String>, by: Option<&Stated>, default: &str| match (stated, by) {
        (_, Some(f)) => format!(
            "{} (from the header of {}, line {}: {})",
            f.unit,
            st.map_or("", |s| s.file.as_str()),
            f.line,
            f.cell()
        ),
        (Some(s), None) => format!("{s} (stated by the pipeline)"),
        (None, None) => {
            format!("{default} (assumed: neither the pipeline nor the header states it)")
        }
    };
    format!(
        "x, y in {}; u, v in {}",
        part(&spec.length_unit, st.and_then(|s| s.length.as_ref()), "m"),
        part(
            &spec.velocity_unit,
            st.and_then(|s| s.velocity.as_ref()),
            "m/s"
        )
    )
}
