//! Line charts: curves with shaded bands or points with error bars, a
//! legend in the emptiest corner, several panels side by side.

use plotters::coord::types::RangedCoordf64;
use plotters::coord::Shift;
use plotters::prelude::*;

use super::draw::{tick_in, DrawResult, Figure, FAMILY, LABEL_PX, TICK_PX, TITLE_PX};

/// One curve of a line chart, with an optional band (lower, upper).
pub(crate) struct Curve {
    pub label: String,
    pub xy: Vec<(f64, f64)>,
    pub band: Option<Vec<(f64, f64, f64)>>,
    pub color: RGBColor,
    /// Points with error bars (the band's lower and upper ends) instead of
    /// a line with a shaded band.
    pub markers: bool,
}

/// A line chart panel.
pub(crate) struct LinePanel {
    pub title: String,
    pub x_label: String,
    pub y_label: String,
    pub curves: Vec<Curve>,
    /// Categorical x axis: names of the positions 1, 2, … (ticks elsewhere
    /// are left blank).
    pub x_names: Option<Vec<String>>,
}

/// A figure of line panels side by side.
pub(crate) struct LineFigure {
    pub heading: Option<String>,
    pub panels: Vec<LinePanel>,
    pub width: u32,
    pub height: u32,
}

/// Categorical colours for runs (distinct in lightness and hue; our own).
pub(crate) const RUN_COLORS: [RGBColor; 6] = [
    RGBColor(31, 92, 153),
    RGBColor(196, 78, 34),
    RGBColor(46, 139, 87),
    RGBColor(120, 60, 150),
    RGBColor(160, 130, 20),
    RGBColor(90, 90, 90),
];

/// The finite extent of `vals` padded by 5 % (a constant one padded by
/// 5 % of its value, or 1 at zero); `None` when nothing is finite.
fn finite_range(vals: impl Iterator<Item = f64>) -> Option<(f64, f64)> {
    let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
    for v in vals.filter(|v| v.is_finite()) {
        lo = lo.min(v);
        hi = hi.max(v);
    }
    if lo > hi {
        return None;
    }
    if hi - lo <= 1e-12 * hi.abs().max(1e-300) {
        let pad = if hi == 0.0 { 1.0 } else { 0.05 * hi.abs() };
        return Some((lo - pad, hi + pad));
    }
    let pad = 0.05 * (hi - lo);
    Some((lo - pad, hi + pad))
}

/// The chart of one line panel.
type LineChart<'a, DB> = ChartContext<'a, DB, Cartesian2d<RangedCoordf64, RangedCoordf64>>;

/// Draws one line panel: axes, bands, curves or points, then the legend.
fn draw_lines<DB: DrawingBackend>(area: &DrawingArea<DB, Shift>, p: &LinePanel) -> DrawResult<DB> {
    let ((x0, x1), (y0, y1)) = panel_ranges(p);
    let mut chart = line_chart(area, p, (x0, x1), (y0, y1))?;
    for c in &p.curves {
        if c.markers {
            draw_points(&mut chart, c)?;
            continue;
        }
        if let Some(b) = &c.band {
            draw_band(&mut chart, b, c.color, (y0, y1))?;
        }
        draw_curve(&mut chart, c)?;
    }
    if p.curves.iter().filter(|c| !c.label.is_empty()).count() > 0 {
        chart
            .configure_series_labels()
            .label_font((FAMILY, TICK_PX))
            .background_style(WHITE.mix(0.85))
            .border_style(RGBColor(160, 160, 160))
            .position(legend_corner(p, (x0, x1), (y0, y1)))
            .draw()?;
    }
    Ok(())
}

/// The x and y ranges of a panel: its finite values and bands, padded by
/// 5 %, with room for markers and a legend when it draws points.
fn panel_ranges(p: &LinePanel) -> ((f64, f64), (f64, f64)) {
    let xs = p.curves.iter().flat_map(|c| c.xy.iter().map(|q| q.0));
    let (x0, x1) = finite_range(xs).unwrap_or((0.0, 1.0));
    let ys = p.curves.iter().flat_map(|c| {
        c.xy.iter().map(|q| q.1).chain(
            c.band
                .iter()
                .flat_map(|b| b.iter().flat_map(|q| [q.1, q.2])),
        )
    });
    let (mut y0, mut y1) = finite_range(ys).unwrap_or((0.0, 1.0));
    let (mut x0, mut x1) = (x0, x1);
    if p.curves.iter().any(|c| c.markers) {
        // Room for the markers at the ends and for the legend on top.
        let (wx, wy) = (x1 - x0, y1 - y0);
        x0 -= 0.12 * wx;
        x1 += 0.12 * wx;
        y1 += 0.3 * wy;
        y0 -= 0.05 * wy;
    }
    ((x0, x1), (y0, y1))
}

/// The panel's chart with its title, light grid, labels and ticks (the
/// run names on a categorical x axis).
fn line_chart<'a, DB: DrawingBackend>(
    area: &'a DrawingArea<DB, Shift>,
    p: &LinePanel,
    (x0, x1): (f64, f64),
    (y0, y1): (f64, f64),
) -> std::result::Result<LineChart<'a, DB>, DrawingAreaErrorKind<DB::ErrorType>> {
    let mut builder = ChartBuilder::on(area);
    builder
        .caption(&p.title, (FAMILY, LABEL_PX + 1.0))
        .margin(14)
        .x_label_area_size(62)
        .y_label_area_size(100);
    let mut chart = builder.build_cartesian_2d(x0..x1, y0..y1)?;
    chart
        .configure_mesh()
        .light_line_style(RGBColor(235, 235, 235))
        .bold_line_style(RGBColor(215, 215, 215))
        .x_desc(&p.x_label)
        .y_desc(&p.y_label)
        .x_label_formatter(&|v| match &p.x_names {
            Some(names) => {
                let k = v.round();
                if (v - k).abs() < 1e-6 && k >= 1.0 && (k as usize) <= names.len() {
                    names[k as usize - 1].clone()
                } else {
                    String::new()
                }
            }
            None => tick_in(*v, x1 - x0),
        })
        .y_label_formatter(&|v| tick_in(*v, y1 - y0))
        .label_style((FAMILY, TICK_PX))
        .axis_desc_style((FAMILY, LABEL_PX))
        .x_labels(6)
        .y_labels(6)
        .draw()?;
    Ok(chart)
}

/// A markers curve: error bars from its band, then filled points, with a
/// legend entry when labelled.
fn draw_points<DB: DrawingBackend>(chart: &mut LineChart<DB>, c: &Curve) -> DrawResult<DB> {
    let color = c.color;
    if let Some(b) = &c.band {
        chart.draw_series(
            b.iter()
                .filter(|q| q.1.is_finite() && q.2.is_finite())
                .map(|q| PathElement::new(vec![(q.0, q.1), (q.0, q.2)], color.stroke_width(2))),
        )?;
    }
    let s = chart.draw_series(
        c.xy.iter()
            .filter(|q| q.0.is_finite() && q.1.is_finite())
            .map(|q| Circle::new(*q, 6, color.filled())),
    )?;
    if !c.label.is_empty() {
        s.label(c.label.clone())
            .legend(move |(x, y)| Circle::new((x + 12, y), 6, color.filled()));
    }
    Ok(())
}

/// A shaded band between its lower and upper ends, clipped to `y0..y1`.
fn draw_band<DB: DrawingBackend>(
    chart: &mut LineChart<DB>,
    b: &[(f64, f64, f64)],
    color: RGBColor,
    (y0, y1): (f64, f64),
) -> DrawResult<DB> {
    let mut poly: Vec<(f64, f64)> = b
        .iter()
        .filter(|q| q.1.is_finite() && q.2.is_finite())
        .map(|q| (q.0, q.2.min(y1).max(y0)))
        .collect();
    let lower: Vec<(f64, f64)> = b
        .iter()
        .rev()
        .filter(|q| q.1.is_finite() && q.2.is_finite())
        .map(|q| (q.0, q.1.min(y1).max(y0)))
        .collect();
    poly.extend(lower);
    if poly.len() >= 3 {
        chart.draw_series(std::iter::once(Polygon::new(poly, color.mix(0.2).filled())))?;
    }
    Ok(())
}

/// A line curve, broken at missing values, with one legend entry when
/// labelled.
fn draw_curve<DB: DrawingBackend>(chart: &mut LineChart<DB>, c: &Curve) -> DrawResult<DB> {
    // Break the line at missing values.
    let mut seg: Vec<(f64, f64)> = Vec::new();
    let mut segs = Vec::new();
    for &q in &c.xy {
        if q.0.is_finite() && q.1.is_finite() {
            seg.push(q);
        } else if !seg.is_empty() {
            segs.push(std::mem::take(&mut seg));
        }
    }
    if !seg.is_empty() {
        segs.push(seg);
    }
    let color = c.color;
    let mut first = true;
    for s in segs {
        let series = chart.draw_series(LineSeries::new(s, color.stroke_width(3)))?;
        if first && !c.label.is_empty() {
            series.label(c.label.clone()).legend(move |(x, y)| {
                PathElement::new(vec![(x, y), (x + 24, y)], color.stroke_width(3))
            });
            first = false;
        }
    }
    Ok(())
}

/// The corner of the plot whose box (the outer 35 % × 30 %) holds the
/// fewest data points, for the legend.
fn legend_corner(p: &LinePanel, (x0, x1): (f64, f64), (y0, y1): (f64, f64)) -> SeriesLabelPosition {
    let pts: Vec<(f64, f64)> = p
        .curves
        .iter()
        .flat_map(|c| {
            c.xy.iter().copied().chain(
                c.band
                    .iter()
                    .flat_map(|b| b.iter().flat_map(|q| [(q.0, q.1), (q.0, q.2)])),
            )
        })
        .filter(|q| q.0.is_finite() && q.1.is_finite())
        .map(|(x, y)| ((x - x0) / (x1 - x0), (y - y0) / (y1 - y0)))
        .collect();
    let count = |right: bool, upper: bool| {
        pts.iter()
            .filter(|(u, v)| {
                (if right { *u > 0.65 } else { *u < 0.35 })
                    && (if upper { *v > 0.7 } else { *v < 0.3 })
            })
            .count()
    };
    let options = [
        (count(true, true), SeriesLabelPosition::UpperRight),
        (count(false, true), SeriesLabelPosition::UpperLeft),
        (count(true, false), SeriesLabelPosition::LowerRight),
        (count(false, false), SeriesLabelPosition::LowerLeft),
    ];
    options
        .into_iter()
        .min_by_key(|o| o.0)
        .map(|o| o.1)
        .unwrap_or(SeriesLabelPosition::UpperRight)
}

impl Figure for LineFigure {
    fn size(&self) -> (u32, u32) {
        let h = if self.heading.is_some() { 44 } else { 0 };
        (self.width, self.height + h)
    }
    fn draw<DB: DrawingBackend>(&self, root: &DrawingArea<DB, Shift>) -> DrawResult<DB> {
        let mut body = root.clone();
        if let Some(h) = &self.heading {
            let (head, rest) = root.split_vertically(44);
            head.draw_text(h, &(FAMILY, TITLE_PX).into_text_style(&head), (100, 10))?;
            body = rest;
        }
        let n = self.panels.len().max(1);
        let areas = body.split_evenly((1, n));
        for (a, p) in areas.iter().zip(&self.panels) {
            draw_lines(a, p)?;
        }
        Ok(())
    }
}
