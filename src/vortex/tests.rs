//! Checks of the vortex analysis against analytic flows (sources beside
//! each): synth's convecting street of Lamb-Oseen vortices, a single
//! Lamb-Oseen vortex with seeded noise, and a Lamb-Oseen vortex diffusing
//! in still fluid through the budget.

use ndarray::Array2;
use rand::Rng;
use rand_distr::StandardNormal;

use super::corr::OmegaCorrelation;
use super::{find_cores, track, Params, Slice, SliceCores, SliceKind};
use crate::field::Grid;
use crate::stencil::correlation::Correlation;
use crate::stencil::derivatives::{central, Axis};
use crate::synth::flows::{lamb_oseen, vortex_street, Sample, Street};
use crate::testutil::rng;

/// A field sampled on a grid with independent normal noise `sigma` on u
/// and v, and its central-difference vorticity (NaN on the edge) with the
/// propagated uncertainty `sigma / h` (derived: four taps of weight 1/2h).
struct Sampled {
    grid: Grid,
    u: Vec<f64>,
    v: Vec<f64>,
    omega: Vec<f64>,
    omega_unc: Vec<f64>,
    /// The velocity noise `sigma` at every node.
    vel_unc: Vec<f64>,
    truth: Vec<f64>,
}

fn sample(g: Grid, f: &dyn Fn(f64, f64) -> Sample, sigma: f64, r: &mut impl Rng) -> Sampled {
    let mut noise = || sigma * r.sample::<f64, _>(StandardNormal);
    let (mut u, mut v, mut truth) = (Vec::new(), Vec::new(), Vec::new());
    for j in 0..g.ny {
        for i in 0..g.nx {
            let s = f(g.x(i), g.y(j));
            u.push(s.u + noise());
            v.push(s.v + noise());
            truth.push(s.omega);
        }
    }
    let h = g.dx;
    let mut omega = vec![f64::NAN; g.len()];
    for j in 1..g.ny - 1 {
        for i in 1..g.nx - 1 {
            let k = j * g.nx + i;
            omega[k] = (v[k + 1] - v[k - 1]) / (2.0 * h) - (u[k + g.nx] - u[k - g.nx]) / (2.0 * h);
        }
    }
    Sampled {
        grid: g,
        u,
        v,
        omega,
        omega_unc: vec![sigma / h; g.len()],
        vel_unc: vec![sigma; g.len()],
        truth,
    }
}

fn central_corr(h: f64) -> OmegaCorrelation {
    OmegaCorrelation::from_stencils(
        &central(Axis::X, h),
        &central(Axis::Y, h),
        Correlation::Independent,
    )
}

fn slice(s: &Sampled, kind: SliceKind, time_s: f64) -> Slice<'_> {
    Slice {
        kind,
        time_s,
        grid: s.grid,
        u: &s.u,
        v: &s.v,
        omega: &s.omega,
        omega_unc: &s.omega_unc,
        u_unc: &s.vel_unc,
        v_unc: &s.vel_unc,
    }
}

/// The demo street (synth's wake at 0.15 m/s behind a 10 mm cylinder) on a
/// 1 mm grid from 20 to 100 mm downstream; `nu` sets the core growth.
fn street(nu: f64) -> (Street, Grid, f64) {
    let (u, d, st) = (0.15, 0.01, 0.21);
    let s = Street::behind_cylinder(u, d, st, 0.85, 0.281, 0.25, nu, 0.1);
    let g = Grid {
        nx: 81,
        ny: 41,
        x0: 0.02,
        y0: -0.02,
        dx: 1e-3,
        dy: 1e-3,
    };
    (s, g, st * u / d)
}

/// Cores of the street's 12 phase-bin fields (bin-centre snapshots).
fn street_bins(s: &Street, g: Grid, f: f64, sigma: f64, seed: u64) -> Vec<(Sampled, f64)> {
    let mut r = rng(seed);
    (0..12)
        .map(|b| {
            let deg = 15.0 + 30.0 * b as f64;
            let vs = s.vortices(deg.to_radians());
            let f_at = |x, y| vortex_street(x, y, s, &vs);
            (sample(g, &f_at, sigma, &mut r), deg / 360.0 / f)
        })
        .collect()
}

fn cores_of(bins: &[(Sampled, f64)], p: &Params) -> Vec<SliceCores> {
    let corr = central_corr(bins[0].0.grid.dx);
    bins.iter()
        .enumerate()
        .map(|(b, (s, t))| {
            let kind = SliceKind::Bin {
                bin: b,
                phase_deg: 15.0 + 30.0 * b as f64,
            };
            SliceCores {
                kind,
                time_s: *t,
                cores: find_cores(&slice(s, kind, *t), p, 2, &corr),
            }
        })
        .collect()
}

#[test]
fn street_convection_speed_within_2_percent_and_core_growth_4_nu() {
    // synth's street (src/synth/flows.rs): every vortex moves at Uc = 0.85 U
    // exactly, and its core spreads as rc^2 = rc0^2 + 4 nu age
    // (Lamb-Oseen, Saffman 1992 §1.3). nu = 1e-5 m²/s makes the growth
    // large over one period.
    let nu = 1e-5;
    let (s, g, f) = street(nu);
    let bins = street_bins(&s, g, f, 0.0, 1);
    let seq = cores_of(&bins, &Params::default());
    let tracks = track::track(&seq, 3.0 * g.dx, Some(1.0 / f));
    // Each vortex crosses the 80 mm window in two periods (a = 40 mm): with
    // the periodic join one track per row holds about 24 points.
    let long: Vec<&track::Track> = tracks.iter().filter(|t| t.points.len() >= 12).collect();
    let lens: Vec<usize> = tracks.iter().map(|t| t.points.len()).collect();
    assert!(
        long.iter().any(|t| t.sign > 0) && long.iter().any(|t| t.sign < 0),
        "tracks: {lens:?}"
    );
    for t in &long {
        let [ux, uy] = t.velocity.expect("velocity");
        eprintln!(
            "track {} ({} points, sign {}): u {:.5} ± {:.2e} (Uc {:.5}), v {:.2e}, growth {:.3e} ± {:.1e} (4 nu {:.1e})",
            t.id,
            t.points.len(),
            t.sign,
            ux.value,
            ux.unc,
            s.uc,
            uy.value,
            t.growth.map_or(f64::NAN, |g| g.value),
            t.growth.map_or(f64::NAN, |g| g.unc),
            4.0 * nu
        );
        assert!(
            (ux.value / s.uc - 1.0).abs() < 0.02,
            "convection {} vs {}",
            ux.value,
            s.uc
        );
        assert!(uy.value.abs() < 0.02 * s.uc, "cross-stream {}", uy.value);
        let gr = t.growth.expect("growth");
        assert!(
            (gr.value / (4.0 * nu) - 1.0).abs() < 0.1,
            "growth {} vs {}",
            gr.value,
            4.0 * nu
        );
    }
}

/// A square grid of `n` nodes a side and pitch `h`, centred on the origin.
fn square(n: usize, h: f64) -> Grid {
    let x0 = -0.5 * (n - 1) as f64 * h;
    Grid {
        nx: n,
        ny: n,
        x0,
        y0: x0,
        dx: h,
        dy: h,
    }
}

/// What the Lamb-Oseen Monte Carlo collects per seed.
#[derive(Default)]
struct LambOseenSeeds {
    /// Circulation of the core minus the estimator's own target.
    errs: Vec<f64>,
    /// Its reported uncertainty, and the one with independent nodes.
    uncs: Vec<f64>,
    uncs_indep: Vec<f64>,
    /// Seeds whose error is within 2 reported uncertainties.
    in_k2: usize,
    /// (region circulation, G0 (1 - exp(-R²/rc²)) of its equivalent radius).
    windows: Vec<(f64, f64)>,
    /// Relative truncation of the discrete circulation.
    truncation: Vec<f64>,
    /// (value, uncertainty) of the fitted Gamma and rc.
    fit_g: Vec<(f64, f64)>,
    fit_rc: Vec<(f64, f64)>,
}

/// 200 seeds of the vortex `f` (G0 `g0`, radius `rc`) with noise `sigma`
/// on grid `g`; `clean` the noise-free sample.
fn lamb_oseen_seeds(
    g: Grid,
    f: &dyn Fn(f64, f64) -> Sample,
    (g0, rc, sigma): (f64, f64, f64),
    clean: &Sampled,
    corr: &OmegaCorrelation,
    r: &mut impl Rng,
) -> LambOseenSeeds {
    let h = g.dx;
    let mut m = LambOseenSeeds::default();
    for _ in 0..200 {
        let s = sample(g, f, sigma, r);
        let cores = find_cores(
            &slice(&s, SliceKind::Mean, f64::NAN),
            &Params::default(),
            2,
            corr,
        );
        assert_eq!(cores.len(), 1, "one core");
        let c = &cores[0];
        let target: f64 = c.nodes.iter().map(|&k| clean.omega[k]).sum::<f64>() * h * h;
        let truth: f64 = c.nodes.iter().map(|&k| s.truth[k]).sum::<f64>() * h * h;
        m.truncation.push((target - truth) / truth);
        let e = c.circulation - target;
        m.in_k2 += usize::from(e.abs() <= 2.0 * c.circulation_unc);
        m.errs.push(e);
        m.uncs.push(c.circulation_unc);
        let sig = vec![sigma / h; c.nodes.len()];
        let ones = vec![1.0; c.nodes.len()];
        let indep = OmegaCorrelation::independent().variance(&c.nodes, &ones, &sig, g.nx);
        m.uncs_indep.push(indep.sqrt() * h * h);
        m.windows.push((
            c.circulation,
            g0 * (1.0 - (-(c.radius_eq / rc).powi(2)).exp()),
        ));
        let fit = c.fit.expect("fit");
        m.fit_g.push((fit.gamma, fit.gamma_unc));
        m.fit_rc.push((fit.rc, fit.rc_unc));
    }
    m
}

#[test]
fn lamb_oseen_circulation_within_its_uncertainty_and_what_the_window_misses() {
    // Lamb-Oseen (Saffman 1992 §1.3): omega = G0/(pi rc²) exp(-r²/rc²);
    // circulation inside r is G0 (1 - exp(-r²/rc²)). rc = 5 pitches,
    // noise 2 % of the peak swirl on each component, 200 seeds.
    let (g0, rc, h) = (2e-3, 5e-3, 1e-3);
    let g = square(41, h);
    let corr = central_corr(h);
    let f = |x, y| lamb_oseen(x, y, 0.2e-3, -0.1e-3, g0, rc);
    let sigma = 0.02 * 0.638 * g0 / (2.0 * std::f64::consts::PI * rc);
    // The estimator's own target: the central-difference vorticity of the
    // noise-free field (its truncation is checked apart below).
    let mut r = rng(7);
    let clean = sample(g, &f, 0.0, &mut r);
    let m = lamb_oseen_seeds(g, &f, (g0, rc, sigma), &clean, &corr, &mut r);
    let (errs, in_k2) = (&m.errs, m.in_k2);
    let n = errs.len() as f64;
    let mean_e = errs.iter().sum::<f64>() / n;
    let sd = (errs.iter().map(|e| (e - mean_e).powi(2)).sum::<f64>() / (n - 1.0)).sqrt();
    let u = m.uncs.iter().sum::<f64>() / n;
    let (gam, win) = m.windows[0];
    eprintln!(
        "circulation: scatter {sd:.3e}, reported {u:.3e} (ratio {:.3}), bias {mean_e:.2e}; within k=2: {in_k2}/200; region {gam:.4e} vs G0(1-exp(-R²/rc²)) {win:.4e} (G0 {g0:.1e})",
        sd / u
    );
    // Monte Carlo: the propagated uncertainty with the stencil correlation
    // matches the scatter within 15 %; independent nodes overstate it.
    let ui = m.uncs_indep.iter().sum::<f64>() / n;
    eprintln!("scatter / independent-node uncertainty: {:.3}", sd / ui);
    assert!((sd / u - 1.0).abs() < 0.15, "scatter {sd} vs reported {u}");
    assert!(sd / ui < 0.7, "independent nodes: scatter {sd} vs {ui}");
    // A small bias from selection (noise that raises |Gamma2| adds a node):
    // measured +0.39 u, 0.1 % of the circulation.
    assert!(mean_e.abs() < 0.6 * u, "bias {mean_e} vs u {u}");
    assert!(in_k2 >= 180, "{in_k2} of 200 within k = 2");
    // Truncation of the discrete circulation against the analytic vorticity
    // summed on the same nodes, at rc = 5 pitches: below 1.5 % (measured
    // -0.9 %; O(h²/rc²)). Pipelines carry it in omega_mean_unc's systematic
    // part (the truncation estimate, docs/uncertainty.md).
    let tr = m.truncation.iter().fold(0.0f64, |m, t| m.max(t.abs()));
    eprintln!(
        "truncation of the region circulation: {:.3} %",
        100.0 * m.truncation[0]
    );
    assert!(tr < 0.015, "truncation {tr}");
    // The window: the region holds G0 (1 - exp(-R²/rc²)) within 3 %, about
    // 70 % of G0 (Gamma2 > 2/pi ends near r = 1.1 rc).
    for (gam, win) in &m.windows {
        assert!((gam / win - 1.0).abs() < 0.03, "region {gam} vs {win}");
        assert!(*gam > 0.6 * g0 && *gam < 0.8 * g0, "region {gam} of {g0}");
    }
    fit_extrapolates_to_the_whole_vortex(&clean, &corr, (g0, rc), &m);
}

/// The fit extrapolates to the whole vortex: on the noise-free field it
/// returns G0 and rc within 1.5 % (the rest is the central differences'
/// truncation at rc = 5 pitches: measured +0.02 % and +1.0 %); with noise,
/// its reported uncertainties cover the scatter about that (3 u, 95 % of
/// seeds).
fn fit_extrapolates_to_the_whole_vortex(
    clean: &Sampled,
    corr: &OmegaCorrelation,
    (g0, rc): (f64, f64),
    m: &LambOseenSeeds,
) {
    let (fit_g, fit_rc) = (&m.fit_g, &m.fit_rc);
    let n = fit_g.len() as f64;
    let cf = find_cores(
        &slice(clean, SliceKind::Mean, f64::NAN),
        &Params::default(),
        2,
        corr,
    )[0]
    .fit
    .expect("clean fit");
    eprintln!(
        "fit: noise-free gamma {:.5e} rc {:.5e}; one seed {:?}, {:?}",
        cf.gamma, cf.rc, fit_g[0], fit_rc[0]
    );
    assert!((cf.gamma / g0 - 1.0).abs() < 0.015 && (cf.rc / rc - 1.0).abs() < 0.015);
    let z = |v: &[(f64, f64)], t: f64| v.iter().filter(|(a, u)| (a - t).abs() <= 3.0 * u).count();
    let spread = |v: &[(f64, f64)], t: f64| {
        let s = (v.iter().map(|(a, _)| (a - t).powi(2)).sum::<f64>() / n).sqrt();
        s / (v.iter().map(|(_, u)| u).sum::<f64>() / n)
    };
    eprintln!(
        "fit scatter / reported: gamma {:.3}, rc {:.3}",
        spread(fit_g, cf.gamma),
        spread(fit_rc, cf.rc)
    );
    assert!(
        z(fit_g, cf.gamma) >= 190,
        "fit gamma within 3 u: {}",
        z(fit_g, cf.gamma)
    );
    assert!(
        z(fit_rc, cf.rc) >= 190,
        "fit rc within 3 u: {}",
        z(fit_rc, cf.rc)
    );
}

/// Per seed, (value, reported uncertainty) of five integrated terms.
type Row = [(f64, f64); 5];

/// Seeds of the diffusing core's Monte Carlo.
const SEEDS: u64 = 200;

#[test]
fn circulation_budget_of_a_diffusing_lamb_oseen_core_sums_to_zero() {
    // A Lamb-Oseen vortex diffusing in still fluid (Saffman 1992 §1.3):
    // d omega/dt = nu lap omega, so over a fixed region the circulation
    // budget is unsteady = diffusion and the residual is zero within its
    // uncertainty; advection and stretching vanish.
    let nu = 1e-6;
    let (g0, rc0, h) = (2e-4, 4e-3, 0.5e-3);
    let g = square(41, h);
    // per seed: (value, reported uncertainty) of unsteady, advection,
    // stretching, diffusion and the residual
    let mut mc: Vec<[(f64, f64); 5]> = Vec::new();
    for seed in 0..SEEDS {
        mc.push(diffusing_core_budget(g, (g0, rc0, nu), seed));
    }
    // The residual and unsteady - diffusion within k = 2 and 3 of their
    // uncertainties; advection (zero in the flow) within k = 3.
    let within = |f: &dyn Fn(&Row) -> f64, k: f64| mc.iter().filter(|x| f(x).abs() < k).count();
    let z_res = |x: &[(f64, f64); 5]| x[4].0 / x[4].1;
    let z_bal = |x: &[(f64, f64); 5]| (x[0].0 - x[3].0) / x[0].1.hypot(x[3].1);
    let z_adv = |x: &[(f64, f64); 5]| x[1].0 / x[1].1;
    let worst = mc.iter().map(|x| z_res(x).abs()).fold(0.0, f64::max);
    let mean_z = mc.iter().map(z_res).sum::<f64>() / mc.len() as f64;
    eprintln!(
        "residual within k=2: {}, k=3: {}; balance within k=2: {}, k=3: {}; advection within k=3: {}; mean residual / u {mean_z:.3}",
        within(&z_res, 2.0),
        within(&z_res, 3.0),
        within(&z_bal, 2.0),
        within(&z_bal, 3.0),
        within(&z_adv, 3.0)
    );
    // Measured: residual 184 and 200 of 200 within k = 2 and 3 (normal:
    // 191 and 199.5), balance 186 and 200, advection 200 within k = 3; the
    // mean residual is +0.35 u (the stencils' truncation, constant over seeds).
    assert!(within(&z_res, 2.0) >= 180 && within(&z_res, 3.0) >= 197);
    assert!(within(&z_bal, 2.0) >= 180 && within(&z_bal, 3.0) >= 197);
    assert!(within(&z_adv, 3.0) >= 197);
    // Monte Carlo (GUM Supplement 1, JCGM 101:2008, checks a first-order
    // propagation by sampling): each integrated term's reported uncertainty
    // against its scatter over the seeds. The uncertainty is the variance of
    // the term's linear functional of the velocity samples (budget::integral),
    // so the telescoping of the Laplacian's area integral into a boundary
    // flux is carried. With node errors taken as independent the diffusion's
    // and residual's scatter were 0.16 and 0.15 of the reported uncertainty.
    // The scatter of a standard deviation over SEEDS samples is about
    // 1/sqrt(2 (SEEDS - 1)) = 5 %, so 15 % is three of its standard errors.
    // Measured (200 seeds, noise 1e-5 m/s, rc = 8 pitches, central
    // differences): unsteady 1.008, advection 0.909, stretching 0.933,
    // diffusion 1.073, residual 1.057.
    let names = [
        "unsteady",
        "advection",
        "stretching",
        "diffusion",
        "residual",
    ];
    let ratios = mc_ratios(&mc);
    eprintln!("largest |residual| / u over {SEEDS} seeds: {worst:.2}; scatter / reported: {names:?} {ratios:.3?}");
    for (name, r) in names.iter().zip(ratios) {
        assert!((r - 1.0).abs() < 0.15, "{name}: scatter / reported {r}");
    }
}

/// Scatter over seeds / root-mean-square reported uncertainty, per column.
fn mc_ratios<const N: usize>(mc: &[[(f64, f64); N]]) -> [f64; N] {
    let n = mc.len() as f64;
    std::array::from_fn(|t| {
        let m = mc.iter().map(|x| x[t].0).sum::<f64>() / n;
        let sd = (mc.iter().map(|x| (x[t].0 - m).powi(2)).sum::<f64>() / (n - 1.0)).sqrt();
        let u = (mc.iter().map(|x| x[t].1 * x[t].1).sum::<f64>() / n).sqrt();
        sd / u
    })
}

/// One seed of the diffusing core (`G0`, `rc0`, `nu`): three frames half a
/// second apart with noise 1e-5 m/s, reduced to the core's budget row:
/// (value, reported uncertainty) of unsteady, advection, stretching,
/// diffusion and the residual.
fn diffusing_core_budget(g: Grid, (g0, rc0, nu): (f64, f64, f64), seed: u64) -> Row {
    use crate::budget::acc::{BudgetAcc, Frame};
    let p = crate::budget::Params {
        frames: vec![1],
        ..crate::budget::Params::default()
    };
    let mut acc = BudgetAcc::new(&p, &crate::stats::Params::default(), g, None);
    let mut r = rng(100 + seed);
    let sigma = 1e-5;
    for n in 0..3u64 {
        let t = 5.0 + n as f64 * 0.5;
        let rc = (rc0 * rc0 + 4.0 * nu * t).sqrt();
        let s = sample(g, &|x, y| lamb_oseen(x, y, 0.0, 0.0, g0, rc), sigma, &mut r);
        let arr = |d: &[f64]| Array2::from_shape_vec(g.shape(), d.to_vec()).unwrap();
        let var = Array2::from_elem(g.shape(), sigma * sigma);
        let frame = Frame {
            index: n,
            time_s: t,
            phase_deg: None,
        };
        acc.push_fields(&frame, &arr(&s.u), &arr(&s.v), &var, &var);
    }
    let b = crate::budget::terms::finish(&acc, Some(nu), None);
    let rows =
        super::budget::core_budgets(&b, &Params::default(), 2, None, Correlation::Independent);
    assert_eq!(rows.len(), 1, "one core");
    let c = &rows[0];
    let row = [
        (c.value[0], c.unc[0]),
        (c.value[1], c.unc[1]),
        (c.value[2], c.unc[2]),
        (c.value[3], c.unc[3]),
        (c.residual, c.residual_unc),
    ];
    if seed < 3 {
        eprintln!(
            "seed {seed}: circulation {:.3e}, unsteady {:.3e} ± {:.1e}, diffusion {:.3e} ± {:.1e}, advection {:.1e} ± {:.1e}, stretching {:.1e} ± {:.1e}, residual {:.2e} ± {:.1e}",
            c.circulation, c.value[0], c.unc[0], c.value[3], c.unc[3], c.value[1], c.unc[1], c.value[2], c.unc[2], c.residual, c.residual_unc
        );
    }
    assert!(c.residual_unc > 0.0 && c.residual_unc.is_finite());
    row
}
