//! From the co-moments to correlations, integral length scales and the
//! noise spike; and their tables.
//!
//! Integral scale (common practice; Pope 2000, eq. 6.47, from memory):
//! L = ∫_0^{r_0} ρ(r) dr along one axis from the probe, r_0 the first zero
//! crossing of ρ, by the trapezoid rule over the grid's separations with
//! the crossing placed by linear interpolation. Each axis has two sides
//! (+x and −x); L is the mean of the sides whose ρ reaches zero inside the
//! grid. When neither does (correlated over the whole window), L is the
//! mean of the two truncated integrals, a lower bound, and `reached_zero`
//! is 0. A gap (no pair of samples) ends a side as the grid edge does; a
//! probe on the grid's edge has one side. NaN for a grid one node wide.
//!
//! Noise spike (common practice; the argument of e.g. Adrian & Westerweel
//! 2011, Particle Image Velocimetry, §8 on the noise of correlations, from
//! memory): uncorrelated noise of variance σ_n² adds σ_n² to the variance
//! at zero separation only, so the measured ρ(r > 0) is the flow's ρ_s(r)
//! times ρ_0 = σ_s² / (σ_s² + σ_n²): the curve drops from 1 at r = 0 to
//! ρ_0 just beside it. ρ_0 is estimated by extrapolating the first two
//! separations to r = 0 with a Gaussian top, ln ρ = a − b r²:
//! ρ_0 = ρ_1^{4/3} / ρ_2^{1/3} (exact for a Gaussian correlation; for a
//! parabolic top the error is of order (Δ/λ)⁴, Δ the grid spacing and λ
//! the Taylor microscale), ρ_1, ρ_2 the means of the two sides. Then
//! σ_n² = σ² (1 − ρ_0), compared with the propagated uncertainty
//! (mean of u_unc² at the probe), and the noise-removed scale integrates
//! ρ(r)/ρ_0 for r > 0. Noise correlated between neighbours (overlapping
//! interrogation windows, smoothing) is not in the spike and stays in ρ.
//! NaN when ρ_1 or ρ_2 is missing, not positive, or ρ_2 ≥ ρ_1.

use super::CorrAcc;
use crate::field::Grid;
use crate::io::{Table, Values};

/// One axis of one probe and component.
#[derive(Debug, Clone, PartialEq)]
pub struct AxisScale {
    /// Integral scale of the measured ρ (m).
    pub length: f64,
    /// Integral scale of ρ/ρ_0 (the noise spike removed), m.
    pub length_noise_removed: f64,
    /// Some side reached a zero crossing inside the grid.
    pub reached_zero: bool,
    /// ρ extrapolated to zero separation.
    pub rho0: f64,
    /// Standard uncertainty of `length` by batch means (`blocks`), m;
    /// NaN without blocks (runs of fewer than 40 frames).
    pub length_unc: f64,
    /// Standard uncertainty of `length_noise_removed` by batch means, m;
    /// NaN without blocks.
    pub length_noise_removed_unc: f64,
    /// Standard uncertainty of `rho0` by batch means; NaN without blocks.
    pub rho0_unc: f64,
    /// Signed separation (m) and ρ along the axis through the probe.
    pub profile: Vec<(f64, f64)>,
}

/// One component (u or v) at one probe.
#[derive(Debug, Clone, PartialEq)]
pub struct CompScale {
    /// Variance at the probe node (m²/s², n − 1).
    pub variance: f64,
    /// Along x through the probe (`length_x`, `rho0_x`, … of
    /// `scales.csv`).
    pub x: AxisScale,
    /// Along y through the probe (`length_y`, `rho0_y`, … of
    /// `scales.csv`).
    pub y: AxisScale,
    /// σ² (1 − ρ_0), ρ_0 the mean of the x and y estimates (m²/s²).
    pub noise_var_spike: f64,
    /// Mean squared propagated standard uncertainty at the probe (m²/s²).
    pub noise_var_propagated: f64,
}

/// The scales of one probe.
#[derive(Debug, Clone, PartialEq)]
pub struct ProbeScale {
    /// The point asked for in `[statistics] probes`, m (`probe_x`,
    /// `probe_y`).
    pub point: (f64, f64),
    /// The grid node nearest it (row-major index, x fastest), whose
    /// coordinates are the `x`, `y` columns.
    pub node: usize,
    /// Frames in which the probe node counted.
    pub n: f64,
    /// u then v.
    pub comp: [CompScale; 2],
    /// ρ_uu and ρ_vv against every node (node order; NaN without 3 pairs).
    pub rho: [Vec<f64>; 2],
    /// Pairs of samples behind each ρ.
    pub pairs: Vec<f64>,
}

/// The finished two-point statistics of a run.
#[derive(Debug, Clone, PartialEq)]
pub struct Scales {
    /// The run's grid (m).
    pub grid: Grid,
    /// One entry per probe, in the order of `[statistics] probes`.
    pub probes: Vec<ProbeScale>,
}

/// Finishes the accumulator (see the module doc).
pub fn finish(acc: &CorrAcc) -> Scales {
    let g = acc.layout.grid;
    let nn = g.len();
    let probes = (0..acc.layout.nodes.len())
        .map(|p| {
            let node = acc.layout.nodes[p];
            let pairs = acc.n[p * nn..(p + 1) * nn].to_vec();
            let rho = [0, 1].map(|c| {
                let (sp, sq, cpq) = (acc.part(p, c, 2), acc.part(p, c, 3), acc.part(p, c, 4));
                (0..nn)
                    .map(|q| {
                        let den = (sp[q] * sq[q]).sqrt();
                        if pairs[q] >= 3.0 && den > 0.0 {
                            cpq[q] / den
                        } else {
                            f64::NAN
                        }
                    })
                    .collect::<Vec<f64>>()
            });
            let comp = [0, 1].map(|c| {
                let n = pairs[node];
                let variance = if n >= 2.0 {
                    acc.part(p, c, 2)[node] / (n - 1.0)
                } else {
                    f64::NAN
                };
                let (mut x, mut y) = (
                    axis(&g, node, &rho[c], true),
                    axis(&g, node, &rho[c], false),
                );
                if let Some(b) = &acc.blocks {
                    block_uncertainties(b, &g, p, c, node, &mut x, &mut y);
                }
                let rho0 = mean_finite(&[x.rho0, y.rho0]);
                let un = acc.unc_n[p * 2 + c];
                CompScale {
                    variance,
                    noise_var_spike: variance * (1.0 - rho0),
                    noise_var_propagated: if un > 0.0 {
                        acc.unc2[p * 2 + c] / un
                    } else {
                        f64::NAN
                    },
                    x,
                    y,
                }
            });
            ProbeScale {
                point: acc.layout.points[p],
                node,
                n: pairs[node],
                comp,
                rho,
                pairs,
            }
        })
        .collect();
    Scales { grid: g, probes }
}

/// The batch-means uncertainties of the scales of probe `p`, component
/// `c` (`blocks`): each block's axes computed as the run's.
fn block_uncertainties(
    b: &super::blocks::LineBlocks,
    g: &Grid,
    p: usize,
    c: usize,
    node: usize,
    x: &mut AxisScale,
    y: &mut AxisScale,
) {
    use super::blocks::scale_unc;
    let (bx, by): (Vec<AxisScale>, Vec<AxisScale>) = (0..b.blocks)
        .map(|k| {
            let rho = b.rho(g, p, k, c);
            (axis(g, node, &rho, true), axis(g, node, &rho, false))
        })
        .unzip();
    for (out, per) in [(x, &bx), (y, &by)] {
        let of = |f: fn(&AxisScale) -> f64| -> Vec<f64> { per.iter().map(f).collect() };
        out.length_unc = scale_unc(&of(|a| a.length));
        out.length_noise_removed_unc = scale_unc(&of(|a| a.length_noise_removed));
        out.rho0_unc = scale_unc(&of(|a| a.rho0));
    }
}

/// Mean of the finite values (NaN when none).
fn mean_finite(v: &[f64]) -> f64 {
    let f: Vec<f64> = v.iter().copied().filter(|x| x.is_finite()).collect();
    if f.is_empty() {
        f64::NAN
    } else {
        f.iter().sum::<f64>() / f.len() as f64
    }
}

/// ρ along one axis through `node` (x when `along_x`), both sides.
fn axis(g: &Grid, node: usize, rho: &[f64], along_x: bool) -> AxisScale {
    let (i0, j0) = (node % g.nx, node / g.nx);
    let (n, c0, d) = if along_x {
        (g.nx, i0, g.dx)
    } else {
        (g.ny, j0, g.dy)
    };
    let at = |k: usize| {
        if along_x {
            rho[j0 * g.nx + k]
        } else {
            rho[k * g.nx + i0]
        }
    };
    let profile: Vec<(f64, f64)> = (0..n)
        .map(|k| ((k as f64 - c0 as f64) * d, at(k)))
        .collect();
    let plus: Vec<f64> = (c0..n).map(at).collect();
    let minus: Vec<f64> = (0..=c0).rev().map(at).collect();
    let side_mean = |k: usize| {
        mean_finite(&[plus.get(k), minus.get(k)].map(|x| x.copied().unwrap_or(f64::NAN)))
    };
    let (r1, r2) = (side_mean(1), side_mean(2));
    let rho0 = if r1 > 0.0 && r2 > 0.0 && r2 < r1 {
        r1.powf(4.0 / 3.0) / r2.powf(1.0 / 3.0)
    } else {
        f64::NAN
    };
    let sides = |scale: f64| {
        // a probe on the grid's edge has one side only
        let s: Vec<(f64, bool)> = [&plus, &minus]
            .iter()
            .filter(|side| side.len() > 1)
            .map(|side| integrate_to_zero(side, d, scale))
            .collect();
        let reached: Vec<f64> = s.iter().filter(|x| x.1).map(|x| x.0).collect();
        if reached.is_empty() {
            let all: Vec<f64> = s.iter().map(|x| x.0).collect();
            (mean_finite(&all), false)
        } else {
            (mean_finite(&reached), true)
        }
    };
    let (length, reached_zero) = sides(1.0);
    let length_noise_removed = if rho0.is_finite() {
        sides(rho0).0
    } else {
        f64::NAN
    };
    AxisScale {
        length,
        length_noise_removed,
        reached_zero,
        rho0,
        length_unc: f64::NAN,
        length_noise_removed_unc: f64::NAN,
        rho0_unc: f64::NAN,
        profile,
    }
}

/// ∫ ρ dr from r = 0 to the first zero crossing by the trapezoid rule
/// (`side[k]` at r = k d; ρ(0) taken as 1, ρ(r > 0) divided by `rho0`);
/// the bool says whether a crossing was reached before the edge or a gap.
pub fn integrate_to_zero(side: &[f64], d: f64, rho0: f64) -> (f64, bool) {
    let val = |k: usize| if k == 0 { 1.0 } else { side[k] / rho0 };
    let mut area = 0.0;
    for k in 0..side.len().saturating_sub(1) {
        let (a, b) = (val(k), val(k + 1));
        if !b.is_finite() {
            return (area, false);
        }
        if b <= 0.0 {
            return (area + 0.5 * a * d * a / (a - b), true);
        }
        area += 0.5 * (a + b) * d;
    }
    (area, false)
}

/// `scales.csv`: one row per probe and component (columns and units in
/// docs/interface.md).
pub fn scales_table(s: &Scales) -> Table {
    let mut t = Table::new();
    let mut cols: Vec<(&str, Vec<f64>)> = [
        "probe_x",
        "probe_y",
        "x",
        "y",
        "n_frames",
        "variance",
        "length_x",
        "length_y",
        "length_x_noise_removed",
        "length_y_noise_removed",
        "reached_zero_x",
        "reached_zero_y",
        "rho0_x",
        "rho0_y",
        "noise_var_spike",
        "noise_var_propagated",
        "length_x_unc",
        "length_y_unc",
        "length_x_noise_removed_unc",
        "length_y_noise_removed_unc",
        "rho0_x_unc",
        "rho0_y_unc",
    ]
    .into_iter()
    .map(|n| (n, Vec::new()))
    .collect();
    let (mut probe, mut comp) = (Vec::new(), Vec::new());
    for (ip, p) in s.probes.iter().enumerate() {
        let (i, j) = (p.node % s.grid.nx, p.node / s.grid.nx);
        for (c, cs) in p.comp.iter().enumerate() {
            probe.push(ip as i64);
            comp.push(["u", "v"][c].to_string());
            let vals = [
                p.point.0,
                p.point.1,
                s.grid.x(i),
                s.grid.y(j),
                p.n,
                cs.variance,
                cs.x.length,
                cs.y.length,
                cs.x.length_noise_removed,
                cs.y.length_noise_removed,
                f64::from(u8::from(cs.x.reached_zero)),
                f64::from(u8::from(cs.y.reached_zero)),
                cs.x.rho0,
                cs.y.rho0,
                cs.noise_var_spike,
                cs.noise_var_propagated,
                cs.x.length_unc,
                cs.y.length_unc,
                cs.x.length_noise_removed_unc,
                cs.y.length_noise_removed_unc,
                cs.x.rho0_unc,
                cs.y.rho0_unc,
            ];
            for (col, v) in cols.iter_mut().zip(vals) {
                col.1.push(v);
            }
        }
    }
    t.push("probe", Values::I64(probe));
    t.push("component", Values::Str(comp));
    for (n, v) in cols {
        t.push(n, Values::F64(v));
    }
    t
}

/// `correlation.csv`: one row per probe and node: `probe, x, y, sep_x,
/// sep_y, rho_uu, rho_vv, n_pairs`.
pub fn correlation_table(s: &Scales) -> Table {
    let g = s.grid;
    let mut t = Table::new();
    let mut cols: Vec<Vec<f64>> = vec![Vec::new(); 7];
    let mut probe = Vec::new();
    for (ip, p) in s.probes.iter().enumerate() {
        let (xp, yp) = (g.x(p.node % g.nx), g.y(p.node / g.nx));
        for q in 0..g.len() {
            let (x, y) = (g.x(q % g.nx), g.y(q / g.nx));
            probe.push(ip as i64);
            let vals = [x, y, x - xp, y - yp, p.rho[0][q], p.rho[1][q], p.pairs[q]];
            for (c, v) in cols.iter_mut().zip(vals) {
                c.push(v);
            }
        }
    }
    t.push("probe", Values::I64(probe));
    let names = ["x", "y", "sep_x", "sep_y", "rho_uu", "rho_vv"];
    let mut it = cols.into_iter();
    for n in names {
        t.push(n, Values::F64(it.next().unwrap_or_default()));
    }
    t.push(
        "n_pairs",
        Values::I64(
            it.next()
                .unwrap_or_default()
                .iter()
                .map(|&x| x as i64)
                .collect(),
        ),
    );
    t
}
