//! The data-quality figures of a run: where and how often vectors were
//! not valid measurements, and how the running statistics converged.

use super::Ctx;
use crate::error::Result;
use crate::field::table::Values;
use crate::plot::colormap::EMBER;
use crate::plot::draw::{Curve, LineFigure, LinePanel, MapFigure, MapPanel, RUN_COLORS};

/// The validation map and the rejected vectors per frame.
pub(super) fn validation_figures(c: &mut Ctx) -> Result<()> {
    validation_map_figure(c)?;
    rejected_per_frame_figure(c)
}

/// Per node, the fraction of frames in which the vector was rejected,
/// filled, or (without those columns) not valid.
fn validation_map_figure(c: &mut Ctx) -> Result<()> {
    let e = &c.run.stats.ensemble;
    let used = c.run.frames.iter().filter(|f| !f.rejected).count();
    let mut panels = Vec::new();
    if let Some(o) = e.get("outlier_frac") {
        panels.push(("Rejected by validation", o.to_vec()));
    }
    if let Some(f) = e.get("filled_frac") {
        panels.push(("Missing in the input, filled", f.to_vec()));
    }
    if panels.is_empty() && used > 0 {
        if let Some(n) = e.get("n_valid") {
            let nv = n.iter().map(|k| 1.0 - k / used as f64).collect();
            panels.push(("Not a valid measurement", nv));
        }
    }
    if panels.is_empty() {
        return Ok(());
    }
    let hi = panels
        .iter()
        .flat_map(|(_, v)| v.iter().copied())
        .filter(|x| x.is_finite())
        .fold(0.0, f64::max)
        .max(0.01);
    let n = panels.len();
    let mps = panels
        .into_iter()
        .map(|(t, v)| MapPanel {
            title: t.into(),
            grid: e.grid,
            values: v,
            cmap: &EMBER,
            range: (0.0, hi),
            vectors: None,
            faded: None,
            mask: c.run.mask.clone(),
            marks: None,
        })
        .collect();
    let width = if n > 1 {
        c.p.width.max(1200)
    } else {
        c.p.width
    };
    let fig = MapFigure::new(
        None,
        mps,
        c.units.axes(),
        "fraction of frames".into(),
        n,
        width,
    );
    let cap = format!("Fraction of the {used} frames used in which each node's vector was not a valid measurement.");
    c.save(&fig, "validation-map", "Validation map", cap)
}

/// Per frame, the fractions of vectors rejected by validation and invalid
/// in the input.
fn rejected_per_frame_figure(c: &mut Ctx) -> Result<()> {
    let fr = &c.run.frames;
    if fr.is_empty() {
        return Ok(());
    }
    let x = |k: usize| fr[k].meta.index as f64;
    let frac = |k: usize, n: usize| n as f64 / fr[k].n_vectors.max(1) as f64;
    let curves = vec![
        Curve {
            label: "rejected by validation".into(),
            xy: (0..fr.len())
                .map(|k| (x(k), frac(k, fr[k].validation.outliers())))
                .collect(),
            band: None,
            markers: false,
            color: RUN_COLORS[1],
        },
        Curve {
            label: "invalid in the input".into(),
            xy: (0..fr.len())
                .map(|k| (x(k), frac(k, fr[k].validation.invalid_input)))
                .collect(),
            band: None,
            markers: false,
            color: RUN_COLORS[0],
        },
    ];
    let n_rej = fr.iter().filter(|f| f.rejected).count();
    let fig = LineFigure {
        heading: None,
        panels: vec![LinePanel {
            title: "Rejected vectors per frame".into(),
            x_label: "frame".into(),
            y_label: "fraction of vectors".into(),
            curves,
            x_names: None,
        }],
        width: c.p.width,
        height: 520,
    };
    let cap = format!(
        "Per-frame fraction of vectors rejected by the validation tests and invalid in the input; \
         {n_rej} of {} frames were rejected whole.",
        fr.len()
    );
    c.save(
        &fig,
        "rejected-per-frame",
        "Rejected vectors per frame",
        cap,
    )
}

/// A numeric column as `f64` (integers converted); empty for text.
fn column_f64(v: &Values) -> Vec<f64> {
    match v {
        Values::F64(x) => x.clone(),
        Values::I64(x) => x.iter().map(|&k| k as f64).collect(),
        Values::Str(_) => Vec::new(),
    }
}

/// Each running statistic relative to its final value against the frames
/// averaged (at most six); none with fewer than two rows.
pub(super) fn convergence_figure(c: &mut Ctx) -> Result<()> {
    let Some(t) = &c.run.stats.convergence else {
        return Ok(());
    };
    if t.n_rows() < 2 {
        return Ok(());
    }
    let xname = ["n_frames", "frames", "n", "frame"]
        .into_iter()
        .find(|n| t.get(n).is_some())
        .unwrap_or(&t.columns[0].0);
    let xs = column_f64(t.get(xname).expect("column exists"));
    if xs.is_empty() {
        return Ok(());
    }
    let mut curves = Vec::new();
    for (name, vals) in t.columns.iter().filter(|(n, _)| n != xname) {
        let ys = column_f64(vals);
        let Some(&last) = ys.iter().rev().find(|y| y.is_finite()) else {
            continue;
        };
        let span = ys
            .iter()
            .filter(|y| y.is_finite())
            .fold(0.0_f64, |m, y| m.max(y.abs()));
        let norm = last.abs().max(1e-3 * span).max(1e-300);
        let color = RUN_COLORS[curves.len() % RUN_COLORS.len()];
        curves.push(Curve {
            label: name.clone(),
            xy: xs
                .iter()
                .zip(&ys)
                .map(|(x, y)| (*x, (y - last) / norm))
                .collect(),
            band: None,
            markers: false,
            color,
        });
        if curves.len() == 6 {
            break;
        }
    }
    if curves.is_empty() {
        return Ok(());
    }
    let fig = LineFigure {
        heading: None,
        panels: vec![LinePanel {
            title: "Convergence of the running statistics".into(),
            x_label: if xname == "n_frames" {
                "frames averaged".to_string()
            } else {
                xname.to_string()
            },
            y_label: "(s_n − s_N) / |s_N|".into(),
            curves,
            x_names: None,
        }],
        width: c.p.width,
        height: 560,
    };
    let cap = "Running statistics after n frames, relative to their final value s_N; \
               a flat trace near zero means the statistic has converged."
        .to_string();
    c.save(&fig, "convergence", "Convergence", cap)
}
