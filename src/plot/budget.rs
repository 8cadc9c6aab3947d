//! The budget figure: the terms of the vorticity transport budget of one
//! slice as small multiples on one symmetric colour scale, with the nodes
//! where the residual is significant ringed.
//!
//! Owns: which slice is shown, the panels and their common limit
//! (`terms_view`, testable without drawing) and the drawing. Does not own
//! the terms (`budget`).
//!
//! The slice: `[budget] figure_bin` when that bin has a budget; otherwise
//! the slice whose largest |unsteady| over the nodes is largest (the phase
//! where the field changes fastest), or the first slice when no unsteady
//! term is finite (no frequency; a time-resolved run shows its first asked
//! frame unless it has a larger |unsteady|). The panels: unsteady,
//! advection, stretching, diffusion, turbulent and residual, each left out
//! when it is NaN everywhere. The colour limit is the largest |value| over
//! every node of every panel shown (not a percentile: one scale, so the
//! eye compares the terms' sizes directly; a spike therefore pales the
//! rest, which the caption's number makes visible).

use std::path::Path;

use super::colormap::TIDE;
use super::draw::{write_figure, MapFigure, MapPanel};
use super::figs::{sig, Units};
use super::{figure_ref, Params};
use crate::budget::{Budget, SliceKind, TERMS};
use crate::error::Result;
use crate::result::{FigureRef, RunResult};

/// What the budget figure shows, in SI.
#[derive(Debug, Clone)]
pub(crate) struct TermsView {
    /// Index into `Budget::slices`.
    pub slice: usize,
    /// (name, values per node) of each panel, residual last.
    pub panels: Vec<(&'static str, Vec<f64>)>,
    /// The common symmetric limit (1/s²): the largest |value| shown.
    pub limit: f64,
    /// Nodes where the residual is significant (`Budget::k`).
    pub marks: Vec<bool>,
}

fn max_abs(v: &[f64]) -> f64 {
    v.iter()
        .filter(|x| x.is_finite())
        .fold(0.0, |m, x| m.max(x.abs()))
}

/// The slice the figure shows (see the module doc).
pub(crate) fn chosen_slice(b: &Budget) -> Option<usize> {
    if b.slices.is_empty() {
        return None;
    }
    if let Some(want) = b.figure_bin {
        let at = b
            .slices
            .iter()
            .position(|s| matches!(s.kind, SliceKind::Bin { bin, .. } if bin == want));
        if at.is_some() {
            return at;
        }
    }
    let mut best = (0, 0.0);
    for (i, s) in b.slices.iter().enumerate() {
        let m = max_abs(&s.value[0]);
        if m > best.1 {
            best = (i, m);
        }
    }
    Some(best.0)
}

/// The panels, limit and marks of the figure, or None without a slice.
pub(crate) fn terms_view(b: &Budget) -> Option<TermsView> {
    let slice = chosen_slice(b)?;
    let s = &b.slices[slice];
    let mut panels: Vec<(&'static str, Vec<f64>)> = TERMS
        .iter()
        .enumerate()
        .map(|(t, name)| (*name, s.value[t].clone()))
        .collect();
    panels.push(("residual", s.residual.clone()));
    panels.retain(|(_, v)| v.iter().any(|x| x.is_finite()));
    if panels.is_empty() {
        return None;
    }
    let limit = panels.iter().map(|(_, v)| max_abs(v)).fold(0.0, f64::max);
    let marks = (0..b.grid.len())
        .map(|k| {
            s.residual[k].is_finite() && s.residual_unc[k].is_finite() && s.significant(k, b.k)
        })
        .collect();
    Some(TermsView {
        slice,
        panels,
        limit: if limit > 0.0 { limit } else { 1.0 },
        marks,
    })
}

/// Writes `<run>/figures/budget-terms.{png,svg}`, when the run has a budget.
pub(crate) fn figure(
    p: &Params,
    run: &RunResult,
    out: &Path,
    units: Units,
) -> Result<Option<FigureRef>> {
    let Some(b) = &run.budget else {
        return Ok(None);
    };
    let Some(view) = terms_view(b) else {
        return Ok(None);
    };
    let (f, unit) = match units.scales {
        Some((u, l)) => (l * l / (u * u), "L² / U²"),
        None => (1.0, "(1/s²)"),
    };
    let lim = view.limit * f;
    let n_marks = view.marks.iter().filter(|&&m| m).count();
    let n_res = b.slices[view.slice]
        .residual
        .iter()
        .filter(|x| x.is_finite())
        .count();
    let panels: Vec<MapPanel> = view
        .panels
        .iter()
        .map(|(name, v)| MapPanel {
            title: (*name).to_string(),
            grid: b.grid,
            values: v.iter().map(|x| x * f).collect(),
            cmap: &TIDE,
            range: (-lim, lim),
            vectors: None,
            faded: None,
            mask: run.mask.clone(),
            marks: (*name == "residual").then(|| view.marks.clone()),
        })
        .collect();
    let s = &b.slices[view.slice];
    let which = match s.kind {
        SliceKind::Bin { bin, centre_deg } => {
            let n = s.n.iter().fold(0.0_f64, |m, x| m.max(*x));
            format!("phase {centre_deg:.0}° (bin {bin}, up to {n:.0} frames per node)")
        }
        SliceKind::Frame { index, time_s } => format!("frame {index} (t = {} s)", sig(time_s)),
    };
    let cols = panels.len().min(3);
    let fig = MapFigure::new(
        Some(format!("Vorticity budget, {which}")),
        panels,
        units.axes(),
        format!("term {unit}"),
        cols,
        p.width.max(1500),
    );
    let freq = b
        .frequency
        .as_ref()
        .map_or(String::new(), |f| format!(" Frequency {}.", f.describe()));
    let cap = format!(
        "Terms of the vorticity transport budget at {which}, with ∂ω/∂t + u·∇ω = stretching + diffusion + turbulent + residual; \
         one symmetric colour scale ±{} {unit} (the largest |value| shown). Rings mark the {n_marks} of {n_res} nodes \
         where the residual exceeds k = {} standard uncertainties.{freq} Data: budget.csv.",
        sig(lim),
        sig(b.k)
    );
    let dir = out.join(&run.id).join("figures");
    let paths = write_figure(&fig, &dir, "budget-terms")?;
    Ok(Some(figure_ref(out, paths, "Vorticity budget", cap)))
}
