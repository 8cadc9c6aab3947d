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
//! per validity pattern in the worker's `Workspace`.
//!
//! Layout: `velocity` (per-vector uncertainty, smoothing) -> `gradient`
//! (the tensor of one scheme, with `ops`, its axis operators, kept in a
//! `workspace`) -> `choice` (the scheme kept per node) -> `quantities`.

pub(crate) mod choice;
mod describe;
pub(crate) mod gradient;
pub(crate) mod noise;
mod ops;
pub mod quantities;
pub(crate) mod smoothing_bias;
mod velocity;
mod workspace;

#[cfg(test)]
pub(crate) mod flows;
#[cfg(test)]
mod tests;
#[cfg(test)]
mod tests_coverage;

use ndarray::{Array2, Zip};

use crate::field::Field;
use crate::stencil::correlation::Correlation;
use crate::stencil::derivatives::DiffScheme;
use crate::stencil::smooth::Smoother;

use gradient::{gradient, summed_area, Grad, Inputs};
use velocity::{Smoothing, Velocity};
pub use workspace::Workspace;

/// How the derivatives are taken. In the manifest a fixed scheme is its
/// `DiffScheme` (`{"name": "least-squares", "window": 5, "order": 1}`) and
/// auto is `{"name": "auto"}` (`describe`).
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Scheme {
    /// One scheme at every node (`[derivatives] scheme` = `central`,
    /// `richardson`, `least-squares` or `circulation`).
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
    /// The derivative scheme (`[derivatives] scheme`).
    pub scheme: Scheme,
    /// Window and order of the least-squares scheme (5, 1: the 4-point
    /// stencil).
    pub ls_window: usize,
    /// Polynomial order of the least-squares scheme (`[derivatives]
    /// order`, default 1).
    pub ls_order: u32,
    /// The schemes `auto` chooses from, in tie-breaking order.
    pub candidates: Vec<DiffScheme>,
    /// Where the per-vector random error comes from (`[uncertainty]
    /// velocity_noise`).
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
    pub(crate) fn least_squares(&self) -> DiffScheme {
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
    /// The instantaneous value at each node, in `unit`.
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
    /// The y velocity the statistics use, m/s (smoothed as `u`).
    pub v: Array2<f64>,
    /// Standard uncertainty of `u`, m/s.
    pub u_unc: Array2<f64>,
    /// Standard uncertainty of `v`, m/s.
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
    /// Names of the schemes `scheme_map` indexes (`least-squares`,
    /// `central`, …).
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
    /// The quantity with column stem `name` (`"omega"`, `"div"`, …);
    /// `None` when it was not made.
    pub fn get(&self, name: &str) -> Option<&Quantity> {
        self.quantities.iter().find(|q| q.name == name)
    }
}

/// Names of the quantities `derive` produces with these parameters.
pub(crate) fn quantity_names(p: &Params) -> Vec<&'static str> {
    let mut v = vec!["omega"];
    for (n, _) in quantities::ALL.iter().skip(1) {
        if p.quantities.contains(n) {
            v.push(*n);
        }
    }
    v
}

/// Derives every quantity from a filled field, with a fresh workspace
/// (with `auto`, the scheme is chosen from this frame alone). A loop over
/// frames keeps one `Workspace` and calls `derive_with`.
pub fn derive(p: &Params, field: &Field) -> Derived {
    derive_with(&mut Workspace::new(), p, field, None, None)
}

/// Derives every quantity from a filled field, with the worker's
/// workspace `ws` (operators, stencils and buffers kept between frames);
/// with `auto`, `choice` (the run's scheme maps) fixes the scheme at each
/// node, and `pilot` collects every candidate's error estimates for making
/// such a choice.
///
/// Steps: the velocity and its per-vector uncertainty (`velocity`), its
/// smoothing, the gradient tensor of every scheme (`gradient`), the
/// scheme kept at each node (`choice`), the quantities from the tensor
/// (`quantities`).
pub(crate) fn derive_with(
    ws: &mut Workspace,
    p: &Params,
    field: &Field,
    choice: Option<&choice::Choice>,
    pilot: Option<&mut choice::Pilot>,
) -> Derived {
    let vel = Velocity::of(p, field);
    let sm = Smoothing::of(p, &vel);
    let schemes: Vec<DiffScheme> = match p.scheme {
        Scheme::Fixed(s) => vec![s],
        Scheme::Auto => p.candidates.clone(),
    };
    let mut grads = gradients(ws, p, field, &vel, &sm, &schemes);
    if let Scheme::Fixed(s) = p.scheme {
        if p.truncation && s.truncation_from_reference() {
            // the fourth-order scheme's truncation, measured against the
            // reference as `auto` measures it (one extra tensor per frame)
            let mut r = gradients(ws, p, field, &vel, &sm, &[p.least_squares()]);
            let reference = r.pop().expect("one scheme");
            choice::against_reference(&reference, &mut grads[0]);
            reference.recycle(ws);
        }
    }
    if let Some(pl) = pilot {
        pl.push(&grads, &vel.ok);
    }
    let kept = choice::keep(ws, grads, &vel.ok, choice);
    let (us, vs) = sm.velocity(&vel);
    let quantities = quantities_of(p, &kept.grad, us, vs, &vel.ok, field);
    let fallback_nodes = kept.grad.fallback;
    kept.grad.recycle(ws);
    let [u, v, u_unc, v_unc] = sm.smoothed.unwrap_or([vel.u, vel.v, vel.sig_u, vel.sig_v]);
    Derived {
        u,
        v,
        u_unc,
        v_unc,
        quantities,
        noise_estimate: vel.noise_estimate,
        noise_used: vel.level,
        correlation: vel.corr,
        smoothing_s: match sm.smoother {
            Smoother::Pls { s, .. } => s,
            _ => None,
        },
        scheme_map: kept.map,
        scheme_names: schemes.iter().map(|s| s.name()).collect(),
        scheme_counts: kept.counts,
        fallback_nodes,
        sigma_fallback_nodes: vel.sigma_fallback_nodes,
        inst_omega: kept.inst_omega,
        vel_trunc: sm.vel_trunc,
    }
}

/// The gradient tensor of every scheme in `schemes`, of the (smoothed)
/// velocity, with the components the quantities of `p` need.
fn gradients(
    ws: &mut Workspace,
    p: &Params,
    field: &Field,
    vel: &Velocity,
    sm: &Smoothing,
    schemes: &[DiffScheme],
) -> Vec<Grad> {
    let ok = &vel.ok;
    let (us, vs) = sm.velocity(vel);
    let not_plain = summed_area(
        &Zip::from(ok)
            .and(&vel.sig_u)
            .and(&vel.sig_v)
            .map_collect(|&o, &a, &b| !(o && a == vel.level && b == vel.level)),
    );
    let not_ok = summed_area(&ok.mapv(|o| !o));
    // The components the quantities need: b and c always (the vorticity,
    // and the scheme choice of `auto`); a and d for the others.
    use quantities::Kind as K;
    let need = |k: K| p.quantities.iter().any(|q| K::of(q) == Some(k));
    let all = need(K::LambdaCi) || need(K::Q) || need(K::Stretching);
    let need_a = all || need(K::Div) || need(K::Exx);
    let need_d = all || need(K::Div) || need(K::Eyy);
    let inp = Inputs {
        ok,
        us,
        vs,
        u: &vel.u,
        v: &vel.v,
        sig_u: &vel.sig_u,
        sig_v: &vel.sig_v,
        corr: vel.corr,
        smoother: sm.stencil.as_ref(),
        smoother_cut: sm.cut,
        not_plain: &not_plain,
        not_ok: &not_ok,
        need: [need_a, true, true, need_d],
        sig_ref: (vel.level, vel.level),
        dx: field.grid.dx,
        dy: field.grid.dy,
        truncation: p.truncation,
    };
    schemes.iter().map(|&s| gradient(ws, s, &inp)).collect()
}

/// The quantities of `p` in the order of `quantity_names`: the tensor
/// quantities from `g`, Gamma1 and Gamma2 from the velocity `us`, `vs`.
fn quantities_of(
    p: &Params,
    g: &Grad,
    us: &Array2<f64>,
    vs: &Array2<f64>,
    ok: &Array2<bool>,
    field: &Field,
) -> Vec<Quantity> {
    let (mut gam1, mut gam2) = if p.quantities.iter().any(|q| q.starts_with("gamma")) {
        let (a, b) = quantities::gamma(us, vs, ok, p.gamma_radius, field.grid.dx, field.grid.dy);
        (Some(a), Some(b))
    } else {
        (None, None)
    };
    let names = quantity_names(p);
    let kinds: Vec<quantities::Kind> = names
        .iter()
        .filter_map(|n| quantities::Kind::of(n))
        .collect();
    let mut cols = tensor_columns(&kinds, g, ok, p.truncation).into_iter();
    let arr = |v: Vec<f64>| Array2::from_shape_vec(ok.dim(), v).expect("grid shape");
    let mut out = Vec::with_capacity(names.len());
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
    out
}

/// The columns `[value, unc, bias, b, vb, shift]` of each tensor quantity
/// of `kinds`, flat in row-major order (NaN where `ok` is false).
fn tensor_columns(
    kinds: &[quantities::Kind],
    g: &Grad,
    ok: &Array2<bool>,
    truncation: bool,
) -> Vec<[Vec<f64>; 6]> {
    let n = ok.len();
    let mut cols: Vec<[Vec<f64>; 6]> = kinds
        .iter()
        .map(|_| std::array::from_fn(|_| vec![f64::NAN; n]))
        .collect();
    let flat = quantities::Flat::new(g, truncation);
    let ok_s = ok.as_slice().expect("standard layout");
    for (c, &kind) in cols.iter_mut().zip(kinds) {
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
    cols
}
