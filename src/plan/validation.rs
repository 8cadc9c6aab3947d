//! `[validation]`, `[fill]` and `[smoothing]`: raw keys and their resolution.
//!
//! Velocities in these sections are given either in px of displacement
//! (keys ending in `_px`, which need `pixel_size` and `pulse_separation` in
//! `[input]`) or in the input velocity unit (`velocity_unit` of `[input]`:
//! m/s, mm/s or px). Resolution turns them into m/s. Unknown keys are errors
//! (serde), and so are values out of range; messages name the key and what
//! is expected.

use serde::{Deserialize, Serialize};

use super::ResolveCtx;
use crate::error::{Error, Result};
use crate::stencil::smooth::Smoother;
use crate::validate::{Bounds, Combine, EnsembleParams, Limits, MedianParams, Shape};
use crate::{fill, validate};

/// `[validation]`: the chain input flags -> limits -> ensemble -> median,
/// each test counted separately in `frames.csv`.
#[derive(Debug, Clone, Default, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct RawValidation {
    /// The normalized median test (on by default).
    pub median: Option<RawMedian>,
    /// Global limits on (u, v): a box or an ellipse (off by default).
    pub limits: Option<RawLimits>,
    /// The per-node ensemble test (off by default; costs a first pass over
    /// the run's frames, holding a small histogram per node, not the frames).
    pub ensemble: Option<RawEnsemble>,
    /// Reject a whole frame (a bad laser shot) when more than this fraction
    /// of its nodes is invalid input or outliers; 0 < f <= 1 (off by default).
    pub max_rejected_fraction: Option<f64>,
}

/// `median = { ... }` in `[validation]`.
#[derive(Debug, Clone, Default, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct RawMedian {
    /// false switches the test off (default true).
    pub enabled: Option<bool>,
    /// Noise floor in px of displacement (default 0.1 px when the
    /// calibration is known).
    pub eps_px: Option<f64>,
    /// Noise floor in the input velocity unit. Without it and without the
    /// calibration, each frame's estimated noise (stated in the manifest:
    /// `eps_noise`); a px default is never read in another unit.
    pub eps: Option<f64>,
    /// Normalized residual above which a vector is rejected (default 2).
    pub threshold: Option<f64>,
    /// Neighbourhood radius in nodes: 1 (3 x 3, default) or 2 (5 x 5).
    pub radius: Option<usize>,
    /// "either" (default: reject when u's or v's residual is over the
    /// threshold) or "magnitude" (when sqrt(ru^2 + rv^2) is; stricter).
    pub combine: Option<String>,
    /// Fewest valid neighbours for a node to be tested (default 3 for
    /// radius 1, 8 for radius 2).
    pub min_neighbours: Option<usize>,
}

/// `limits = { ... }` in `[validation]`: either `u` and `v`, or `spread`.
#[derive(Debug, Clone, Default, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct RawLimits {
    /// "box" (default) or "ellipse" (inscribed in the box).
    pub shape: Option<String>,
    /// [min, max] of u in the input velocity unit.
    pub u: Option<[f64; 2]>,
    /// [min, max] of v in the input velocity unit.
    pub v: Option<[f64; 2]>,
    /// Limits from the run's own statistics: median +- spread robust
    /// standard deviations (1.4826 MAD over all valid vectors), per component.
    pub spread: Option<f64>,
}

/// `ensemble = { ... }` in `[validation]`.
#[derive(Debug, Clone, Default, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct RawEnsemble {
    /// false switches the test off (default true when the table is given).
    pub enabled: Option<bool>,
    /// Reject a vector further than k robust standard deviations from its
    /// node's median over the run (default 5).
    pub k: Option<f64>,
    /// Lower bound on the robust standard deviation, in px (default 0.1 px
    /// when calibrated).
    pub floor_px: Option<f64>,
    /// Same in the input velocity unit (required without the calibration).
    pub floor: Option<f64>,
    /// Nodes with fewer valid vectors in the run are not tested (default 10).
    pub min_samples: Option<usize>,
}

/// `[fill]`: how invalid and rejected vectors get values.
#[derive(Debug, Clone, Default, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct RawFill {
    /// "neighbour-mean" (default) or "inpaint" (DCT penalized least squares,
    /// Garcia 2010; about 2 x iterations 2-D transforms per frame with gaps).
    pub method: Option<String>,
    /// Holes further than this many nodes from a valid vector are masked,
    /// not filled (default 3; a large number fills every gap).
    pub max_distance: Option<usize>,
    /// Fewest neighbours with values for a neighbour-mean fill, 1..8 (default 2).
    pub min_neighbours: Option<usize>,
    /// Iterations of the inpainting (default 30).
    pub iterations: Option<usize>,
}

/// `[smoothing]`: applied to the filled field before derivatives.
#[derive(Debug, Clone, Default, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct RawSmoothing {
    /// "none" (default), "gaussian", "savitzky-golay" or "pls".
    pub method: Option<String>,
    /// gaussian: standard deviation in grid pitches (default 1).
    pub sigma: Option<f64>,
    /// savitzky-golay: window half-width in nodes (default 2: 5 x 5).
    pub half_width: Option<usize>,
    /// savitzky-golay: total polynomial degree, at most 2 half_width (default 2).
    pub order: Option<usize>,
    /// pls: smoothing parameter; omitted, chosen per frame by generalized
    /// cross-validation.
    pub s: Option<f64>,
    /// pls: bisquare weights against remaining outliers (default false).
    pub robust: Option<bool>,
}

fn positive(key: &str, v: f64) -> Result<f64> {
    if v.is_finite() && v > 0.0 {
        Ok(v)
    } else {
        Err(Error::usage(format!(
            "{key} = {v} must be a positive number"
        )))
    }
}

/// A velocity given in px (`px_key`) or in the input unit (`unit_key`), in
/// m/s; without either, `default` px when the calibration is known, else
/// `None`: a default in px is never read in another unit (the caller
/// derives one from the data or asks for the key).
fn velocity(
    ctx: &ResolveCtx,
    px_key: &str,
    px: Option<f64>,
    unit_key: &str,
    unit: Option<f64>,
    default: f64,
) -> Result<Option<f64>> {
    match (px, unit) {
        (Some(_), Some(_)) => Err(Error::usage(format!(
            "give either {px_key} (px of displacement) or {unit_key} (input velocity unit), not both"
        ))),
        (Some(p), None) => {
            let p = positive(px_key, p)?;
            let s = ctx.px_velocity.ok_or_else(|| {
                Error::usage(format!(
                    "{px_key} needs the calibration (pixel_size and pulse_separation in [input]); \
                     without it give {unit_key} in the input velocity unit"
                ))
            })?;
            Ok(Some(p * s))
        }
        (None, Some(u)) => Ok(Some(positive(unit_key, u)? * ctx.velocity_scale)),
        (None, None) => Ok(ctx.px_velocity.map(|s| default * s)),
    }
}

/// Resolves `[validation]` into the validation parameters (velocities in m/s).
pub(crate) fn resolve_validation(
    raw: &RawValidation,
    ctx: &ResolveCtx,
) -> Result<validate::Params> {
    let mut p = validate::Params::default();
    let m = raw.median.clone().unwrap_or_default();
    let eps = velocity(
        ctx,
        "[validation] median.eps_px",
        m.eps_px,
        "[validation] median.eps",
        m.eps,
        0.1,
    )?;
    p.median = if m.enabled.unwrap_or(true) {
        Some(resolve_median(&m, eps)?)
    } else {
        None
    };
    let mut floor = eps;
    if let Some(e) = &raw.ensemble {
        floor = velocity(
            ctx,
            "[validation] ensemble.floor_px",
            e.floor_px,
            "[validation] ensemble.floor",
            e.floor,
            0.1,
        )?;
        if e.enabled.unwrap_or(true) {
            p.ensemble = Some(resolve_ensemble(e, floor)?);
        }
    }
    if let Some(l) = &raw.limits {
        p.limits = Some(resolve_limits(l, ctx, floor)?);
    }
    if let Some(f) = raw.max_rejected_fraction {
        if !(f > 0.0 && f <= 1.0) {
            return Err(Error::usage(format!(
                "[validation] max_rejected_fraction = {f}; expected a fraction in (0, 1]"
            )));
        }
        p.max_rejected_fraction = Some(f);
    }
    // ensemble histograms resolve a fifth of the noise floor near zero;
    // without a known floor, 1e-3 of the input velocity unit (a bin width,
    // not a threshold)
    p.histogram_resolution = floor.map_or(1e-3 * ctx.velocity_scale, |f| 0.2 * f);
    Ok(p)
}

/// The normalized median test of an enabled `median = { ... }`, with its
/// resolved `eps` (m/s; None without a calibration or a given eps).
fn resolve_median(m: &RawMedian, eps: Option<f64>) -> Result<MedianParams> {
    let radius = m.radius.unwrap_or(1);
    if radius != 1 && radius != 2 {
        return Err(Error::usage(format!(
            "[validation] median.radius = {radius}; expected 1 (3 x 3) or 2 (5 x 5)"
        )));
    }
    let most = (2 * radius + 1).pow(2) - 1;
    let min_neighbours = m.min_neighbours.unwrap_or(if radius == 1 { 3 } else { 8 });
    if min_neighbours < 1 || min_neighbours > most {
        return Err(Error::usage(format!(
            "[validation] median.min_neighbours = {min_neighbours}; expected 1 to {most} for radius {radius}"
        )));
    }
    let combine = match m.combine.as_deref().unwrap_or("either") {
        "either" => Combine::Either,
        "magnitude" => Combine::Magnitude,
        other => {
            return Err(Error::usage(format!(
                "[validation] median.combine = '{other}' is not known; expected \"either\" or \"magnitude\""
            )))
        }
    };
    Ok(MedianParams {
        // Without a calibration and without eps: eps = the frame's
        // estimated noise (Westerweel & Scarano 2005 give eps = 0.1 px
        // as the typical noise level of PIV; from memory).
        eps: eps.unwrap_or(0.0),
        eps_noise: eps.is_none().then_some(1.0),
        threshold: positive("[validation] median.threshold", m.threshold.unwrap_or(2.0))?,
        radius,
        combine,
        min_neighbours,
    })
}

/// The ensemble test of an enabled `ensemble = { ... }`, with its resolved
/// noise floor (m/s), which it cannot do without.
fn resolve_ensemble(e: &RawEnsemble, floor: Option<f64>) -> Result<EnsembleParams> {
    let Some(floor) = floor else {
        return Err(Error::usage(
            "[validation] ensemble needs its noise floor: without pixel_size and \
             pulse_separation in [input] the 0.1 px default cannot be converted; give \
             ensemble.floor in the input velocity unit (about the random error of one \
             vector), or the calibration",
        ));
    };
    let min_samples = e.min_samples.unwrap_or(10);
    if min_samples < 3 {
        return Err(Error::usage(format!(
            "[validation] ensemble.min_samples = {min_samples}; expected at least 3"
        )));
    }
    Ok(EnsembleParams {
        k: positive("[validation] ensemble.k", e.k.unwrap_or(5.0))?,
        floor,
        min_samples,
    })
}

/// The global limits of `limits = { ... }`; `floor` (m/s) is the robust
/// limits' noise floor when known.
fn resolve_limits(l: &RawLimits, ctx: &ResolveCtx, floor: Option<f64>) -> Result<Limits> {
    let shape = match l.shape.as_deref().unwrap_or("box") {
        "box" => Shape::Box,
        "ellipse" => Shape::Ellipse,
        other => {
            return Err(Error::usage(format!(
            "[validation] limits.shape = '{other}' is not known; expected \"box\" or \"ellipse\""
        )))
        }
    };
    let bounds = match (l.u, l.v, l.spread) {
        (Some(u), Some(v), None) => {
            for (name, r) in [("u", u), ("v", v)] {
                if !(r[0].is_finite() && r[1].is_finite() && r[0] < r[1]) {
                    return Err(Error::usage(format!(
                        "[validation] limits.{name} = [{}, {}] must be [min, max] with min < max",
                        r[0], r[1]
                    )));
                }
            }
            let s = ctx.velocity_scale;
            Bounds::Given {
                u: [u[0] * s, u[1] * s],
                v: [v[0] * s, v[1] * s],
            }
        }
        (None, None, Some(spread)) => Bounds::Robust {
            spread: positive("[validation] limits.spread", spread)?,
            // no floor without a calibration or a given eps/floor
            floor: floor.unwrap_or(0.0),
        },
        _ => {
            return Err(Error::usage(
                "[validation] limits needs either u = [min, max] and v = [min, max] \
                 (input velocity unit), or spread = <robust standard deviations> alone",
            ))
        }
    };
    Ok(Limits { shape, bounds })
}

pub(crate) fn resolve_fill(raw: &RawFill, _ctx: &ResolveCtx) -> Result<fill::Params> {
    let d = fill::Params::default();
    let method = match raw.method.as_deref().unwrap_or("neighbour-mean") {
        "neighbour-mean" => fill::Method::NeighbourMean,
        "inpaint" => fill::Method::Inpaint,
        other => {
            return Err(Error::usage(format!(
                "[fill] method = '{other}' is not known; expected \"neighbour-mean\" or \"inpaint\""
            )))
        }
    };
    let min_neighbours = raw.min_neighbours.unwrap_or(d.min_neighbours);
    if !(1..=8).contains(&min_neighbours) {
        return Err(Error::usage(format!(
            "[fill] min_neighbours = {min_neighbours}; expected 1 to 8"
        )));
    }
    let iterations = raw.iterations.unwrap_or(d.inpaint_iterations);
    if !(2..=10_000).contains(&iterations) {
        return Err(Error::usage(format!(
            "[fill] iterations = {iterations}; expected 2 to 10000"
        )));
    }
    if raw.iterations.is_some() && method != fill::Method::Inpaint {
        return Err(Error::usage(
            "[fill] iterations applies to method = \"inpaint\" only",
        ));
    }
    Ok(fill::Params {
        method,
        max_distance: Some(raw.max_distance.unwrap_or(3)),
        min_neighbours,
        inpaint_iterations: iterations,
    })
}

pub(crate) fn resolve_smoothing(raw: &RawSmoothing, _ctx: &ResolveCtx) -> Result<Smoother> {
    let method = raw.method.as_deref().unwrap_or("none");
    let given: Vec<&str> = [
        ("sigma", raw.sigma.is_some()),
        ("half_width", raw.half_width.is_some()),
        ("order", raw.order.is_some()),
        ("s", raw.s.is_some()),
        ("robust", raw.robust.is_some()),
    ]
    .iter()
    .filter(|(_, g)| *g)
    .map(|(k, _)| *k)
    .collect();
    let allowed: &[&str] = match method {
        "none" => &[],
        "gaussian" => &["sigma"],
        "savitzky-golay" => &["half_width", "order"],
        "pls" => &["s", "robust"],
        other => {
            return Err(Error::usage(format!(
                "[smoothing] method = '{other}' is not known; expected \"none\", \"gaussian\", \
                 \"savitzky-golay\" or \"pls\""
            )))
        }
    };
    if let Some(k) = given.iter().find(|k| !allowed.contains(k)) {
        return Err(Error::usage(format!(
            "[smoothing] {k} does not apply to method = \"{method}\" (its keys: {})",
            if allowed.is_empty() {
                "none".to_string()
            } else {
                allowed.join(", ")
            }
        )));
    }
    Ok(match method {
        "gaussian" => Smoother::gaussian(positive("[smoothing] sigma", raw.sigma.unwrap_or(1.0))?),
        "savitzky-golay" => {
            let m = raw.half_width.unwrap_or(2);
            let o = raw.order.unwrap_or(2);
            if !(1..=10).contains(&m) || o > 2 * m {
                return Err(Error::usage(format!(
                    "[smoothing] half_width = {m}, order = {o}: expected half_width 1 to 10 and order at most 2 half_width"
                )));
            }
            Smoother::savitzky_golay(m, o)
        }
        "pls" => Smoother::Pls {
            s: raw.s.map(|s| positive("[smoothing] s", s)).transpose()?,
            robust: raw.robust.unwrap_or(false),
        },
        _ => Smoother::None,
    })
}

#[cfg(test)]
mod tests;
