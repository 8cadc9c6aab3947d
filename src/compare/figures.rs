//! Figures of a comparison: the two fields side by side, the difference
//! map with non-significant nodes faded, profiles with ±k·u bands, and the
//! scalars across conditions with ±k·u error bars. Dimensional units (mm,
//! SI values), since compared runs may have different scales.

use std::path::Path;

use super::interp::Difference;
use super::{Profile, Scalar};
use crate::error::Result;
use crate::plan::report::ComparePlan;
use crate::plot::colormap::{EMBER, TIDE};
use crate::plot::draw::{
    write_figure, Axes, Curve, LineFigure, LinePanel, MapFigure, MapPanel, RUN_COLORS,
};
use crate::plot::{figure_ref, magnitude_limit, symmetric_limit};
use crate::result::{FigureRef, RunResult};

/// The unit of an ensemble column, from its name.
pub(crate) fn unit_of(q: &str) -> &'static str {
    if q.starts_with("omega") {
        "1/s"
    } else if q == "uv_cov" {
        "m²/s²"
    } else if q.starts_with("u_") || q.starts_with("v_") || q.starts_with("speed") {
        "m/s"
    } else {
        "1"
    }
}

fn mm_axes() -> Axes {
    Axes {
        scale: 1e-3,
        x_label: "x (mm)".into(),
        y_label: "y (mm)".into(),
    }
}

/// The side-by-side and difference figures of a comparison's difference.
pub(crate) fn difference_figures(
    p: &ComparePlan,
    a: &RunResult,
    b: &RunResult,
    d: &Difference,
    dir: &Path,
    out: &Path,
) -> Result<Vec<FigureRef>> {
    Ok(vec![
        side_by_side_figure(p, a, b, d, dir, out)?,
        delta_figure(p, a, b, d, dir, out)?,
    ])
}

/// A run's mask on the difference grid: its own only where its grid is the
/// difference's (both maps are on the grid of a).
fn mask_on(r: &RunResult, d: &Difference) -> Option<Vec<bool>> {
    r.mask.clone().filter(|_| r.grid == d.grid)
}

/// The two fields side by side with shared colour limits.
fn side_by_side_figure(
    p: &ComparePlan,
    a: &RunResult,
    b: &RunResult,
    d: &Difference,
    dir: &Path,
    out: &Path,
) -> Result<FigureRef> {
    let unit = unit_of(&p.quantity);
    let both: Vec<f64> = d.a.iter().chain(&d.b).copied().collect();
    let signed = both.iter().any(|x| *x < 0.0) && both.iter().any(|x| *x > 0.0);
    let (cmap, range) = if signed {
        let l = symmetric_limit(&both);
        (&TIDE, (-l, l))
    } else {
        (&EMBER, (0.0, magnitude_limit(&both)))
    };
    let panel = |t: String, v: &[f64], mask| MapPanel {
        title: t,
        grid: d.grid,
        values: v.to_vec(),
        cmap,
        range,
        vectors: None,
        faded: None,
        mask,
        marks: None,
    };
    let fig = MapFigure::new(
        None,
        vec![
            panel(a.id.clone(), &d.a, mask_on(a, d)),
            panel(
                format!(
                    "{}{}",
                    b.id,
                    if d.interpolated {
                        " (interpolated)"
                    } else {
                        ""
                    }
                ),
                &d.b,
                mask_on(b, d),
            ),
        ],
        mm_axes(),
        format!("{} ({unit})", p.quantity),
        2,
        1400,
    );
    let paths = write_figure(&fig, dir, "side-by-side")?;
    Ok(figure_ref(
        out,
        paths,
        "Side by side",
        format!(
            "{} of '{}' and '{}' on the grid of '{}', shared colour limits.",
            p.quantity, a.id, b.id, a.id
        ),
    ))
}

/// The difference map with the nodes that do not differ significantly faded.
fn delta_figure(
    p: &ComparePlan,
    a: &RunResult,
    b: &RunResult,
    d: &Difference,
    dir: &Path,
    out: &Path,
) -> Result<FigureRef> {
    let unit = unit_of(&p.quantity);
    let lim = symmetric_limit(&d.delta);
    let k = p.coverage;
    let fig = MapFigure::new(
        None,
        vec![MapPanel {
            title: format!("Δ = {} − {}", b.id, a.id),
            grid: d.grid,
            values: d.delta.clone(),
            cmap: &TIDE,
            range: (-lim, lim),
            vectors: None,
            faded: Some(d.significant.iter().map(|s| !s).collect()),
            mask: mask_on(a, d),
            marks: None,
        }],
        mm_axes(),
        format!("Δ {} ({unit})", p.quantity),
        1,
        1000,
    );
    let paths = write_figure(&fig, dir, "difference")?;
    let frac = if d.n_compared > 0 {
        format!(
            "{} of {} nodes ({:.1} %) differ significantly",
            d.n_significant,
            d.n_compared,
            100.0 * d.n_significant as f64 / d.n_compared as f64
        )
    } else {
        "no node has a known uncertainty, so nothing is marked significant".to_string()
    };
    Ok(figure_ref(
        out,
        paths,
        "Difference",
        format!(
            "Difference of {}; nodes where |Δ| ≤ {k}·sqrt(u₁² + u₂²) are faded. {frac}.",
            p.quantity
        ),
    ))
}

/// Profiles of every run at up to four stations, one panel per station.
pub(crate) fn profile_figure(
    p: &ComparePlan,
    sel: &[&RunResult],
    profiles: &[Profile],
    dir: &Path,
    out: &Path,
) -> Result<Vec<FigureRef>> {
    let mut stations: Vec<&str> = Vec::new();
    for pr in profiles {
        if !stations.contains(&pr.station.as_str()) {
            stations.push(&pr.station);
        }
    }
    stations.truncate(4);
    let k = p.coverage;
    let panels: Vec<LinePanel> = stations
        .iter()
        .map(|st| profile_panel(p, sel, profiles, st))
        .collect();
    let n = panels.len() as u32;
    let fig = LineFigure {
        heading: None,
        panels,
        width: (520 * n).max(1000),
        height: 560,
    };
    let paths = write_figure(&fig, dir, "profiles")?;
    Ok(vec![figure_ref(
        out,
        paths,
        "Profiles",
        format!("{} along lines at the stations; shaded bands are ±{k}·u (standard uncertainty of the mean).", p.profile),
    )])
}

/// The panel of one station: each run's profile with its ±k·u band where
/// the uncertainty is known.
fn profile_panel(p: &ComparePlan, sel: &[&RunResult], profiles: &[Profile], st: &str) -> LinePanel {
    let k = p.coverage;
    let unit = unit_of(&p.profile);
    let curves = profiles
        .iter()
        .filter(|pr| pr.station == st)
        .map(|pr| {
            let ci = sel.iter().position(|r| r.id == pr.run).unwrap_or(0);
            let xy: Vec<(f64, f64)> =
                pr.s.iter()
                    .zip(&pr.value)
                    .map(|(s, v)| (s * 1e3, *v))
                    .collect();
            let band = pr.uncertainty.iter().any(|u| u.is_finite()).then(|| {
                pr.s.iter()
                    .zip(&pr.value)
                    .zip(&pr.uncertainty)
                    .map(|((s, v), u)| (s * 1e3, v - k * u, v + k * u))
                    .collect()
            });
            Curve {
                label: pr.run.clone(),
                xy,
                band,
                color: RUN_COLORS[ci % RUN_COLORS.len()],
                markers: false,
            }
        })
        .collect();
    let along = if st.starts_with('x') {
        "y (mm)"
    } else {
        "x (mm)"
    };
    LinePanel {
        title: st.to_string(),
        x_label: along.into(),
        y_label: format!("{} ({unit})", p.profile),
        curves,
        x_names: None,
    }
}

/// The scalars across conditions with ±k·u error bars, one panel per
/// scalar that any run has; no figure when none has one.
pub(crate) fn scalar_figure(
    p: &ComparePlan,
    sel: &[&RunResult],
    scalars: &[Scalar],
    dir: &Path,
    out: &Path,
) -> Result<Vec<FigureRef>> {
    let axis = ConditionAxis::of(sel);
    let k = p.coverage;
    let names = [
        "peak vorticity",
        "circulation of the strongest vortex",
        "circulation of the strongest phase-mean vortex",
        "velocity deficit",
    ];
    let panels: Vec<LinePanel> = names
        .iter()
        .filter_map(|name| scalar_panel(name, sel, scalars, &axis, k))
        .collect();
    if panels.is_empty() {
        return Ok(Vec::new());
    }
    let n = panels.len() as u32;
    let fig = LineFigure {
        heading: None,
        panels,
        width: (420 * n).max(1000),
        height: 520,
    };
    let paths = write_figure(&fig, dir, "scalars")?;
    let axis = if axis.by_re {
        "against the Reynolds number"
    } else {
        "by run (give each run velocity, length and viscosity conditions to plot against Re)"
    };
    Ok(vec![figure_ref(
        out,
        paths,
        "Scalars across conditions",
        format!("Scalar results {axis}; error bars are ±{k}·u."),
    )])
}

/// The horizontal axis of the scalar figure: the Reynolds number of each
/// run, or the run's position in the plan.
struct ConditionAxis {
    re: Vec<Option<f64>>,
    by_re: bool,
}

impl ConditionAxis {
    /// Against Re when every run has one and they all differ; else by run.
    fn of(sel: &[&RunResult]) -> Self {
        let re: Vec<Option<f64>> = sel.iter().map(|r| r.conditions.reynolds()).collect();
        let mut sorted: Vec<f64> = re.iter().flatten().copied().collect();
        sorted.sort_by(f64::total_cmp);
        let by_re =
            sorted.len() == sel.len() && sorted.windows(2).all(|w| w[1] > w[0] * (1.0 + 1e-9));
        Self { re, by_re }
    }

    /// The abscissa of run `i`.
    fn xpos(&self, i: usize) -> f64 {
        if self.by_re {
            self.re[i].unwrap()
        } else {
            (i + 1) as f64
        }
    }
}

/// The panel of one scalar: a point with a ±k·u bar per run that has it;
/// `None` when no run has it.
fn scalar_panel(
    name: &str,
    sel: &[&RunResult],
    scalars: &[Scalar],
    axis: &ConditionAxis,
    k: f64,
) -> Option<LinePanel> {
    let rows: Vec<&Scalar> = scalars.iter().filter(|s| s.name == name).collect();
    if rows.is_empty() {
        return None;
    }
    let curves = sel
        .iter()
        .enumerate()
        .filter_map(|(i, r)| {
            let s = rows.iter().find(|s| s.run == r.id)?;
            Some(Curve {
                label: r.id.clone(),
                xy: vec![(axis.xpos(i), s.value)],
                band: Some(vec![(
                    axis.xpos(i),
                    s.value - k * s.uncertainty,
                    s.value + k * s.uncertainty,
                )]),
                color: RUN_COLORS[i % RUN_COLORS.len()],
                markers: true,
            })
        })
        .collect();
    let title = match name {
        "peak vorticity" => "Peak vorticity",
        "circulation of the strongest vortex" => "Γ, strongest vortex (mean field)",
        "circulation of the strongest phase-mean vortex" => "Γ, strongest vortex (phase means)",
        _ => "Velocity deficit",
    };
    Some(LinePanel {
        title: title.to_string(),
        x_label: if axis.by_re {
            "Re".into()
        } else {
            "run".into()
        },
        y_label: format!("({})", rows[0].unit),
        curves,
        x_names: (!axis.by_re).then(|| sel.iter().map(|r| r.id.clone()).collect()),
    })
}
