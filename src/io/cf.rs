//! The ensemble and phase fields as gridded NetCDF-3 following the CF
//! conventions (`ensemble.nc`, `phase.nc`), so that
//! `xarray.open_dataset` gives labelled 2-D fields with no reshaping.
//!
//! Owns: the variables, dimensions and attributes of those files. Does
//! not own: the byte layout (`netcdf`) or the values (`stats`).
//!
//! # Layout (CF-1.8)
//!
//! - Dimensions `y`, `x` (and `phase` first in `phase.nc`); coordinate
//!   variables `x(x)`, `y(y)` in metres with `axis`, and `phase(phase)`,
//!   the bin centre in degrees, with `n_frames(phase)`.
//! - Every other column of the table as a double variable over `(y, x)` or
//!   `(phase, y, x)`, NaN where there is no value (`_FillValue` NaN), with
//!   `units` (UDUNITS strings), `long_name`, and `ancillary_variables`
//!   naming its uncertainty (`<name>_unc`, and for `omega_mean` also
//!   `omega_inst_unc`). CF defines no `standard_name` for velocities or
//!   vorticity in a laboratory frame (its names are for the Earth's
//!   atmosphere and ocean), so none is written rather than a wrong one;
//!   counts carry `units = "1"`.
//! - Global attributes: `Conventions`, `title`, `source` (tool and
//!   version), `curlew_version`, `pipeline` (the pipeline file's text),
//!   `pipeline_sha256`, `run`.

use super::netcdf::{Attr, Data, Dataset, Var};
use crate::field::NodeTable;
use crate::stats::PhaseBin;

/// Who made the file: recorded as global attributes.
#[derive(Debug, Clone)]
pub(crate) struct Provenance<'a> {
    pub run: &'a str,
    pub pipeline_text: &'a str,
    pub pipeline_sha256: &'a str,
}

/// Units and a long name of a column, by its name (curlew's own columns;
/// anything else gets its name as long name and no units).
pub(crate) fn describe(name: &str) -> (Option<&'static str>, String) {
    let base = name.trim_end_matches("_unc");
    let unc = name.ends_with("_unc");
    let units = if name.starts_with("n_") || name.ends_with("_frac") {
        Some("1")
    } else if base.starts_with("omega") {
        Some("s-1")
    } else if base == "uv_cov" || base.ends_with("_var") {
        Some("m2 s-2")
    } else if base.starts_with("u_") || base.starts_with("v_") {
        Some("m s-1")
    } else {
        None
    };
    let what = match base {
        "n_valid" => "number of valid measurements".to_string(),
        "u_mean" => "mean velocity component along x".into(),
        "v_mean" => "mean velocity component along y".into(),
        "u_std" => "standard deviation of the velocity component along x".into(),
        "v_std" => "standard deviation of the velocity component along y".into(),
        "uv_cov" => {
            "covariance of the velocity components (kinematic Reynolds shear stress)".into()
        }
        "omega_mean" => "mean out-of-plane vorticity (dv/dx - du/dy)".into(),
        "omega_std" => "standard deviation of the out-of-plane vorticity".into(),
        "omega_inst" => "one instantaneous out-of-plane vorticity (rms over the frames)".into(),
        other => other.replace('_', " "),
    };
    let long = if unc {
        format!("standard uncertainty (k = 1) of the {what}")
    } else {
        what
    };
    (units, long)
}

fn attrs_of(name: &str, names: &[&str]) -> Vec<(String, Attr)> {
    let (units, long) = describe(name);
    let mut a = vec![("long_name".to_string(), Attr::Text(long))];
    if let Some(u) = units {
        a.push(("units".into(), Attr::Text(u.into())));
    }
    a.push(("_FillValue".into(), Attr::Num(vec![f64::NAN])));
    let mut anc: Vec<String> = Vec::new();
    let own = format!("{name}_unc");
    if names.contains(&own.as_str()) {
        anc.push(own);
    }
    if name == "omega_mean" && names.contains(&"omega_inst_unc") {
        anc.push("omega_inst_unc".into());
    }
    if !anc.is_empty() {
        a.push(("ancillary_variables".into(), Attr::Text(anc.join(" "))));
    }
    a
}

fn coords(ds: &mut Dataset, nt: &NodeTable) -> (usize, usize) {
    let g = nt.grid;
    let dy = ds.dims.len();
    ds.dims.push(("y".into(), g.ny));
    ds.dims.push(("x".into(), g.nx));
    for (name, d, vals, axis) in [
        (
            "x",
            dy + 1,
            (0..g.nx).map(|i| g.x(i)).collect::<Vec<_>>(),
            "X",
        ),
        ("y", dy, (0..g.ny).map(|j| g.y(j)).collect(), "Y"),
    ] {
        ds.vars.push(Var {
            name: name.into(),
            dims: vec![d],
            attrs: vec![
                (
                    "long_name".into(),
                    Attr::Text(format!("{name} position of the node")),
                ),
                ("units".into(), Attr::Text("m".into())),
                ("axis".into(), Attr::Text(axis.into())),
            ],
            data: Data::F64(vals),
        });
    }
    (dy, dy + 1)
}

fn globals(ds: &mut Dataset, p: &Provenance, what: &str) {
    let t = |s: &str| Attr::Text(s.to_string());
    ds.attrs = vec![
        ("Conventions".into(), t("CF-1.8")),
        (
            "title".into(),
            Attr::Text(format!("{what} of run '{}'", p.run)),
        ),
        (
            "source".into(),
            Attr::Text(format!("curlew {}", crate::VERSION)),
        ),
        ("curlew_version".into(), t(crate::VERSION)),
        ("run".into(), t(p.run)),
        ("pipeline_sha256".into(), t(p.pipeline_sha256)),
        ("pipeline".into(), t(p.pipeline_text)),
    ];
}

/// The ensemble table as a CF dataset over `(y, x)`.
pub(crate) fn ensemble(nt: &NodeTable, p: &Provenance) -> Dataset {
    let mut ds = Dataset::default();
    globals(&mut ds, p, "Ensemble statistics");
    let (dy, dx) = coords(&mut ds, nt);
    let names: Vec<&str> = nt.columns.iter().map(|(n, _)| n.as_str()).collect();
    for (name, vals) in &nt.columns {
        ds.vars.push(Var {
            name: name.clone(),
            dims: vec![dy, dx],
            attrs: attrs_of(name, &names),
            data: Data::F64(vals.clone()),
        });
    }
    ds
}

/// The phase bins as a CF dataset over `(phase, y, x)`; `None` without bins.
pub(crate) fn phase(bins: &[PhaseBin], p: &Provenance) -> Option<Dataset> {
    let first = bins.first()?;
    let mut ds = Dataset::default();
    globals(&mut ds, p, "Phase-averaged statistics");
    ds.dims.push(("phase".into(), bins.len()));
    let (dy, dx) = coords(&mut ds, &first.table);
    ds.vars.push(Var {
        name: "phase".into(),
        dims: vec![0],
        attrs: vec![
            (
                "long_name".into(),
                Attr::Text("phase of the bin centre".into()),
            ),
            ("units".into(), Attr::Text("degree".into())),
        ],
        data: Data::F64(bins.iter().map(|b| b.centre_deg).collect()),
    });
    ds.vars.push(Var {
        name: "n_frames".into(),
        dims: vec![0],
        attrs: vec![
            (
                "long_name".into(),
                Attr::Text("frames in the phase bin".into()),
            ),
            ("units".into(), Attr::Text("1".into())),
        ],
        data: Data::I32(bins.iter().map(|b| b.n_frames as i32).collect()),
    });
    let names: Vec<&str> = first
        .table
        .columns
        .iter()
        .map(|(n, _)| n.as_str())
        .collect();
    for name in &names {
        let mut vals = Vec::with_capacity(bins.len() * first.table.grid.len());
        for b in bins {
            match b.table.get(name) {
                Some(c) => vals.extend_from_slice(c),
                None => vals.extend(std::iter::repeat_n(f64::NAN, first.table.grid.len())),
            }
        }
        ds.vars.push(Var {
            name: name.to_string(),
            dims: vec![0, dy, dx],
            attrs: attrs_of(name, &names),
            data: Data::F64(vals),
        });
    }
    Some(ds)
}

/// What a NetCDF-3 file holds, for `curlew inspect`: dimensions, global
/// attributes (the pipeline's text shortened to its hash), and per
/// variable its dimensions, units, long name, range and empty cells.
pub fn summary(path: &std::path::Path) -> crate::Result<String> {
    use std::fmt::Write;
    let bytes = std::fs::read(path).map_err(|e| crate::Error::io(path, e))?;
    let ds = Dataset::from_bytes(&bytes).map_err(|e| crate::Error::data(e).with_path(path))?;
    let mut out = String::new();
    let _ = writeln!(out, "file       {}", path.display());
    let _ = writeln!(out, "kind       NetCDF-3");
    let dims: Vec<String> = ds.dims.iter().map(|(n, l)| format!("{n} = {l}")).collect();
    let _ = writeln!(out, "dimensions {}", dims.join(", "));
    for (n, a) in &ds.attrs {
        let shown = match a {
            Attr::Text(_) if n == "pipeline" => "(the pipeline file's text)".to_string(),
            Attr::Text(t) => t.clone(),
            Attr::Num(v) => format!("{v:?}"),
        };
        let _ = writeln!(out, "attribute  {n}: {shown}");
    }
    for v in &ds.vars {
        let vals = v.data.to_f64();
        let fin: Vec<f64> = vals.iter().copied().filter(|x| x.is_finite()).collect();
        let (lo, hi) = fin
            .iter()
            .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &x| {
                (a.min(x), b.max(x))
            });
        let dn: Vec<&str> = v.dims.iter().map(|&d| ds.dims[d].0.as_str()).collect();
        let _ = writeln!(
            out,
            "variable   {}({}) [{}] {}: {} .. {}, {} empty",
            v.name,
            dn.join(", "),
            v.text("units").unwrap_or("-"),
            v.text("long_name").unwrap_or(""),
            lo,
            hi,
            vals.len() - fin.len()
        );
    }
    Ok(out)
}
