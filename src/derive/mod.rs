//! Velocity-gradient quantities of one snapshot and their uncertainty.
//!
//! Owns: the per-vector uncertainty model, smoothing the field for the
//! statistics, the out-of-plane vorticity and the other gradient quantities,
//! the propagation of per-vector uncertainty through the (composite)
//! stencils, the truncation estimate and the noise-aware choice of scheme.
//! Does not own: the stencil type (`stencil`), statistics over frames
//! (`stats`).
//!
//! Per-vector uncertainty (standard, m/s), per component:
//! - valid vectors (status 0): with `velocity_noise = "columns"`, the
//!   input's sigma column; where a valid vector has no finite sigma, the
//!   frame's noise level below (counted in `Derived.sigma_fallback_nodes`).
//!   Otherwise the noise level: the number given, or the frame's estimate
//!   (`noise::estimate`).
//! - replaced and filled vectors (1, 2): the noise of the valid vectors
//!   propagated through the fill's weights plus the fill's model error in
//!   quadrature (`noise::through_fill`, `fill` module docs). A field
//!   without fill weights: `sqrt(noise^2 + fill^2)`, with `fill` the
//!   field's sigma at that node (0 when none). For `"columns"` the noise
//!   level is the median of the valid vectors' sigma columns.
//! - masked (3): no value, NaN.
//!
//! When no level can be had (estimate asked, too few valid runs of five
//! vectors), every uncertainty is NaN: unknown, never zero.
//!
//! `scheme = auto` (the principle of Foucaut & Stanislas 2002, Meas. Sci.
//! Technol. 13:1058): every candidate scheme is applied. In a run, the
//! choice is made once from a pilot of frames (`choice`: ensemble
//! estimates, one map for the statistics and one for the instantaneous
//! fields) and handed to `derive_with`. Without such a choice (a single
//! frame, `derive`), at each node the candidate with the least estimated
//! total vorticity error of this frame, propagated variance plus squared
//! debiased truncation estimate, averaged over the node's 3 x 3
//! neighbourhood, is kept (ties: the first candidate). The choice is in
//! `Derived.scheme_map` and its counts in `Derived.scheme_counts`.

//!
//! For the statistics stage: `Quantity.unc` is the random part of one
//! instantaneous value (it averages down over frames); `Quantity.bias` is
//! the standard uncertainty of the systematic truncation error (it does
//! not). A mean over N frames combines them as
//! `u(mean)^2 = s^2/N_eff + B^2`, B the debiased mean of the signed
//! truncation estimates `Quantity.trunc` (`stats::table`).
//!
//! Cost (release, one thread, 200 x 200 grid, this 2-core machine shared
//! with other jobs, CPU time): about 650 ns per vector with every quantity
//! and the truncation estimate, 340 ns for omega alone with truncation,
//! 200-260 ns for omega alone without; `auto` about 2 us (four schemes).
//! Interior nodes take a fast path with fixed weights and no allocation;
//! edge and mask nodes take the fallback path, whose stencils are cached
//! per validity pattern on each thread.

mod cache;
pub mod choice;
mod describe;
pub mod gradient;
pub mod noise;
pub mod quantities;
pub mod smoothing_bias;

#[cfg(test)]
pub mod flows;
#[cfg(test)]
mod tests;
#[cfg(test)]
mod tests_coverage;

use ndarray::{Array2, Zip};

use crate::field::{Field, MASKED, VALID};
use crate::stencil::correlation::Correlation;
use crate::stencil::derivatives::DiffScheme;
use crate::stencil::smooth::Smoother;
use crate::stencil::Stencil;

use crate::stencil::cut::cut;
use gradient::{gradient, summed_area, Grad, Inputs};

/// How the derivatives are taken. In the manifest a fixed scheme is its
/// `DiffScheme` (`{"name": "least-squares", "window": 5, "order": 1}`) and
/// auto is `{"name": "auto"}` (`describe`).
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Scheme {
    Fixed(DiffScheme),
    /// Per node, the candidate with the least estimated total error.
    Auto,
}

/// Where the per-vector random error comes from. In the manifest as in
/// the pipeline file: "estimate", "columns" or the level in m/s.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
#[serde(rename_all = "lowercase")]
pub enum VelocityNoise {
    /// Estimated from each frame (`noise::estimate`).
    Estimate,
    /// The input's sigma_u and sigma_v columns.
    Columns,
    /// A fixed level in m/s.
    #[serde(untagged)]
    Value(f64),
}

/// The resolved parameters of the gradient stage.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Params {
    pub scheme: Scheme,
    /// Window and order of the least-squares scheme (5, 1: the 4-point
    /// stencil).
    pub ls_window: usize,
    pub ls_order: u32,
    /// The schemes `auto` chooses from, in tie-breaking order.
    pub candidates: Vec<DiffScheme>,
    pub velocity_noise: VelocityNoise,
    /// The error-correlation model when given; see `correlation_from_data`.
    pub correlation: Correlation,
    /// Estimate the correlation from each frame (`noise::estimate_overlap`,
    /// the default) instead of using `correlation`; the plan clears it when
    /// the user gives a correlation (a user setting wins).
    pub correlation_from_data: bool,
    /// The smoother (resolved by the smoothing section).
    pub smoother: Smoother,
    /// The quantities to make besides omega (names from `quantities::ALL`).
    pub quantities: Vec<&'static str>,
    /// Radius in nodes of the Gamma1/Gamma2 disc.
    pub gamma_radius: usize,
    /// Estimate the truncation error (`Quantity.bias`).
    pub truncation: bool,
}

impl Params {
    /// The least-squares scheme with this plan's window and order.
    pub fn least_squares(&self) -> DiffScheme {
        DiffScheme::LeastSquares {
            window: self.ls_window,
            order: self.ls_order,
        }
    }
}

impl Default for Params {
    fn default() -> Self {
        let ls = DiffScheme::LeastSquares {
            window: 5,
            order: 1,
        };
        Params {
            scheme: Scheme::Fixed(ls),
            ls_window: 5,
            ls_order: 1,
            candidates: vec![
                ls,
                DiffScheme::Central,
                DiffScheme::Richardson,
                DiffScheme::Circulation,
            ],
            velocity_noise: VelocityNoise::Estimate,
            correlation: Correlation::Independent,
            correlation_from_data: true,
            smoother: Smoother::None,
            quantities: quantities::ALL[1..].iter().map(|(n, _)| *n).collect(),
            gamma_radius: 2,
            truncation: true,
        }
    }
}

/// One derived quantity on the grid, NaN where it has no value.
#[derive(Debug, Clone)]
pub struct Quantity {
    /// Column stem, e.g. "omega", "div", "lambda_ci".
    pub name: &'static str,
    /// SI unit, e.g. "1/s".
    pub unit: &'static str,
    pub value: Array2<f64>,
    /// Propagated standard uncertainty of the instantaneous value.
    pub unc: Option<Array2<f64>>,
    /// Estimated truncation (bias) error, a systematic component: the
    /// standard uncertainty it contributes (non-negative, debiased).
    pub bias: Option<Array2<f64>>,
    /// The signed truncation estimate and its noise variance (present with
    /// `bias`): the statistics average the signed estimate, because the
    /// truncation of a mean is the mean of the truncations.
    pub trunc: Option<[Array2<f64>; 2]>,
    /// Expected shift of the value by measurement noise, where it has an
    /// analytic form (`quantities` module doc); NaN where it has none,
    /// `None` for the quantities that carry no uncertainty.
    pub shift: Option<Array2<f64>>,
}

/// Everything derived from one snapshot.
#[derive(Debug, Clone)]
pub struct Derived {
    /// The velocity the statistics use (smoothed when smoothing is on).
    pub u: Array2<f64>,
    pub v: Array2<f64>,
    /// Their standard uncertainties.
    pub u_unc: Array2<f64>,
    pub v_unc: Array2<f64>,
    /// Quantities in the order of `quantity_names`; "omega" is first.
    pub quantities: Vec<Quantity>,
    /// Noise level estimated from this frame (m/s), when it could be made
    /// (always attempted, whatever `velocity_noise` says).
    pub noise_estimate: Option<f64>,
    /// The noise level used for valid vectors (m/s; NaN when unknown).
    pub noise_used: f64,
    /// The error-correlation model used (given, or estimated from this
    /// frame; the given one when the estimate could not be made).
    pub correlation: Correlation,
    /// The PLS smoothing parameter applied to this frame (given, or its
    /// GCV choice); `None` for other smoothers.
    pub smoothing_s: Option<f64>,
    /// The scheme at each node as an index into `scheme_names`
    /// (`u8::MAX` where no derivative was taken).
    pub scheme_map: Array2<u8>,
    pub scheme_names: Vec<&'static str>,
    /// Nodes per scheme, in the order of `scheme_names`.
    pub scheme_counts: Vec<usize>,
    /// Nodes where an edge or a mask forced a narrower stencil.
    pub fallback_nodes: usize,
    /// Valid vectors without a sigma column value (`"columns"` only).
    pub sigma_fallback_nodes: usize,
    /// The instantaneous vorticity and its uncertainty from the run's
    /// instantaneous scheme map, with that map's counts per scheme (in the
    /// order of `scheme_names`), when it differs from the statistics' map
    /// and the run writes per-frame fields (`choice`), which show these.
    pub inst_omega: Option<([Array2<f64>; 2], Vec<usize>)>,
    /// With a smoother and `truncation` on: the signed smoothing-bias
    /// estimates of u and v with their noise variances, `[b_u, var(b_u),
    /// b_v, var(b_v)]` (`smoothing_bias`); the statistics carry them into
    /// `u_mean_unc` and `v_mean_unc` as the truncation of a derivative.
    pub vel_trunc: Option<[Array2<f64>; 4]>,
}

impl Derived {
    pub fn get(&self, name: &str) -> Option<&Quantity> {
        self.quantities.iter().find(|q| q.name == name)
    }
}

/// Names of the quantities `derive` produces with these parameters.
pub fn quantity_names(p: &Params) -> Vec<&'static str> {
    let mut v = vec!["omega"];
    for (n, _) in quantities::ALL.iter().skip(1) {
        if p.quantities.contains(n) {
            v.push(*n);
        }
    }
    v
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

/// Derives every quantity from a filled field (with `auto`, the scheme is
/// chosen from this frame alone; a run uses `derive_with`).
pub fn derive(p: &Params, field: &Field) -> Derived {
    derive_with(p, field, None, None)
}

/// Derives every quantity from a filled field; with `auto`, `choice` (the
/// run's scheme maps) fixes the scheme at each node, and `pilot` collects
/// every candidate's error estimates for making such a choice.
pub fn derive_with(
    p: &Params,
    field: &Field,
    choice: Option<&choice::Choice>,
    pilot: Option<&mut choice::Pilot>,
) -> Derived {
    let sh = field.status.dim();
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
    let masked = |a: &Array2<f64>| {
        Zip::from(a)
            .and(&ok)
            .map_collect(|&x, &o| if o { x } else { f64::NAN })
    };
    let (u, v) = (masked(&field.u), masked(&field.v));

    // Smoothing: values from the smoother, uncertainty through its stencil,
    // both cut by one rule (`stencil::cut`) at edges and masks. A PLS
    // smoother without s gets this frame's GCV choice first; a requested
    // smoother is never skipped.
    let frame_smoother = p.smoother.for_frame(&u, &v, &ok);
    let cut_rule = frame_smoother.cut_rule();
    let smoother: Option<Stencil> = match frame_smoother {
        Smoother::None => None,
        _ => Some(
            frame_smoother
                .equivalent_stencil()
                .expect("smoother resolved for the frame"),
        )
        .map(|s| {
            let sum: f64 = s.taps.iter().map(|t| t.w).sum();
            if sum.abs() > 1e-12 {
                s.scaled(1.0 / sum)
            } else {
                s
            }
        }),
    };
    // Without a smoother the smoothed velocity is the velocity itself.
    let smoothed: Option<[Array2<f64>; 4]> = match &smoother {
        None => None,
        Some(s) => {
            let us = masked(
                &frame_smoother
                    .apply(&u, &ok)
                    .as_standard_layout()
                    .to_owned(),
            );
            let vs = masked(
                &frame_smoother
                    .apply(&v, &ok)
                    .as_standard_layout()
                    .to_owned(),
            );
            let gain = corr.gain(s);
            let mut uu = Array2::from_elem(sh, f64::NAN);
            let mut vu = Array2::from_elem(sh, f64::NAN);
            for ((j, i), &o) in ok.indexed_iter() {
                if !o {
                    continue;
                }
                let (st, g) = if s.fits(j, i, &ok) {
                    (s.clone(), gain)
                } else {
                    match cut(s, cut_rule, &ok, j, i) {
                        Some(r) => {
                            let g = corr.gain(&r);
                            (r, g)
                        }
                        None => continue,
                    }
                };
                uu[[j, i]] = corr.variance_at(&st, g, &sig_u, j, i).sqrt();
                vu[[j, i]] = corr.variance_at(&st, g, &sig_v, j, i).sqrt();
            }
            Some([us, vs, uu, vu])
        }
    };
    let (us, vs) = match &smoothed {
        Some([a, b, _, _]) => (a, b),
        None => (&u, &v),
    };
    let vel_trunc = match (&smoother, p.truncation) {
        (Some(s), true) => Some(smoothing_bias::estimate(
            &frame_smoother,
            s,
            &ok,
            [us, vs],
            [&sig_u, &sig_v],
            &corr,
        )),
        _ => None,
    };

    let not_plain = summed_area(
        &Zip::from(&ok)
            .and(&sig_u)
            .and(&sig_v)
            .map_collect(|&o, &a, &b| !(o && a == level && b == level)),
    );
    let not_ok = summed_area(&ok.mapv(|o| !o));
    // The components the quantities need: b and c always (the vorticity,
    // and the scheme choice of `auto`); a and d for the others.
    let all = p.quantities.iter().any(|q| {
        matches!(
            quantities::Kind::of(q),
            Some(quantities::Kind::LambdaCi | quantities::Kind::Q | quantities::Kind::Stretching)
        )
    });
    let need = |k: quantities::Kind| {
        p.quantities
            .iter()
            .any(|q| quantities::Kind::of(q) == Some(k))
    };
    let need_a = all || need(quantities::Kind::Div) || need(quantities::Kind::Exx);
    let need_d = all || need(quantities::Kind::Div) || need(quantities::Kind::Eyy);
    let inp = Inputs {
        ok: &ok,
        us,
        vs,
        u: &u,
        v: &v,
        sig_u: &sig_u,
        sig_v: &sig_v,
        corr,
        smoother: smoother.as_ref(),
        smoother_cut: cut_rule,
        not_plain: &not_plain,
        not_ok: &not_ok,
        need: [need_a, true, true, need_d],
        sig_ref: (level, level),
        dx: field.grid.dx,
        dy: field.grid.dy,
        truncation: p.truncation,
    };
    let schemes: Vec<DiffScheme> = match p.scheme {
        Scheme::Fixed(s) => vec![s],
        Scheme::Auto => p.candidates.clone(),
    };
    let grads: Vec<Grad> = schemes.iter().map(|&s| gradient(s, &inp)).collect();
    if let Some(pl) = pilot {
        pl.push(&grads, &ok);
    }
    let choice = choice.filter(|_| grads.len() > 1);
    let counts = |map: &Array2<u8>| {
        let mut c = vec![0usize; schemes.len()];
        for &m in map.iter() {
            if (m as usize) < c.len() {
                c[m as usize] += 1;
            }
        }
        c
    };
    let inst_omega = choice.filter(|c| c.fields && c.inst != c.mean).map(|c| {
        let (om, map) = omega_from_map(&grads, &ok, &c.inst);
        (om, counts(&map))
    });
    let (g, scheme_map) = match choice {
        Some(c) => keep_map(grads, &ok, &c.mean),
        None => choose(grads, &ok),
    };
    let scheme_counts = counts(&scheme_map);

    let (gam1, gam2) = if p.quantities.iter().any(|q| q.starts_with("gamma")) {
        let (a, b) = quantities::gamma(us, vs, &ok, p.gamma_radius, field.grid.dx, field.grid.dy);
        (Some(a), Some(b))
    } else {
        (None, None)
    };
    // Tensor quantities in one pass over the nodes.
    let names = quantity_names(p);
    let kinds: Vec<(usize, quantities::Kind)> = names
        .iter()
        .enumerate()
        .filter_map(|(k, n)| quantities::Kind::of(n).map(|q| (k, q)))
        .collect();
    let n = sh.0 * sh.1;
    let mut cols: Vec<[Vec<f64>; 6]> = kinds
        .iter()
        .map(|_| std::array::from_fn(|_| vec![f64::NAN; n]))
        .collect();
    let flat = quantities::Flat::new(&g, p.truncation);
    let ok_s = ok.as_slice().expect("standard layout");
    for (c, &(_, kind)) in cols.iter_mut().zip(&kinds) {
        // One pass per quantity with its kind a constant in the loop (each
        // arm inlines `at` for one kind): evaluating the formula table per
        // node made the compiler compute every formula and select.
        #[inline(always)]
        fn pass(
            kind: quantities::Kind,
            flat: &quantities::Flat,
            ok: &[bool],
            c: &mut [Vec<f64>; 6],
        ) {
            let [c0, c1, c2, c3, c4, c5] = c;
            for (k, &o) in ok.iter().enumerate() {
                if o {
                    let x = quantities::at(kind, &flat.node(k));
                    c0[k] = x.val;
                    c1[k] = x.unc;
                    c2[k] = x.bias;
                    c3[k] = x.b;
                    c4[k] = x.vb;
                    c5[k] = x.shift;
                }
            }
        }
        use quantities::Kind as K;
        match kind {
            K::Omega => pass(K::Omega, &flat, ok_s, c),
            K::Div => pass(K::Div, &flat, ok_s, c),
            K::Exx => pass(K::Exx, &flat, ok_s, c),
            K::Eyy => pass(K::Eyy, &flat, ok_s, c),
            K::Exy => pass(K::Exy, &flat, ok_s, c),
            K::LambdaCi => pass(K::LambdaCi, &flat, ok_s, c),
            K::Q => pass(K::Q, &flat, ok_s, c),
            K::Stretching => pass(K::Stretching, &flat, ok_s, c),
        }
    }
    let mut cols = cols.into_iter();
    let arr = |v: Vec<f64>| Array2::from_shape_vec(sh, v).expect("grid shape");
    let mut out = Vec::with_capacity(names.len());
    let (mut gam1, mut gam2) = (gam1, gam2);
    for name in names {
        let unit = quantities::unit(name);
        match name {
            "gamma1" | "gamma2" => {
                let value = if name == "gamma1" {
                    gam1.take()
                } else {
                    gam2.take()
                };
                out.push(Quantity {
                    name,
                    unit,
                    value: value.expect("gamma computed"),
                    unc: None,
                    bias: None,
                    trunc: None,
                    shift: None,
                });
            }
            _ => {
                let [val, unc, bias, b, vb, shift] =
                    cols.next().expect("one column set per tensor quantity");
                out.push(Quantity {
                    name,
                    unit,
                    value: arr(val),
                    unc: Some(arr(unc)),
                    bias: p.truncation.then(|| arr(bias)),
                    trunc: p.truncation.then(|| [arr(b), arr(vb)]),
                    shift: Some(arr(shift)),
                });
            }
        }
    }
    let fallback_nodes = g.fallback;
    g.recycle();
    let [u, v, u_unc, v_unc] = smoothed.unwrap_or([u, v, sig_u, sig_v]);
    Derived {
        u,
        v,
        u_unc,
        v_unc,
        quantities: out,
        noise_estimate,
        noise_used: level,
        correlation: corr,
        smoothing_s: match frame_smoother {
            Smoother::Pls { s, .. } => s,
            _ => None,
        },
        scheme_map,
        scheme_names: schemes.iter().map(|s| s.name()).collect(),
        scheme_counts,
        fallback_nodes,
        sigma_fallback_nodes,
        inst_omega,
        vel_trunc,
    }
}

/// Whether `g` has both vorticity components at a node.
fn has_omega(g: &Grad, j: usize, i: usize) -> bool {
    g.val[1][[j, i]].is_finite() && g.val[2][[j, i]].is_finite()
}

/// The scheme a fixed map gives at a node: the map's, where that
/// candidate has a value there, else the first candidate that has one
/// (`u8::MAX`: none).
fn scheme_at(grads: &[Grad], map: &Array2<u8>, j: usize, i: usize) -> u8 {
    let m = map[[j, i]] as usize;
    if m < grads.len() && has_omega(&grads[m], j, i) {
        return m as u8;
    }
    grads
        .iter()
        .position(|g| has_omega(g, j, i))
        .map_or(u8::MAX, |k| k as u8)
}

/// The vorticity and its standard uncertainty under a fixed scheme map,
/// with the map as applied.
fn omega_from_map(
    grads: &[Grad],
    ok: &Array2<bool>,
    map: &Array2<u8>,
) -> ([Array2<f64>; 2], Array2<u8>) {
    let sh = ok.dim();
    let mut om = Array2::from_elem(sh, f64::NAN);
    let mut unc = Array2::from_elem(sh, f64::NAN);
    let mut used = Array2::from_elem(sh, u8::MAX);
    for ((j, i), &o) in ok.indexed_iter() {
        if !o {
            continue;
        }
        let m = scheme_at(grads, map, j, i);
        if m == u8::MAX {
            continue;
        }
        let n = quantities::Node::load(&grads[m as usize], j, i);
        let (val, var, _, _) = quantities::linear(&n, [0.0, -1.0, 1.0, 0.0]);
        om[[j, i]] = val;
        unc[[j, i]] = var.sqrt();
        used[[j, i]] = m;
    }
    ([om, unc], used)
}

/// Keeps, per node, the scheme of a fixed map (`scheme_at`).
///
/// Truncation of a scheme other than the first candidate (the reference,
/// least squares by default) is measured against the reference where the
/// reference has a value and an estimate: `b = (T_c - T_ref) + b_ref`, the
/// difference of the two schemes applied to the same data plus the
/// reference's own estimate, with noise variance `var_c + var_ref +
/// bvar_ref` (an upper bound: the two schemes' errors are positively
/// correlated). The degree-5 fit (`gradient`) estimates a second-order
/// scheme's leading error well but a fourth-order scheme's poorly where a
/// core spans few nodes: on a Lamb-Oseen core of 1.5 pitches, 60 frames,
/// the fit gave Richardson's mean truncation as 4 1/s where it was 25 1/s,
/// the reference route 27 1/s.
fn keep_map(mut grads: Vec<Grad>, ok: &Array2<bool>, map: &Array2<u8>) -> (Grad, Array2<u8>) {
    let sh = ok.dim();
    let mut used = Array2::from_elem(sh, u8::MAX);
    for ((j, i), m) in used.indexed_iter_mut() {
        if ok[[j, i]] {
            *m = scheme_at(&grads, map, j, i);
        }
    }
    if grads[0].has_truncation() {
        let (reference, others) = grads.split_first_mut().expect("candidates");
        for ((j, i), &m) in used.indexed_iter() {
            if m == u8::MAX || m == 0 {
                continue;
            }
            let g = &mut others[m as usize - 1];
            for c in 0..4 {
                let (tr, br) = (reference.val[c][[j, i]], reference.bias[c][[j, i]]);
                let (vr, bvr) = (reference.var[c][[j, i]], reference.bvar[c][[j, i]]);
                if tr.is_finite() && br.is_finite() && g.val[c][[j, i]].is_finite() {
                    g.bias[c][[j, i]] = g.val[c][[j, i]] - tr + br;
                    g.bvar[c][[j, i]] = g.var[c][[j, i]] + vr + bvr;
                }
            }
        }
    }
    let out = merge_by_map(&mut grads, &used);
    (out, used)
}

/// The first gradient with every node the map gives to another candidate
/// copied in from that candidate; recycles the others.
fn merge_by_map(grads: &mut Vec<Grad>, map: &Array2<u8>) -> Grad {
    let mut out = grads.remove(0);
    for ((j, i), &m) in map.indexed_iter() {
        if m == u8::MAX || m == 0 {
            continue;
        }
        let src = &grads[m as usize - 1];
        for c in 0..4 {
            out.val[c][[j, i]] = src.val[c][[j, i]];
            out.var[c][[j, i]] = src.var[c][[j, i]];
            if out.has_truncation() {
                out.bias[c][[j, i]] = src.bias[c][[j, i]];
                out.bvar[c][[j, i]] = src.bvar[c][[j, i]];
            }
        }
    }
    for g in grads.drain(..) {
        g.recycle();
    }
    out
}

/// The estimated total squared error of the vorticity of `g` at a node:
/// propagated variance plus the squared debiased truncation (the latter
/// taken as 0 where it could not be estimated).
fn omega_error2(g: &Grad, j: usize, i: usize) -> f64 {
    let n = quantities::Node::load(g, j, i);
    let (_, var, b, vb) = quantities::linear(&n, [0.0, -1.0, 1.0, 0.0]);
    let t = quantities::debias(b, vb);
    var + if t.is_finite() { t * t } else { 0.0 }
}

/// Keeps, per node, the scheme with the least estimated error averaged over
/// the node's 3 x 3 neighbourhood (a single scheme is kept whole).
fn choose(mut grads: Vec<Grad>, ok: &Array2<bool>) -> (Grad, Array2<u8>) {
    let sh = ok.dim();
    let has =
        |g: &Grad, j: usize, i: usize| g.val[1][[j, i]].is_finite() && g.val[2][[j, i]].is_finite();
    let mut map = Array2::from_elem(sh, u8::MAX);
    if grads.len() == 1 {
        let g = grads.pop().unwrap();
        for ((j, i), m) in map.indexed_iter_mut() {
            if ok[[j, i]] && has(&g, j, i) {
                *m = 0;
            }
        }
        return (g, map);
    }
    // Each scheme's estimated error, then its mean over the 3 x 3
    // neighbourhood: choosing by a node's own noisy estimate alone would
    // favour, node by node, whichever scheme's truncation happens to be
    // underestimated there (a selection bias that erodes coverage).
    let err: Vec<Array2<f64>> = grads
        .iter()
        .map(|g| {
            Array2::from_shape_fn(sh, |(j, i)| {
                if ok[[j, i]] && has(g, j, i) {
                    omega_error2(g, j, i)
                } else {
                    f64::NAN
                }
            })
        })
        .collect();
    let (ny, nx) = sh;
    for ((j, i), m) in map.indexed_iter_mut() {
        if !ok[[j, i]] {
            continue;
        }
        let mut best = (f64::INFINITY, u8::MAX);
        for (k, e) in err.iter().enumerate() {
            if !e[[j, i]].is_finite() {
                continue;
            }
            let (mut s, mut n) = (0.0, 0);
            for jj in j.saturating_sub(1)..(j + 2).min(ny) {
                for ii in i.saturating_sub(1)..(i + 2).min(nx) {
                    let x = e[[jj, ii]];
                    if x.is_finite() {
                        s += x;
                        n += 1;
                    }
                }
            }
            let mean = s / n as f64;
            if mean < best.0 || best.1 == u8::MAX {
                best = (mean, k as u8);
            }
        }
        *m = best.1;
    }
    let out = merge_by_map(&mut grads, &map);
    (out, map)
}
