//! The drawing layer: the embedded font, writing one figure as PNG and SVG,
//! and the two kinds of panel curlew draws (a field map with its colour bar,
//! and a line chart with optional bands).
//!
//! Owns: pixels and layout. Does not own: which figures a run gets (`figs`).
//!
//! Every figure is drawn by one generic function over the plotters backend,
//! so the PNG and the SVG are the same drawing. Maps keep an equal aspect
//! ratio: the plot area's pixel size is computed from the grid's extent.

use std::path::{Path, PathBuf};
use std::sync::Once;

use plotters::coord::types::RangedCoordf64;
use plotters::coord::Shift;
use plotters::prelude::*;
use plotters::style::FontStyle;

use super::colormap::{Colormap, NO_DATA};
pub(crate) use crate::describe::tick_in;
use crate::error::{Error, ErrorKind, Result};
use crate::field::Grid;

static FONT: &[u8] = include_bytes!("../../assets/fonts/DejaVuSans.ttf");
static REGISTER: Once = Once::new();

/// The font family every text uses (DejaVu Sans, embedded).
pub(crate) const FAMILY: &str = "sans-serif";
/// Text sizes in pixels (at the default 1000 px width).
pub(crate) const TITLE_PX: f64 = 26.0;
pub(crate) const LABEL_PX: f64 = 21.0;
pub(crate) const TICK_PX: f64 = 18.0;

/// Registers the embedded font under the family names plotters asks for,
/// so text renders on a machine without system fonts.
pub(crate) fn register_fonts() {
    REGISTER.call_once(|| {
        for fam in ["sans-serif", "serif", "monospace"] {
            for st in [
                FontStyle::Normal,
                FontStyle::Bold,
                FontStyle::Italic,
                FontStyle::Oblique,
            ] {
                // The font is a valid TTF shipped with the crate; a failure
                // here would be a packaging bug caught by every figure test.
                let _ = plotters::style::register_font(fam, st, FONT);
            }
        }
    });
}

pub(crate) type DrawResult<DB> =
    std::result::Result<(), DrawingAreaErrorKind<<DB as DrawingBackend>::ErrorType>>;

/// A figure: its pixel size and how to draw it on any backend.
pub(crate) trait Figure {
    fn size(&self) -> (u32, u32);
    fn draw<DB: DrawingBackend>(&self, root: &DrawingArea<DB, Shift>) -> DrawResult<DB>;
}

fn draw_error(path: &Path, e: impl std::fmt::Display) -> Error {
    Error::new(ErrorKind::Io, format!("drawing the figure failed: {e}")).with_path(path)
}

/// Writes `dir/<stem>.png` and `dir/<stem>.svg`, each through
/// `io::atomic_path`, so no half-written figure is left.
pub(crate) fn write_figure(
    fig: &impl Figure,
    dir: &Path,
    stem: &str,
) -> Result<(PathBuf, PathBuf)> {
    register_fonts();
    std::fs::create_dir_all(dir).map_err(|e| Error::io(dir, e))?;
    let png = dir.join(format!("{stem}.png"));
    let svg = dir.join(format!("{stem}.svg"));
    crate::io::atomic_path(&png, |tmp| {
        let root = BitMapBackend::new(tmp, fig.size()).into_drawing_area();
        root.fill(&WHITE).map_err(|e| draw_error(&png, e))?;
        fig.draw(&root).map_err(|e| draw_error(&png, e))?;
        root.present().map_err(|e| draw_error(&png, e))
    })?;
    let mut text = String::new();
    {
        let root = SVGBackend::with_string(&mut text, fig.size()).into_drawing_area();
        root.fill(&WHITE).map_err(|e| draw_error(&svg, e))?;
        fig.draw(&root).map_err(|e| draw_error(&svg, e))?;
        root.present().map_err(|e| draw_error(&svg, e))?;
    }
    crate::io::atomic_bytes(&svg, text.as_bytes())?;
    Ok((png, svg))
}

/// How coordinates are shown: divide metres by `scale`, label with `unit`.
#[derive(Debug, Clone)]
pub(crate) struct Axes {
    pub scale: f64,
    pub x_label: String,
    pub y_label: String,
}

/// One field map panel: values at the nodes of `grid` (node order j outer),
/// already in display units, drawn as cells with colour map `cmap` over
/// `range`.
pub(crate) struct MapPanel<'a> {
    pub title: String,
    pub grid: Grid,
    pub values: Vec<f64>,
    pub cmap: &'a Colormap,
    pub range: (f64, f64),
    /// (u, v, every): vectors drawn at every n-th node in each direction.
    pub vectors: Option<(&'a [f64], &'a [f64], usize)>,
    /// Nodes to draw faded toward white (e.g. not significant).
    pub faded: Option<Vec<bool>>,
    /// Masked nodes ("no flow here"): drawn neutral grey with an outline.
    pub mask: Option<Vec<bool>>,
    /// Nodes marked with a small dark ring (e.g. a significant residual).
    pub marks: Option<Vec<bool>>,
}

/// Pixel layout of a row/grid of maps sharing one colour bar.
pub(crate) struct MapLayout {
    pub panel_w: u32,
    pub panel_h: u32,
    pub cols: u32,
    pub rows: u32,
    pub left: u32,
    pub bottom: u32,
    pub top: u32,
    pub right: u32,
    pub bar_w: u32,
}

impl MapLayout {
    /// A layout of `n` panels of grid `g` in about `width` pixels, with the
    /// plot area's aspect equal to the grid's extent.
    pub(crate) fn new(g: &Grid, n: usize, cols: usize, width: u32) -> MapLayout {
        let cols = cols.clamp(1, n.max(1)) as u32;
        let rows = (n.max(1) as u32).div_ceil(cols);
        let (left, bottom, top, right, bar_w) = (112, 70, 56, 14, 200);
        let lx = g.nx as f64 * g.dx;
        let ly = g.ny as f64 * g.dy;
        let avail = (width.saturating_sub(bar_w) / cols)
            .saturating_sub(left + right)
            .max(120);
        let mut pw = avail as f64;
        let mut ph = pw * ly / lx;
        let max_h = if rows == 1 { 760.0 } else { 480.0 };
        if ph > max_h {
            ph = max_h;
            pw = ph * lx / ly;
        }
        if ph < 120.0 {
            ph = 120.0;
            pw = (ph * lx / ly).min(avail as f64 * 1.6);
        }
        MapLayout {
            panel_w: pw.round() as u32,
            panel_h: ph.round() as u32,
            cols,
            rows,
            left,
            bottom,
            top,
            right,
            bar_w,
        }
    }
    pub(crate) fn cell(&self) -> (u32, u32) {
        (
            self.left + self.panel_w + self.right,
            self.top + self.panel_h + self.bottom,
        )
    }
    pub(crate) fn size(&self, header: u32) -> (u32, u32) {
        let (cw, ch) = self.cell();
        (cw * self.cols + self.bar_w, ch * self.rows + header)
    }
}

/// Masked nodes: a neutral grey, darker than `NO_DATA` so the two differ.
pub(crate) const MASK_GREY: RGBColor = RGBColor(150, 150, 150);
/// The outline of a masked region.
pub(crate) const MASK_EDGE: RGBColor = RGBColor(60, 60, 60);

/// The outline of the masked cells of `g` (node order), in plot units
/// (metres / `s`): every cell edge between a masked node and an unmasked
/// node or the domain's border, as one segment each.
pub(crate) fn mask_outline(g: &Grid, m: &[bool], s: f64) -> Vec<Vec<(f64, f64)>> {
    let at = |i: isize, j: isize| {
        i >= 0
            && j >= 0
            && (i as usize) < g.nx
            && (j as usize) < g.ny
            && m[j as usize * g.nx + i as usize]
    };
    let (hx, hy) = (0.5 * g.dx / s, 0.5 * g.dy / s);
    let mut segs = Vec::new();
    for j in 0..g.ny as isize {
        for i in 0..g.nx as isize {
            if !at(i, j) {
                continue;
            }
            let (x, y) = (g.x(i as usize) / s, g.y(j as usize) / s);
            let (l, r, b, t) = (x - hx, x + hx, y - hy, y + hy);
            if !at(i - 1, j) {
                segs.push(vec![(l, b), (l, t)]);
            }
            if !at(i + 1, j) {
                segs.push(vec![(r, b), (r, t)]);
            }
            if !at(i, j - 1) {
                segs.push(vec![(l, b), (r, b)]);
            }
            if !at(i, j + 1) {
                segs.push(vec![(l, t), (r, t)]);
            }
        }
    }
    segs
}

fn blend_white(c: RGBColor, keep: f64) -> RGBColor {
    let f = |x: u8| (255.0 - (255.0 - x as f64) * keep).round() as u8;
    RGBColor(f(c.0), f(c.1), f(c.2))
}

/// Draws one map panel into `area` (of size `layout.cell()`).
pub(crate) fn draw_map<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    p: &MapPanel,
    axes: &Axes,
    layout: &MapLayout,
) -> DrawResult<DB> {
    draw_map_over(area, p, axes, layout, None)
}

/// Lines and points drawn over a map, in metres (e.g. vortex tracks).
pub(crate) struct Overlay {
    /// Polylines with their colour.
    pub lines: Vec<(Vec<(f64, f64)>, RGBColor)>,
    /// Ringed points with their colour.
    pub points: Vec<((f64, f64), RGBColor)>,
}

/// The chart of one map panel: plot coordinates are metres / `axes.scale`.
pub(crate) type MapChart<'a, DB> =
    ChartContext<'a, DB, Cartesian2d<RangedCoordf64, RangedCoordf64>>;

/// `draw_map` with an optional overlay drawn last (with a pale halo).
pub(crate) fn draw_map_over<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    p: &MapPanel,
    axes: &Axes,
    layout: &MapLayout,
    over: Option<&Overlay>,
) -> DrawResult<DB> {
    let g = p.grid;
    let s = axes.scale;
    let mut chart = map_chart(area, p, axes, layout)?;
    draw_cells(&mut chart, p, s)?;
    if let Some(m) = &p.mask {
        chart.draw_series(
            mask_outline(&g, m, s)
                .into_iter()
                .map(|seg| PathElement::new(seg, MASK_EDGE.stroke_width(2))),
        )?;
    }
    if let Some(m) = &p.marks {
        draw_marks(&mut chart, &g, m, s, layout)?;
    }
    if let Some((u, v, every)) = p.vectors {
        if let Some(arrows) = arrow_paths(&g, s, u, v, every) {
            draw_arrows(&mut chart, arrows)?;
        }
    }
    if let Some(o) = over {
        draw_overlay(&mut chart, o, s)?;
    }
    Ok(())
}

/// The panel's chart with its title, axes, labels and ticks, over the
/// grid's extent (cell edges, not nodes).
fn map_chart<'a, DB: DrawingBackend>(
    area: &'a DrawingArea<DB, Shift>,
    p: &MapPanel,
    axes: &Axes,
    layout: &MapLayout,
) -> std::result::Result<MapChart<'a, DB>, DrawingAreaErrorKind<DB::ErrorType>> {
    let g = p.grid;
    let s = axes.scale;
    let xr = (g.x0 - 0.5 * g.dx) / s..(g.x(g.nx - 1) + 0.5 * g.dx) / s;
    let yr = (g.y0 - 0.5 * g.dy) / s..(g.y(g.ny - 1) + 0.5 * g.dy) / s;
    let (sx, sy) = (xr.end - xr.start, yr.end - yr.start);
    let mut chart = ChartBuilder::on(area)
        .caption(&p.title, (FAMILY, LABEL_PX + 1.0))
        .margin_right(layout.right)
        .margin_left(14)
        .margin_top(6)
        .x_label_area_size(layout.bottom - 6)
        .y_label_area_size(layout.left - 14)
        .build_cartesian_2d(xr, yr)?;
    chart
        .configure_mesh()
        .disable_mesh()
        .x_desc(&axes.x_label)
        .y_desc(&axes.y_label)
        .x_label_formatter(&|v| tick_in(*v, sx))
        .y_label_formatter(&|v| tick_in(*v, sy))
        .label_style((FAMILY, TICK_PX))
        .axis_desc_style((FAMILY, LABEL_PX))
        .x_labels(6)
        .y_labels(6)
        .draw()?;
    Ok(chart)
}

/// One filled cell per node in its colour: faded toward white where asked,
/// grey where masked.
fn draw_cells<DB: DrawingBackend>(
    chart: &mut MapChart<DB>,
    p: &MapPanel,
    s: f64,
) -> DrawResult<DB> {
    let g = p.grid;
    let (lo, hi) = p.range;
    chart.draw_series(
        (0..g.ny)
            .flat_map(|j| (0..g.nx).map(move |i| (j, i)))
            .map(|(j, i)| {
                let k = j * g.nx + i;
                let mut c = p.cmap.map(p.values[k], lo, hi);
                if p.faded.as_ref().is_some_and(|f| f[k]) && c != NO_DATA {
                    c = blend_white(c, 0.22);
                }
                if p.mask.as_ref().is_some_and(|m| m[k]) {
                    c = MASK_GREY;
                }
                let (x, y) = (g.x(i) / s, g.y(j) / s);
                let (hx, hy) = (0.5 * g.dx / s * 1.02, 0.5 * g.dy / s * 1.02);
                Rectangle::new([(x - hx, y - hy), (x + hx, y + hy)], c.filled())
            }),
    )?;
    Ok(())
}

/// A small dark ring at every marked node.
fn draw_marks<DB: DrawingBackend>(
    chart: &mut MapChart<DB>,
    g: &Grid,
    m: &[bool],
    s: f64,
    layout: &MapLayout,
) -> DrawResult<DB> {
    let r = (0.3 * layout.panel_w as f64 / g.nx as f64).clamp(1.5, 6.0) as u32;
    let ink = RGBColor(20, 20, 24);
    chart.draw_series((0..g.len()).filter(|&k| m[k]).map(|k| {
        Circle::new(
            (g.x(k % g.nx) / s, g.y(k / g.nx) / s),
            r,
            ink.stroke_width(1),
        )
    }))?;
    Ok(())
}

/// The arrows of the velocity (`u`, `v`) at every `every`-th node, shaft and
/// two head strokes each, in plot units; the largest speed spans 0.9 of
/// `every` pitches. `None` when no speed is positive.
fn arrow_paths(
    g: &Grid,
    s: f64,
    u: &[f64],
    v: &[f64],
    every: usize,
) -> Option<Vec<Vec<(f64, f64)>>> {
    let every = every.max(1);
    let smax = u
        .iter()
        .zip(v)
        .map(|(a, b)| a.hypot(*b))
        .filter(|x| x.is_finite())
        .fold(0.0, f64::max);
    if smax <= 0.0 {
        return None;
    }
    let len = 0.9 * every as f64 * g.dx.min(g.dy) / s / smax;
    let mut arrows = Vec::new();
    for j in (every / 2..g.ny).step_by(every) {
        for i in (every / 2..g.nx).step_by(every) {
            let k = j * g.nx + i;
            let (a, b) = (u[k], v[k]);
            if !(a.is_finite() && b.is_finite()) {
                continue;
            }
            let (x, y) = (g.x(i) / s, g.y(j) / s);
            let (ex, ey) = (x + len * a, y + len * b);
            arrows.push(vec![(x, y), (ex, ey)]);
            let (l, ang) = ((len * a).hypot(len * b), b.atan2(a));
            if l > 0.0 {
                let h = 0.3 * l;
                for d in [2.7_f64, -2.7] {
                    arrows.push(vec![
                        (ex, ey),
                        (ex + h * (ang + d).cos(), ey + h * (ang + d).sin()),
                    ]);
                }
            }
        }
    }
    Some(arrows)
}

/// Draws the arrow strokes dark over a pale halo.
fn draw_arrows<DB: DrawingBackend>(
    chart: &mut MapChart<DB>,
    arrows: Vec<Vec<(f64, f64)>>,
) -> DrawResult<DB> {
    let ink = RGBColor(25, 25, 30);
    // A pale halo keeps the arrows readable on dark and light cells.
    chart.draw_series(
        arrows
            .iter()
            .map(|pts| PathElement::new(pts.clone(), WHITE.mix(0.55).stroke_width(3))),
    )?;
    chart.draw_series(
        arrows
            .into_iter()
            .map(|pts| PathElement::new(pts, ink.stroke_width(1))),
    )?;
    Ok(())
}

/// Draws an overlay's lines (each over a pale halo), then its ringed points.
fn draw_overlay<DB: DrawingBackend>(
    chart: &mut MapChart<DB>,
    o: &Overlay,
    s: f64,
) -> DrawResult<DB> {
    let sc = |pts: &[(f64, f64)]| pts.iter().map(|q| (q.0 / s, q.1 / s)).collect::<Vec<_>>();
    for (pts, c) in &o.lines {
        chart.draw_series([PathElement::new(sc(pts), WHITE.mix(0.7).stroke_width(5))])?;
        chart.draw_series([PathElement::new(sc(pts), c.stroke_width(2))])?;
    }
    chart.draw_series(
        o.points
            .iter()
            .map(|(q, c)| Circle::new((q.0 / s, q.1 / s), 4, c.stroke_width(2))),
    )?;
    Ok(())
}

/// Draws a vertical colour bar for `cmap` over `range` labelled `label`.
pub(crate) fn draw_colorbar<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    cmap: &Colormap,
    range: (f64, f64),
    label: &str,
    top: u32,
    bottom: u32,
) -> DrawResult<DB> {
    let (lo, hi) = if range.1 > range.0 {
        range
    } else {
        (range.0 - 1.0, range.0 + 1.0)
    };
    let mut chart = ChartBuilder::on(area)
        .margin_top(top)
        .margin_bottom(bottom)
        .margin_left(24)
        .margin_right(16)
        .set_label_area_size(LabelAreaPosition::Right, 130)
        .build_cartesian_2d(0.0..1.0, lo..hi)?;
    chart
        .configure_mesh()
        .disable_mesh()
        .disable_x_axis()
        .y_desc(label)
        .set_all_tick_mark_size(6)
        .y_label_formatter(&|v| tick_in(*v, hi - lo))
        .label_style((FAMILY, TICK_PX))
        .axis_desc_style((FAMILY, LABEL_PX))
        .y_labels(7)
        .draw()?;
    let n = 128;
    chart.draw_series((0..n).map(|k| {
        let a = lo + (hi - lo) * k as f64 / n as f64;
        let b = lo + (hi - lo) * (k + 1) as f64 / n as f64;
        let c = cmap.at((k as f64 + 0.5) / n as f64);
        Rectangle::new([(0.0, a), (1.0, b)], c.filled())
    }))?;
    chart.draw_series(std::iter::once(Rectangle::new(
        [(0.0, lo), (1.0, hi)],
        BLACK.stroke_width(1),
    )))?;
    Ok(())
}

/// A figure of one or more map panels sharing one colour bar.
pub(crate) struct MapFigure<'a> {
    pub heading: Option<String>,
    pub panels: Vec<MapPanel<'a>>,
    pub axes: Axes,
    pub bar_label: String,
    pub layout: MapLayout,
}

impl<'a> MapFigure<'a> {
    pub(crate) fn new(
        heading: Option<String>,
        panels: Vec<MapPanel<'a>>,
        axes: Axes,
        bar_label: String,
        cols: usize,
        width: u32,
    ) -> Self {
        let layout = MapLayout::new(&panels[0].grid, panels.len(), cols, width);
        MapFigure {
            heading,
            panels,
            axes,
            bar_label,
            layout,
        }
    }
    fn header(&self) -> u32 {
        if self.heading.is_some() {
            44
        } else {
            0
        }
    }
}

impl Figure for MapFigure<'_> {
    fn size(&self) -> (u32, u32) {
        self.layout.size(self.header())
    }
    fn draw<DB: DrawingBackend>(&self, root: &DrawingArea<DB, Shift>) -> DrawResult<DB> {
        let (w, _) = self.size();
        let mut body = root.clone();
        if let Some(h) = &self.heading {
            let (head, rest) = root.split_vertically(self.header());
            head.draw_text(
                h,
                &(FAMILY, TITLE_PX).into_text_style(&head),
                (self.layout.left as i32, 10),
            )?;
            body = rest;
        }
        let (maps, bar) = body.split_horizontally(w - self.layout.bar_w);
        let (cw, ch) = self.layout.cell();
        for (n, p) in self.panels.iter().enumerate() {
            let (r, c) = (n as u32 / self.layout.cols, n as u32 % self.layout.cols);
            let cell = maps.clone().shrink((c * cw, r * ch), (cw, ch));
            draw_map(&cell, p, &self.axes, &self.layout)?;
        }
        let p0 = &self.panels[0];
        let bar_h = ch * self.layout.rows;
        let bar_area = bar.clone().shrink((0, 0), (self.layout.bar_w, bar_h));
        draw_colorbar(
            &bar_area,
            p0.cmap,
            p0.range,
            &self.bar_label,
            34,
            self.layout.bottom,
        )
    }
}

pub(crate) use super::lines::{Curve, LineFigure, LinePanel, RUN_COLORS};
