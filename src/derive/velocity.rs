//! The velocity the derivatives are taken of: the frame's vectors with
//! their per-vector uncertainty, smoothed when a smoother is configured.
//!
//! Owns: the per-vector uncertainty model (the `derive` module doc gives
//! it), the error-correlation model of the frame, smoothing the velocity
//! (values from the smoother, uncertainty through its stencil, both cut by
//! one rule at edges and masks, `stencil::cut`) and the smoothing-bias
//! estimate of the velocity (`smoothing_bias`). Does not own: the
//! derivatives (`gradient`).

use ndarray::{Array2, Zip};

use super::{noise, smoothing_bias, Params, VelocityNoise};
use crate::field::{Field, MASKED, VALID};
use crate::stencil::correlation::Correlation;
use crate::stencil::cut::{cut, Cut};
use crate::stencil::smooth::Smoother;
use crate::stencil::Stencil;

/// The frame's velocity with its per-vector uncertainty.
pub(super) struct Velocity {
    /// Nodes with a value (not masked, both components finite).
    pub ok: Array2<bool>,
    /// The error-correlation model: given, or estimated from the frame.
    pub corr: Correlation,
    /// The frame's noise estimate (always attempted).
    pub noise_estimate: Option<f64>,
    /// The noise level used for valid vectors (NaN when unknown).
    pub level: f64,
    /// Valid vectors without a sigma column value (`"columns"` only).
    pub sigma_fallback_nodes: usize,
    /// The velocity, NaN where `ok` is false.
    pub u: Array2<f64>,
    pub v: Array2<f64>,
    /// Per-vector standard uncertainties, through the fill's weights.
    pub sig_u: Array2<f64>,
    pub sig_v: Array2<f64>,
}

impl Velocity {
    /// The frame's velocity and its per-vector uncertainty under `p`.
    pub(crate) fn of(p: &Params, field: &Field) -> Velocity {
        let ok = Zip::from(&field.status)
            .and(&field.u)
            .and(&field.v)
            .map_collect(|&s, u, v| s != MASKED && u.is_finite() && v.is_finite());
        let corr = if p.correlation_from_data {
            noise::estimate_overlap(field).map_or(p.correlation, noise::overlap_model)
        } else {
            p.correlation
        };
        let noise_estimate = noise::estimate(field, &corr);
        let (mut sig_u, mut sig_v, level, sigma_fallback_nodes) =
            per_vector_sigma(p, field, &ok, noise_estimate);
        noise::through_fill(field, &ok, &corr, [&mut sig_u, &mut sig_v]);
        let (u, v) = (masked(&field.u, &ok), masked(&field.v, &ok));
        Velocity {
            ok,
            corr,
            noise_estimate,
            level,
            sigma_fallback_nodes,
            u,
            v,
            sig_u,
            sig_v,
        }
    }
}

/// `a` where `ok`, NaN elsewhere.
fn masked(a: &Array2<f64>, ok: &Array2<bool>) -> Array2<f64> {
    Zip::from(a)
        .and(ok)
        .map_collect(|&x, &o| if o { x } else { f64::NAN })
}

/// The per-vector uncertainty maps, the level used and the fallback count.
fn per_vector_sigma(
    p: &Params,
    field: &Field,
    ok: &Array2<bool>,
    estimate: Option<f64>,
) -> (Array2<f64>, Array2<f64>, f64, usize) {
    let est = estimate.unwrap_or(f64::NAN);
    let level = match p.velocity_noise {
        VelocityNoise::Value(x) => x,
        VelocityNoise::Estimate => est,
        VelocityNoise::Columns => {
            let mut s: Vec<f64> = field
                .status
                .iter()
                .zip(field.sigma_u.iter().zip(field.sigma_v.iter()))
                .filter(|(&st, _)| st == VALID)
                .flat_map(|(_, (a, b))| [*a, *b])
                .filter(|x| x.is_finite())
                .collect();
            if s.is_empty() {
                est
            } else {
                crate::robust::median(&mut s)
            }
        }
    };
    let mut fallback = 0;
    let columns = p.velocity_noise == VelocityNoise::Columns;
    let one = |st: u8, has: bool, c: f64| -> f64 {
        if !has || st == MASKED {
            return f64::NAN;
        }
        if st == VALID {
            if columns {
                return if c.is_finite() { c } else { level };
            }
            return level;
        }
        level.hypot(if c.is_finite() { c } else { 0.0 })
    };
    let mut su = Array2::from_elem(ok.dim(), f64::NAN);
    let mut sv = Array2::from_elem(ok.dim(), f64::NAN);
    Zip::from(&mut su)
        .and(&mut sv)
        .and(&field.status)
        .and(ok)
        .and(&field.sigma_u)
        .and(&field.sigma_v)
        .for_each(|a, b, &st, &has, &cu, &cv| {
            let missing = columns && st == VALID && has && !(cu.is_finite() && cv.is_finite());
            *a = one(st, has, cu);
            *b = one(st, has, cv);
            fallback += missing as usize;
        });
    (su, sv, level, fallback)
}

/// The frame's smoothing: the smoother as resolved for the frame, its
/// equivalent stencil, and the smoothed velocity with its uncertainty.
pub(super) struct Smoothing {
    /// The smoother for this frame (a PLS smoother without s gets this
    /// frame's GCV choice).
    pub smoother: Smoother,
    /// How the smoother is cut at edges and masks.
    pub cut: Cut,
    /// The equivalent stencil, normalised to unit sum; `None` without a
    /// smoother.
    pub stencil: Option<Stencil>,
    /// `[u, v, u_unc, v_unc]` smoothed; `None` without a smoother (the
    /// smoothed velocity is then the velocity itself).
    pub smoothed: Option<[Array2<f64>; 4]>,
    /// The velocity's smoothing-bias estimates (`Derived::vel_trunc`).
    pub vel_trunc: Option<[Array2<f64>; 4]>,
}

impl Smoothing {
    /// Smooths the frame's velocity: values from the smoother, uncertainty
    /// through its stencil, both cut by one rule (`stencil::cut`) at edges
    /// and masks. A requested smoother is never skipped.
    pub(crate) fn of(p: &Params, vel: &Velocity) -> Smoothing {
        let smoother = p.smoother.for_frame(&vel.u, &vel.v, &vel.ok);
        let cut = smoother.cut_rule();
        let stencil = unit_stencil(&smoother);
        let smoothed = stencil
            .as_ref()
            .map(|s| smoothed_velocity(&smoother, s, cut, vel));
        let vel_trunc = match (&stencil, &smoothed, p.truncation) {
            (Some(s), Some([us, vs, _, _]), true) => Some(smoothing_bias::estimate(
                &smoother,
                s,
                &vel.ok,
                [us, vs],
                [&vel.sig_u, &vel.sig_v],
                &vel.corr,
            )),
            _ => None,
        };
        Smoothing {
            smoother,
            cut,
            stencil,
            smoothed,
            vel_trunc,
        }
    }

    /// The velocity the derivatives are taken of: smoothed, or as measured.
    pub(crate) fn velocity<'a>(&'a self, vel: &'a Velocity) -> (&'a Array2<f64>, &'a Array2<f64>) {
        match &self.smoothed {
            Some([a, b, _, _]) => (a, b),
            None => (&vel.u, &vel.v),
        }
    }
}

/// The smoother's equivalent stencil scaled to unit sum (`None` without a
/// smoother; a stencil of zero sum is kept as it is).
fn unit_stencil(smoother: &Smoother) -> Option<Stencil> {
    if matches!(smoother, Smoother::None) {
        return None;
    }
    let s = smoother
        .equivalent_stencil()
        .expect("smoother resolved for the frame");
    let sum: f64 = s.taps.iter().map(|t| t.w).sum();
    Some(if sum.abs() > 1e-12 {
        s.scaled(1.0 / sum)
    } else {
        s
    })
}

/// `[u, v, u_unc, v_unc]` smoothed: the values from the smoother, the
/// uncertainty through its stencil `s` (cut by `cut` where it does not
/// fit), with the frame's correlation model.
fn smoothed_velocity(
    smoother: &Smoother,
    s: &Stencil,
    cut_rule: Cut,
    vel: &Velocity,
) -> [Array2<f64>; 4] {
    let ok = &vel.ok;
    let corr = &vel.corr;
    let apply =
        |a: &Array2<f64>| masked(&smoother.apply(a, ok).as_standard_layout().to_owned(), ok);
    let (us, vs) = (apply(&vel.u), apply(&vel.v));
    let gain = corr.gain(s);
    let mut uu = Array2::from_elem(ok.dim(), f64::NAN);
    let mut vu = Array2::from_elem(ok.dim(), f64::NAN);
    for ((j, i), &o) in ok.indexed_iter() {
        if !o {
            continue;
        }
        let (st, g) = if s.fits(j, i, ok) {
            (s.clone(), gain)
        } else {
            match cut(s, cut_rule, ok, j, i) {
                Some(r) => {
                    let g = corr.gain(&r);
                    (r, g)
                }
                None => continue,
            }
        };
        uu[[j, i]] = corr.variance_at(&st, g, &vel.sig_u, j, i).sqrt();
        vu[[j, i]] = corr.variance_at(&st, g, &vel.sig_v, j, i).sqrt();
    }
    [us, vs, uu, vu]
}
