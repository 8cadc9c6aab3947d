//! Checks of the gradient stage against analytic flows and hand-derived
//! values (each names its source).

use std::f64::consts::PI;

use ndarray::Array2;

use super::flows::{cylinder, lamb_oseen, lamb_oseen_omega, linear, taylor_green};
use super::*;
use crate::field::{Grid, FILLED, MASKED};
use crate::stencil::derivatives::{one_sided2, Axis};
use crate::testutil::assert_close;

fn grid(n: usize, h: f64) -> Grid {
    Grid {
        nx: n,
        ny: n,
        x0: 0.0,
        y0: 0.0,
        dx: h,
        dy: h,
    }
}

fn params(scheme: DiffScheme, noise: f64) -> Params {
    Params {
        scheme: Scheme::Fixed(scheme),
        velocity_noise: VelocityNoise::Value(noise),
        ..Params::default()
    }
}

const LS: DiffScheme = DiffScheme::LeastSquares {
    window: 5,
    order: 1,
};
const FIXED: [DiffScheme; 5] = [
    DiffScheme::Central,
    DiffScheme::Richardson,
    LS,
    DiffScheme::LeastSquares {
        window: 7,
        order: 3,
    },
    DiffScheme::Circulation,
];

#[test]
fn solid_body_rotation_gives_two_omega_everywhere() {
    // docs/methods.md (fact of the trade): omega = 2 Omega, lambda_ci = Omega,
    // Q = Omega^2, Gamma2 = 1. Every stencil of every chain is exact for a
    // linear field, so this holds at edge nodes too.
    let om = 3.5;
    let g = grid(20, 1e-3);
    let fld = Field::from_fn(g, linear(om, 0.0, 0.0095, 0.0095));
    for s in FIXED {
        let d = derive(&params(s, 0.0), &fld);
        let q = |n: &str| d.get(n).unwrap();
        for j in 0..20 {
            for i in 0..20 {
                let w = format!("{s:?} at ({j},{i})");
                assert_close(q("omega").value[[j, i]], 2.0 * om, 1e-9, 0.0, &w);
                assert_close(q("div").value[[j, i]], 0.0, 1e-9, 0.0, &w);
                assert_close(q("lambda_ci").value[[j, i]], om, 1e-7, 0.0, &w);
                assert_close(q("q").value[[j, i]], om * om, 1e-7, 0.0, &w);
                assert_close(q("stretching").value[[j, i]], 0.0, 1e-7, 0.0, &w);
                // Gamma2 = 1 wherever the disc is full (radius 2).
                if (2..18).contains(&j) && (2..18).contains(&i) {
                    assert_close(q("gamma2").value[[j, i]], 1.0, 1e-12, 0.0, &w);
                }
                // The truncation estimate of a linear field is zero; where
                // no fit could be made (next to an edge) it is unknown, NaN, never
                // a 0 made from NaN (issue #11 item 9), and only there.
                let b = q("omega").bias.as_ref().unwrap()[[j, i]];
                if b.is_nan() {
                    assert!(j.min(19 - j).min(i).min(19 - i) < 2, "{w}: NaN bias inside");
                } else {
                    assert_close(b, 0.0, 1e-6, 0.0, &w);
                }
            }
        }
    }
}

#[test]
fn gamma2_of_rotation_against_strain_matches_the_angle_average() {
    // docs/methods.md (derived for a linear field, uniform angles): Gamma2 = 2/pi
    // at Omega = mu, 0.93422 at Omega = 2 mu. On a disc of nodes the angles
    // are nearly uniform: radius 2 is within 0.3 % and 0.5 %, radius 6
    // within 0.7 % and 0.2 % (derived by summing the disc's nodes).
    for (radius, tol) in [(2, [3e-3, 5.5e-3]), (6, [7e-3, 2e-3])] {
        let n = 2 * radius + 5;
        let g = grid(n, 1e-3);
        let c = (n / 2) as f64 * 1e-3;
        for (k, (om, want)) in [(1.0, 2.0 / PI), (2.0, 0.93422)].into_iter().enumerate() {
            let fld = Field::from_fn(g, linear(om, 1.0, c, c));
            let p = Params {
                gamma_radius: radius,
                ..params(LS, 0.0)
            };
            let d = derive(&p, &fld);
            let got = d.get("gamma2").unwrap().value[[n / 2, n / 2]];
            assert_close(
                got,
                want,
                0.0,
                tol[k],
                &format!("radius {radius}, Omega/mu {om}"),
            );
        }
    }
}

#[test]
fn taylor_green_transfer_functions_at_quarter_pi() {
    // docs/methods.md (derived): at kh = pi/4 the discrete vorticity over the
    // exact one is sin(kh)/kh = 0.90032 (central), (sin kh + 2 sin 2kh)/(5kh)
    // = 0.68936 (least squares), (8 sin kh - sin 2kh)/(6kh) = 0.98822
    // (Richardson); circulation adds the (1 + cos kh)/2 = 0.85355 of its
    // (1, 2, 1)/4 weighting across: 0.76849 (derived).
    let h = 1e-3;
    let k = PI / 4.0 / h;
    let g = grid(24, h);
    let fld = Field::from_fn(g, taylor_green(0.7, k));
    for (s, want) in [
        (DiffScheme::Central, 0.90032),
        (LS, 0.68936),
        (DiffScheme::Richardson, 0.98822),
        (
            DiffScheme::Circulation,
            0.90032 * (1.0 + (PI / 4.0).cos()) / 2.0,
        ),
    ] {
        let d = derive(&params(s, 0.0), &fld);
        // (10, 10): sin(k x) sin(k y) = sin(10 pi/4)^2 = 1.
        let exact = 2.0 * 0.7 * k * (k * 10.0 * h).sin().powi(2);
        let got = d.get("omega").unwrap().value[[10, 10]] / exact;
        assert_close(got, want, 1e-5, 0.0, &format!("{s:?}"));
        assert_close(
            d.get("div").unwrap().value[[10, 10]],
            0.0,
            1e-9 * exact,
            0.0,
            "div",
        );
    }
}

#[test]
fn potential_flow_past_a_cylinder_has_no_vorticity_or_divergence_beyond_truncation() {
    // Curl and divergence of a potential flow vanish (docs/methods.md); the
    // discrete ones are truncation errors: second order (halving h divides
    // them by about 4) and within the stage's own truncation estimate.
    let a = 0.01;
    let run = |n: usize| {
        let h = 0.04 / n as f64;
        let g = Grid {
            nx: n,
            ny: n,
            x0: 0.015,
            y0: 0.015,
            dx: h,
            dy: h,
        };
        let fld = Field::from_fn(g, cylinder(0.5, a));
        let d = derive(&params(DiffScheme::Central, 0.0), &fld);
        let (om, dv) = (d.get("omega").unwrap(), d.get("div").unwrap());
        let (mut worst, mut excess) = (0.0f64, f64::NEG_INFINITY);
        // The same physical region on both grids, 4 mm in from the edges.
        let inside = |x: f64| (0.019 - 1e-9..=0.051 + 1e-9).contains(&x);
        for j in (0..n).filter(|&j| inside(g.y(j))) {
            for i in (0..n).filter(|&i| inside(g.x(i))) {
                for q in [om, dv] {
                    let e = q.value[[j, i]].abs();
                    let b = q.bias.as_ref().unwrap()[[j, i]];
                    worst = worst.max(e);
                    excess = excess.max(e - 1.3 * b);
                }
            }
        }
        (worst, excess)
    };
    let (e1, r1) = run(40);
    let (e2, r2) = run(80);
    eprintln!("cylinder: max |omega|,|div| {e1:.3e} (h = 1 mm), {e2:.3e} (0.5 mm); excess over 1.3 x estimate {r1:.2e}, {r2:.2e}");
    // Strain rate scale U/a = 50 1/s: errors are a small fraction of it.
    assert!(e1 < 0.5, "coarse grid: |omega|, |div| up to {e1:.3e} 1/s");
    assert_close(e1 / e2, 4.0, 0.0, 0.15, "second-order convergence");
    // |error| <= 1.3 x the estimate, up to 2 % of the largest error.
    assert!(r1 <= 0.02 * e1, "coarse: excess {r1:.3e} of {e1:.3e}");
    assert!(r2 <= 0.02 * e2, "fine: excess {r2:.3e} of {e2:.3e}");
}

#[test]
fn lamb_oseen_least_squares_error_is_its_predicted_truncation() {
    // Lamb-Oseen (Saffman 1992), core radius rc = 5 h. The 4-point
    // least-squares stencil's error is (17/30) h^2 (v_xxx - u_yyy) to
    // leading order (docs/methods.md, Raffel et al. 2018 from memory; derived);
    // the third derivatives come from the analytic field by a fine central
    // difference. The stage's truncation estimate tracks the same error.
    let h = 1e-3;
    let (gam, rc) = (0.05, 5e-3);
    let g = grid(40, h);
    let (xc, yc) = (0.0195, 0.0195);
    let f = lamb_oseen(gam, rc, xc, yc, 0.0);
    let wt = lamb_oseen_omega(gam, rc, xc, yc);
    let fld = Field::from_fn(g, &f);
    let d = derive(&params(LS, 0.0), &fld);
    let om = d.get("omega").unwrap();
    let e = 1e-5;
    let d3 = |p: &dyn Fn(f64) -> f64| {
        (p(2.0 * e) - 2.0 * p(e) + 2.0 * p(-e) - p(-2.0 * e)) / (2.0 * e * e * e)
    };
    let (mut max_err, mut max_dev, mut max_bdev) = (0.0f64, 0.0f64, 0.0f64);
    for j in 5..35 {
        for i in 5..35 {
            let (x, y) = (g.x(i), g.y(j));
            let vxxx = d3(&|s| f(x + s, y).1);
            let uyyy = d3(&|s| f(x, y + s).0);
            let pred = 17.0 / 30.0 * h * h * (vxxx - uyyy);
            let err = om.value[[j, i]] - wt(x, y);
            max_err = max_err.max(err.abs());
            max_dev = max_dev.max((err - pred).abs());
            max_bdev = max_bdev.max((err.abs() - om.bias.as_ref().unwrap()[[j, i]]).abs());
        }
    }
    let peak = gam / (PI * rc * rc);
    eprintln!("lamb-oseen LS: peak {peak:.1}, max error {max_err:.3}, leading-term residual {max_dev:.3}, estimate off by {max_bdev:.3} (1/s)");
    // The error is a few percent of the peak (measured 6.2 %); the leading
    // term explains it to within a tenth (measured 5 %; the rest is O(h^4))
    // and the quintic-fit estimate to within 5 % (measured 1.2 %).
    assert!(
        max_err > 0.01 * peak && max_err < 0.1 * peak,
        "max error {max_err:.3e} of peak {peak:.3e}"
    );
    assert!(
        max_dev < 0.2 * max_err,
        "leading-term residual {max_dev:.3e} vs error {max_err:.3e}"
    );
    assert!(
        max_bdev < 0.2 * max_err,
        "truncation estimate off by {max_bdev:.3e} vs error {max_err:.3e}"
    );
}

#[test]
fn masked_hole_and_edges_fall_back_to_narrower_stencils_with_their_own_uncertainty() {
    // A linear field with a masked hole: every node with a value still gets
    // the exact derivative (all fallbacks are exact for linear fields), and
    // the uncertainty is that of the stencil applied: at the corner both
    // axes use the one-sided 2nd-order stencil, noise factor sqrt(6.5)
    // (derived), so u(omega) = sigma sqrt(2 * 6.5) / h.
    let h = 2e-3;
    let g = grid(16, h);
    let mut fld = Field::from_fn(g, linear(1.5, 0.7, 0.01, 0.01));
    for j in 6..9 {
        for i in 6..9 {
            fld.status[[j, i]] = MASKED;
            fld.u[[j, i]] = f64::NAN;
            fld.v[[j, i]] = f64::NAN;
        }
    }
    let sigma = 0.01;
    let d = derive(&params(LS, sigma), &fld);
    let om = d.get("omega").unwrap();
    for j in 0..16 {
        for i in 0..16 {
            if fld.status[[j, i]] == MASKED {
                assert!(om.value[[j, i]].is_nan());
            } else {
                assert_close(om.value[[j, i]], 3.0, 1e-9, 0.0, &format!("({j},{i})"));
            }
        }
    }
    assert!(d.fallback_nodes > 0);
    let nf = one_sided2(Axis::X, 1.0, 1).noise_factor();
    assert_close(nf * nf, 6.5, 1e-12, 0.0, "one-sided noise factor squared");
    let want = sigma * (2.0 * 6.5f64).sqrt() / h;
    assert_close(
        om.unc.as_ref().unwrap()[[0, 0]],
        want,
        0.0,
        1e-12,
        "corner u(omega)",
    );
    // Deep interior: the scheme's own stencil, sqrt(2) * 0.316 sigma/h.
    let want = sigma * (2.0 * 0.1f64).sqrt() / h;
    assert_close(
        om.unc.as_ref().unwrap()[[2, 12]],
        want,
        0.0,
        1e-12,
        "interior u(omega)",
    );
}

#[test]
fn a_filled_vector_carries_its_larger_uncertainty_into_its_neighbours() {
    // Per-vector model: a filled vector has sqrt(noise^2 + fill^2); the
    // central-difference vorticity at its right neighbour (i+1) uses it
    // with weight -1/(2h) in dv/dx only (GUM eq. 13 by hand).
    let h = 1e-3;
    let g = grid(12, h);
    let mut fld = Field::from_fn(g, linear(1.0, 0.0, 0.0, 0.0));
    fld.status[[5, 5]] = FILLED;
    fld.sigma_u[[5, 5]] = 0.03;
    fld.sigma_v[[5, 5]] = 0.04;
    let s = 0.01;
    let d = derive(&params(DiffScheme::Central, s), &fld);
    let u = d.get("omega").unwrap().unc.as_ref().unwrap()[[5, 6]];
    let sv2 = s * s + 0.04 * 0.04;
    let want = ((s * s + sv2) / 4.0 + 2.0 * s * s / 4.0).sqrt() / h;
    assert_close(u, want, 0.0, 1e-12, "u(omega) next to a filled vector");
    assert_close(
        d.u_unc[[5, 5]],
        (s * s + 0.03f64 * 0.03).sqrt(),
        0.0,
        1e-12,
        "u_unc",
    );
}

#[test]
fn columns_mode_uses_the_sigma_columns_and_counts_missing_ones() {
    let g = grid(10, 1e-3);
    let mut fld = Field::from_fn(g, linear(1.0, 0.0, 0.0, 0.0));
    fld.sigma_u.fill(0.02);
    fld.sigma_v.fill(0.02);
    fld.sigma_u[[3, 3]] = f64::NAN;
    let p = Params {
        velocity_noise: VelocityNoise::Columns,
        ..params(DiffScheme::Central, 0.0)
    };
    let d = derive(&p, &fld);
    assert_eq!(d.sigma_fallback_nodes, 1);
    assert_close(d.noise_used, 0.02, 0.0, 1e-15, "median of the columns");
    assert_close(
        d.u_unc[[3, 3]],
        0.02,
        0.0,
        1e-15,
        "fallback to the frame's level",
    );
    let want = 0.02 / 1e-3;
    assert_close(
        d.get("omega").unwrap().unc.as_ref().unwrap()[[5, 5]],
        want,
        0.0,
        1e-12,
        "central",
    );
}

#[test]
fn unknown_noise_level_gives_nan_uncertainty_not_zero() {
    // A 4 x 4 field has no run of five vectors: no estimate, so no level.
    let fld = Field::from_fn(grid(4, 1e-3), linear(1.0, 0.0, 0.0, 0.0));
    let d = derive(&Params::default(), &fld);
    assert!(d.noise_estimate.is_none());
    assert!(d
        .get("omega")
        .unwrap()
        .unc
        .as_ref()
        .unwrap()
        .iter()
        .all(|x| x.is_nan()));
    assert!(d
        .get("omega")
        .unwrap()
        .value
        .iter()
        .all(|x| (x - 2.0).abs() < 1e-9));
}

#[test]
fn quantity_names_follow_the_selection_with_omega_first() {
    let p = Params {
        quantities: vec!["gamma2", "div"],
        ..Params::default()
    };
    assert_eq!(quantity_names(&p), vec!["omega", "div", "gamma2"]);
    let fld = Field::from_fn(grid(8, 1e-3), linear(1.0, 0.0, 0.0, 0.0));
    let d = derive(&p, &fld);
    let names: Vec<&str> = d.quantities.iter().map(|q| q.name).collect();
    assert_eq!(names, quantity_names(&p));
    assert_eq!(d.get("gamma2").unwrap().unit, "1");
    assert!(d.get("gamma2").unwrap().unc.is_none());
    let _ = Array2::<f64>::zeros((1, 1));
}

#[test]
fn unequal_pitch_and_degenerate_grids_are_handled() {
    // Solid-body rotation on a grid with dy = 2.5 dx: still omega = 2 Omega
    // (common practice: each stencil carries its own pitch).
    let g = Grid {
        nx: 14,
        ny: 9,
        x0: 0.0,
        y0: 0.0,
        dx: 1e-3,
        dy: 2.5e-3,
    };
    let fld = Field::from_fn(g, linear(2.0, 0.0, 0.006, 0.01));
    for s in FIXED {
        let d = derive(&params(s, 0.01), &fld);
        for &w in d.get("omega").unwrap().value.iter() {
            assert_close(w, 4.0, 1e-9, 0.0, &format!("{s:?}"));
        }
    }
    // One row: no y derivative exists, so no vorticity (NaN), never a guess.
    let g = Grid {
        nx: 10,
        ny: 1,
        x0: 0.0,
        y0: 0.0,
        dx: 1e-3,
        dy: 1e-3,
    };
    let d = derive(
        &params(LS, 0.01),
        &Field::from_fn(g, linear(1.0, 0.0, 0.0, 0.0)),
    );
    assert!(d.get("omega").unwrap().value.iter().all(|x| x.is_nan()));
    assert_eq!(d.fallback_nodes, 10);
    // All masked: every value NaN, no noise estimate, nothing chosen.
    let d = derive(&Params::default(), &Field::empty(grid(6, 1e-3)));
    assert!(d.noise_estimate.is_none());
    assert!(d
        .quantities
        .iter()
        .all(|q| q.value.iter().all(|x| x.is_nan())));
    assert!(d.scheme_map.iter().all(|&m| m == u8::MAX));
    assert_eq!(d.scheme_counts, vec![0]);
}

#[test]
fn auto_prefers_wide_low_noise_stencils_in_calm_flow_and_narrow_ones_in_a_tight_core() {
    // Foucaut & Stanislas 2002: where truncation is negligible the lowest
    // noise factor wins (4-point least squares); in a core a few pitches
    // wide the truncation of the wide stencil dominates and a narrower or
    // higher-order one is taken.
    let h = 1e-3;
    let g = grid(40, h);
    let rc = 2.0 * h;
    let gamma = 2.0 * PI * rc / 0.6381727;
    let fld = Field::from_fn(g, lamb_oseen(gamma, rc, 0.0195, 0.0195, 0.0));
    let p = Params {
        scheme: Scheme::Auto,
        ..params(LS, 0.005)
    };
    let d = derive(&p, &fld);
    assert_eq!(
        d.scheme_names,
        vec!["least-squares", "central", "richardson", "circulation"]
    );
    assert_eq!(d.scheme_counts.iter().sum::<usize>(), 1600);
    // Far from the core: least squares.
    assert_eq!(d.scheme_map[[5, 5]], 0);
    // At the core: not least squares.
    assert_ne!(d.scheme_map[[19, 19]], 0);
    // And auto's error at the core is below least squares' there.
    let ls = derive(&params(LS, 0.005), &fld);
    let wt = lamb_oseen_omega(gamma, rc, 0.0195, 0.0195);
    let e = |d: &Derived| (d.get("omega").unwrap().value[[19, 19]] - wt(g.x(19), g.y(19))).abs();
    assert!(
        e(&d) < 0.5 * e(&ls),
        "auto {:.3e} vs least squares {:.3e}",
        e(&d),
        e(&ls)
    );
}

#[test]
fn edge_caches_do_not_mix_correlation_models() {
    // The operator and slow-path caches hold correlation gains and key on the
    // model, so runs with other models on the same workspace stay apart. At
    // the corner (one-sided 2nd order in both axes) with 50 % overlap,
    // u(omega)^2 = 2 sigma^2 sum_ab w_a w_b rho(d_ab) / h^2 with weights
    // (-1.5, 2, -0.5) and rho (1, 0.5, 0): 2 (6.5 - 2 * 1.5 * 2 * 0.5 - 2 * 2 * 0.5 * 0.5)
    // = 2 * 2.5 (derived by hand).
    let h = 1e-3;
    let fld = Field::from_fn(grid(12, h), linear(1.0, 0.0, 0.0, 0.0));
    let s = 0.01;
    let mut ws = Workspace::new();
    for (corr, want) in [
        (Correlation::Independent, 6.5),
        (Correlation::Window(0.5), 2.5),
        (Correlation::Independent, 6.5),
    ] {
        let p = Params {
            correlation: corr,
            correlation_from_data: false,
            ..params(LS, s)
        };
        let d = derive_with(&mut ws, &p, &fld, None, None);
        let u = d.get("omega").unwrap().unc.as_ref().unwrap()[[0, 0]];
        assert_close(
            u,
            s * (2.0f64 * want).sqrt() / h,
            0.0,
            1e-12,
            &format!("{corr:?}"),
        );
    }
}

#[test]
fn richardson_truncation_in_a_core_of_one_and_a_half_pitches_is_measured_against_the_reference() {
    // Lamb-Oseen (Saffman 1992), core radius rc = 1.5 h, noise-free. The
    // fourth-order scheme's error there is of the degree-5 fit's own order,
    // so the fit alone misses most of it (measured in the coverage study:
    // a mean truncation of 4 1/s where it was 25); the stage measures it
    // against the least-squares reference (`choice::against_reference`),
    // as `auto` does. The signed estimate must track the actual error.
    let h = 1e-3;
    let (gam, rc) = (0.01, 1.5e-3);
    let g = grid(40, h);
    let (xc, yc) = (0.0198, 0.0193);
    let f = lamb_oseen(gam, rc, xc, yc, 0.0);
    let wt = lamb_oseen_omega(gam, rc, xc, yc);
    let fld = Field::from_fn(g, &f);
    let d = derive(&params(DiffScheme::Richardson, 0.0), &fld);
    let om = d.get("omega").unwrap();
    let trunc = &om.trunc.as_ref().unwrap()[0];
    let (mut se, mut st, mut n, mut same_sign) = (0.0, 0.0, 0, 0);
    for j in 0..40 {
        for i in 0..40 {
            let (x, y) = (g.x(i), g.y(j));
            if (x - xc).hypot(y - yc) > 2.0 * rc {
                continue;
            }
            let (err, t) = (om.value[[j, i]] - wt(x, y), trunc[[j, i]]);
            se += err * err;
            st += t * t;
            n += 1;
            same_sign += usize::from(err * t > 0.0);
        }
    }
    let (rms_err, rms_est) = ((se / n as f64).sqrt(), (st / n as f64).sqrt());
    let peak = gam / (PI * rc * rc);
    eprintln!(
        "richardson, core 1.5 h: peak {peak:.0}, {n} nodes, rms error {rms_err:.1}, rms estimate {rms_est:.1} (1/s), same sign at {same_sign}"
    );
    // The error is about 2 % of the peak (measured 1.9 %). The estimate is
    // on the safe side in size: not smaller than the error (the fit alone
    // gave about a sixth of it in the coverage study) and at most 4 times
    // it (measured 1.45; the study's width ratio in such a core is 1.9).
    // Its sign is not the error's here (measured: opposite at all 29
    // nodes): the reference's own estimate misses the 4-point stencil's
    // error of 181 1/s by 48 1/s rms, more than the fourth-order scheme's
    // whole error. The uncertainty uses the size only, so this stays on
    // the safe side; `same_sign` is printed, not asserted.
    assert!(rms_err > 0.01 * peak, "rms error {rms_err} of peak {peak}");
    assert!(
        rms_est >= rms_err && rms_est < 4.0 * rms_err,
        "estimate {rms_est} against error {rms_err}"
    );
}

#[test]
fn a_one_sided_stencil_at_the_edge_is_checked_by_a_full_size_fit() {
    // v = c x^5, u = 0: omega = 5 c x^4 (derived). The degree-5 fit is exact
    // for a quintic, so wherever it has its full window the truncation
    // estimate equals the stencil's actual error. At the edge the window
    // slides inward (`gradient::inward_shift`); before, it lost the half
    // beyond the edge and the estimate there was NaN or a degree-3 guess.
    let (h, c) = (1e-3, 2.0e9);
    let n = 20;
    let fld = Field::from_fn(grid(n, h), move |x: f64, _y: f64| (0.0, c * x.powi(5)));
    for s in [DiffScheme::Central, DiffScheme::Richardson] {
        let d = derive(&params(s, 0.0), &fld);
        let om = d.get("omega").unwrap();
        let b = om.bias.as_ref().unwrap();
        for j in 4..n - 4 {
            for i in [0, 1, 2, n - 3, n - 2, n - 1] {
                let x = i as f64 * h;
                let err = (om.value[[j, i]] - 5.0 * c * x.powi(4)).abs();
                let w = format!(
                    "{s:?} at ({j},{i}): error {err:.4e}, estimate {:.4e}",
                    b[[j, i]]
                );
                assert!(err > 1e-3, "{w}: the test needs a truncation error");
                assert_close(b[[j, i]], err, 1e-9, 1e-6, &w);
            }
        }
    }
}
