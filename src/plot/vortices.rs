//! The vortex figures: the tracks over the mean vorticity, and the
//! circulation and core radius along each track with uncertainty bands.
//!
//! Owns: which vortex figures a run gets. Does not own: pixels
//! (`draw`, `lines`) or the numbers (`vortex`).
//!
//! Tracks are drawn as lines through the cores' centroids, anticlockwise
//! ones (positive vorticity) dark red, clockwise ones dark blue, over the
//! mean vorticity on the diverging map with symmetric limits; the mean
//! field's own cores are ringed in black. The line charts show the six
//! longest tracks (3 points or more) against time when the run has a
//! frequency, against phase otherwise; bands are ±1 standard uncertainty.
//! The radius is the Lamb-Oseen fit's `rc` where the fit succeeded.

use std::path::Path;

use plotters::coord::Shift;
use plotters::prelude::*;

use crate::error::Result;
use crate::plot::colormap::TIDE;
use crate::plot::draw::{
    draw_colorbar, draw_map_over, write_figure, Curve, DrawResult, Figure, LineFigure, LinePanel,
    MapLayout, MapPanel, Overlay, RUN_COLORS,
};
use crate::plot::{figure_ref, quantile, Params, Units};
use crate::result::{FigureRef, RunResult};
use crate::vortex::budget::CoreBudget;
use crate::vortex::{Core, SliceKind, Track, Vortices};

/// One map with an overlay and its colour bar.
struct TrackMap<'a> {
    panel: MapPanel<'a>,
    over: Overlay,
    axes: crate::plot::draw::Axes,
    bar: String,
    layout: MapLayout,
}

impl Figure for TrackMap<'_> {
    fn size(&self) -> (u32, u32) {
        self.layout.size(0)
    }
    fn draw<DB: DrawingBackend>(&self, root: &DrawingArea<DB, Shift>) -> DrawResult<DB> {
        let (w, _) = self.size();
        let (maps, bar) = root.split_horizontally(w - self.layout.bar_w);
        let (cw, ch) = self.layout.cell();
        let cell = maps.clone().shrink((0, 0), (cw, ch));
        draw_map_over(
            &cell,
            &self.panel,
            &self.axes,
            &self.layout,
            Some(&self.over),
        )?;
        let bar_area = bar.clone().shrink((0, 0), (self.layout.bar_w, ch));
        draw_colorbar(
            &bar_area,
            self.panel.cmap,
            self.panel.range,
            &self.bar,
            34,
            self.layout.bottom,
        )
    }
}

const POSITIVE: RGBColor = RGBColor(150, 20, 30);
const NEGATIVE: RGBColor = RGBColor(20, 40, 140);

/// Writes the vortex figures of `run` into `out/<run id>/figures/`.
pub(crate) fn draw(p: &Params, run: &RunResult, out: &Path) -> Result<Vec<FigureRef>> {
    let Some(v) = &run.vortices else {
        return Ok(Vec::new());
    };
    let dir = out.join(&run.id).join("figures");
    let mut figs = Vec::new();
    let units = Units::new(p, run);
    if let Some(fig) = track_map(p, run, v, units) {
        let paths = write_figure(&fig, &dir, "vortex-tracks")?;
        let cap = format!(
            "Vortex tracks over the mean vorticity: lines join each core's vorticity-weighted centroid from slice to slice (phase bin, or frame of a time-resolved run; red anticlockwise, blue clockwise); rings mark the cores of the mean field. Cores are regions of {} (Graftieaux et al. 2001; Zhou et al. 1999 for the swirling strength).",
            v.params.rule()
        );
        figs.push(figure_ref(out, paths, "Vortex tracks", cap));
    }
    if let Some(fig) = along_tracks(p, v) {
        let paths = write_figure(&fig, &dir, "vortex-circulation")?;
        let cap = format!("Circulation of each core's region and its Lamb-Oseen core radius along the longest tracks (across frames when the run's frames were tracked, else across phase bins); bands are ±1 standard uncertainty (the circulation's carries the neighbour correlation of the vorticity errors). The region's circulation is that inside {}: for |Gamma2| > 2/pi about 70 % of a Lamb-Oseen vortex's total.", v.params.rule());
        figs.push(figure_ref(
            out,
            paths,
            "Circulation and radius along the tracks",
            cap,
        ));
    }
    if let Some(fig) = budget_along_tracks(p, v) {
        let paths = write_figure(&fig, &dir, "vortex-budget")?;
        let cap = "The circulation budget along the longest track of each sign: the terms of dΓ/dt integrated over the core's region (|Gamma2| > 2/pi) in each phase bin, with ±1 standard uncertainty bands; points mark the residual (unsteady + advection - stretching - diffusion - turbulent), which holds what a plane cannot see and the measurement error (docs/vortices.md).".to_string();
        figs.push(figure_ref(
            out,
            paths,
            "Circulation budget along the tracks",
            cap,
        ));
    }
    Ok(figs)
}

fn track_map<'a>(
    p: &Params,
    run: &'a RunResult,
    v: &Vortices,
    units: Units,
) -> Option<TrackMap<'a>> {
    let e = &run.stats.ensemble;
    let (wf, wu) = units.vorticity();
    let vals: Vec<f64> = e.get("omega_mean")?.iter().map(|w| w * wf).collect();
    let lim = p.vorticity_limit.map(|l| l * wf).unwrap_or_else(|| {
        quantile(vals.iter().map(|x| x.abs()), 0.99)
            .filter(|l| *l > 0.0)
            .unwrap_or(1.0)
    });
    let colour = |s: i8| if s > 0 { POSITIVE } else { NEGATIVE };
    let lines = v
        .tracks
        .iter()
        .map(|t| {
            let pts = t
                .points
                .iter()
                .map(|q| {
                    let c = &v.slices[q.slice].cores[q.core];
                    (c.x, c.y)
                })
                .collect();
            (pts, colour(t.sign))
        })
        .collect();
    let points = v
        .slices
        .iter()
        .filter(|s| s.kind == SliceKind::Mean)
        .flat_map(|s| s.cores.iter().map(|c| ((c.x, c.y), BLACK)))
        .collect();
    let panel = MapPanel {
        title: "Vortex tracks over the mean vorticity".into(),
        grid: e.grid,
        values: vals,
        cmap: &TIDE,
        range: (-lim, lim),
        vectors: None,
        faded: None,
        marks: None,
        mask: run.mask.clone(),
    };
    let layout = MapLayout::new(&e.grid, 1, 1, p.width);
    Some(TrackMap {
        panel,
        over: Overlay { lines, points },
        axes: units.axes(),
        bar: format!("ω {wu}"),
        layout,
    })
}

fn along_tracks(p: &Params, v: &Vortices) -> Option<LineFigure> {
    // one family: the frames' tracks when there are long ones, else the bins'
    let of_frames = |t: &Track| matches!(v.slices[t.points[0].slice].kind, SliceKind::Frame { .. });
    let frames = v.tracks.iter().any(|t| t.points.len() >= 3 && of_frames(t));
    let mut long: Vec<&Track> = v
        .tracks
        .iter()
        .filter(|t| t.points.len() >= 3 && of_frames(t) == frames)
        .collect();
    if long.is_empty() {
        return None;
    }
    long.sort_by_key(|t| std::cmp::Reverse(t.points.len()));
    long.truncate(6);
    let timed = long
        .iter()
        .all(|t| t.points.iter().all(|q| q.time_s.is_finite()));
    let x_of = |t: &Track, k: usize| track_x(v, t, k, timed);
    let curve = |t: &Track, n: usize, f: &dyn Fn(&Core) -> (f64, f64)| {
        let pts: Vec<(f64, f64, f64)> = (0..t.points.len())
            .map(|k| {
                let q = t.points[k];
                let (val, unc) = f(&v.slices[q.slice].cores[q.core]);
                (x_of(t, k), val, unc)
            })
            .collect();
        Curve {
            label: format!("track {} ({})", t.id, if t.sign > 0 { "+" } else { "−" }),
            xy: pts.iter().map(|q| (q.0, q.1)).collect(),
            band: Some(pts.iter().map(|q| (q.0, q.1 - q.2, q.1 + q.2)).collect()),
            color: RUN_COLORS[n % RUN_COLORS.len()],
            markers: false,
        }
    };
    let x_label = if timed { "t (s)" } else { "phase (deg)" }.to_string();
    let circ = LinePanel {
        title: "Circulation of the core".into(),
        x_label: x_label.clone(),
        y_label: "Γ (m²/s)".into(),
        curves: long
            .iter()
            .enumerate()
            .map(|(n, t)| curve(t, n, &|c| (c.circulation, c.circulation_unc)))
            .collect(),
        x_names: None,
    };
    let rad = LinePanel {
        title: "Lamb-Oseen core radius".into(),
        x_label,
        y_label: "rc (mm)".into(),
        curves: long
            .iter()
            .enumerate()
            .map(|(n, t)| {
                curve(t, n, &|c| {
                    c.fit
                        .map_or((f64::NAN, f64::NAN), |f| (f.rc * 1e3, f.rc_unc * 1e3))
                })
            })
            .collect(),
        x_names: None,
    };
    Some(LineFigure {
        heading: None,
        panels: vec![circ, rad],
        width: p.width,
        height: p.width * 9 / 20,
    })
}

/// The abscissa of point `k` of `t`: its time, or its bin's phase unwrapped
/// over the cycles (bins in order, each wrap adds 360 degrees).
fn track_x(v: &Vortices, t: &Track, k: usize, timed: bool) -> f64 {
    let q = t.points[k];
    if timed {
        return q.time_s;
    }
    let deg = match v.slices[q.slice].kind {
        SliceKind::Bin { phase_deg, .. } => phase_deg,
        _ => f64::NAN,
    };
    let wraps = t.points[..=k]
        .windows(2)
        .filter(|w| w[1].slice < w[0].slice)
        .count();
    deg + 360.0 * wraps as f64
}

/// The circulation budget along the longest track of each sign: per track
/// point, the budget row of the same slice whose centroid is nearest the
/// core's (within two grid pitches; the budget finds its cores on the same
/// phase-mean fields), each integrated term and the residual with ±1
/// standard uncertainty bands. None without a budget or a track of 3 or
/// more points that meets budget rows.
fn budget_along_tracks(p: &Params, v: &Vortices) -> Option<LineFigure> {
    if v.budget.is_empty() {
        return None;
    }
    let timed = v
        .tracks
        .iter()
        .all(|t| t.points.iter().all(|q| q.time_s.is_finite()));
    let mut panels = Vec::new();
    for sign in [1i8, -1] {
        let Some(t) = v
            .tracks
            .iter()
            .filter(|t| t.sign == sign && t.points.len() >= 3)
            .max_by_key(|t| t.points.len())
        else {
            continue;
        };
        let rows = budget_rows_along(v, t, timed);
        if rows.len() < 3 {
            continue;
        }
        panels.push(LinePanel {
            title: format!(
                "Track {} ({}): integrated terms",
                t.id,
                if sign > 0 { "+" } else { "−" }
            ),
            x_label: if timed { "t (s)" } else { "phase (deg)" }.to_string(),
            y_label: "dΓ/dt terms (m²/s²)".into(),
            curves: budget_curves(&rows),
            x_names: None,
        });
    }
    if panels.is_empty() {
        return None;
    }
    Some(LineFigure {
        heading: None,
        panels,
        width: p.width,
        height: p.width * 9 / 20,
    })
}

/// Per point of track `t` that meets a budget row: its abscissa (time or
/// phase) and the row of the same slice and sign whose centroid is
/// nearest the core's, within two grid pitches.
fn budget_rows_along<'v>(v: &'v Vortices, t: &Track, timed: bool) -> Vec<(f64, &'v CoreBudget)> {
    let reach = 2.0 * v.grid.dx.max(v.grid.dy);
    let sign = t.sign;
    (0..t.points.len())
        .filter_map(|k| {
            let q = t.points[k];
            let sl = &v.slices[q.slice];
            let c = &sl.cores[q.core];
            v.budget
                .iter()
                .filter(|b| b.kind == sl.kind && b.sign == sign)
                .map(|b| (b, (b.x - c.x).hypot(b.y - c.y)))
                .filter(|(_, d)| *d <= reach)
                .min_by(|a, b| a.1.total_cmp(&b.1))
                .map(|(b, _)| (track_x(v, t, k, timed), b))
        })
        .collect()
}

/// One curve per integrated budget term with its ±1 u band, and the
/// residual as points with error bars.
fn budget_curves(rows: &[(f64, &CoreBudget)]) -> Vec<Curve> {
    let names = crate::budget::terms::TERMS;
    let mut curves: Vec<Curve> = names
        .iter()
        .enumerate()
        .map(|(j, name)| Curve {
            label: (*name).to_string(),
            xy: rows.iter().map(|(x, b)| (*x, b.value[j])).collect(),
            band: Some(
                rows.iter()
                    .map(|(x, b)| (*x, b.value[j] - b.unc[j], b.value[j] + b.unc[j]))
                    .collect(),
            ),
            color: RUN_COLORS[j % RUN_COLORS.len()],
            markers: false,
        })
        .collect();
    curves.push(Curve {
        label: "residual".into(),
        xy: rows.iter().map(|(x, b)| (*x, b.residual)).collect(),
        band: Some(
            rows.iter()
                .map(|(x, b)| (*x, b.residual - b.residual_unc, b.residual + b.residual_unc))
                .collect(),
        ),
        color: BLACK,
        markers: true,
    });
    curves
}
