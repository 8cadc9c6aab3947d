//! The viscous vortex scenarios against their analytic solutions: the
//! diffusing Lamb–Oseen vortex (Saffman 1992, *Vortex Dynamics* §1.3) and
//! the Burgers vortex (Burgers 1948; as given in Saffman 1992 §1.3).

use super::scenario::{setup_run, Flow};
use super::*;

fn opts(scenario: Scenario, n: usize, pitch: f64) -> SynthOptions {
    SynthOptions {
        scenario,
        nx: Some(n),
        ny: Some(n),
        pitch: Some(pitch),
        speeds: vec![0.2],
        ..Default::default()
    }
}

/// Fourth-order central first and second differences at `(j, i)` of a
/// field (row-major `ny x nx`), along x and y (common practice).
fn d4(f: &ndarray::Array2<f64>, j: usize, i: usize, h: f64) -> [f64; 4] {
    let c = [1.0 / 12.0, -8.0 / 12.0, 0.0, 8.0 / 12.0, -1.0 / 12.0];
    let c2 = [
        -1.0 / 12.0,
        16.0 / 12.0,
        -30.0 / 12.0,
        16.0 / 12.0,
        -1.0 / 12.0,
    ];
    let (mut fx, mut fy, mut fxx, mut fyy) = (0.0, 0.0, 0.0, 0.0);
    for k in 0..5 {
        let (a, b) = (f[[j, i + k - 2]], f[[j + k - 2, i]]);
        fx += c[k] * a / h;
        fy += c[k] * b / h;
        fxx += c2[k] * a / (h * h);
        fyy += c2[k] * b / (h * h);
    }
    [fx, fy, fxx, fyy]
}

#[test]
fn diffusing_vortex_follows_the_heat_equation_and_keeps_its_circulation() {
    let o = opts(Scenario::DiffusingVortex, 61, 0.5e-3);
    let r = setup_run(&o, 0.2).unwrap();
    let Flow::Diffusing { gamma, rc0, nu } = r.flow else {
        panic!("{:?}", r.flow)
    };
    let g = r.grid;
    let (k, dt) = (30, 1.0 / o.frame_rate);
    let (a, b, c) = (r.truth(&o, k - 1), r.truth(&o, k), r.truth(&o, k + 1));
    // Saffman 1992: rc² = rc0² + 4 nu t, d omega/dt = nu lap(omega) with
    // lap(omega) = 4 omega / rc² (r²/rc² - 1) for the Gaussian core.
    let rc2 = rc0 * rc0 + 4.0 * nu * k as f64 * dt;
    let peak = gamma / (std::f64::consts::PI * rc2);
    let (mut err, mut top) = (0.0f64, 0.0f64);
    for j in 0..g.ny {
        for i in 0..g.nx {
            let r2 = g.x(i).powi(2) + g.y(j).powi(2);
            let w = peak * (-r2 / rc2).exp();
            assert!(
                (b.omega[[j, i]] - w).abs() <= 1e-12 * peak,
                "omega at {j},{i}"
            );
            let want = nu * 4.0 * w / rc2 * (r2 / rc2 - 1.0);
            let got = (c.omega[[j, i]] - a.omega[[j, i]]) / (2.0 * dt);
            err = err.max((got - want).abs());
            top = top.max(want.abs());
        }
    }
    // the central difference in time: O(dt²), about 1e-4 here
    assert!(err < 1e-3 * top, "d omega/dt off by {err} of {top}");
    // No advection: the velocity is azimuthal (u . grad omega = 0).
    let (j, i) = (20, 37);
    let (x, y) = (g.x(i), g.y(j));
    assert!((b.u[[j, i]] * x + b.v[[j, i]] * y).abs() < 1e-15);
    // Circulation inside radius R: gamma (1 - exp(-R²/rc²)), the midpoint
    // rule over the nodes (pitch 0.5 mm against a core of 2+ mm).
    let rr = 12e-3;
    let sum: f64 = (0..g.len())
        .filter(|n| g.x(n % g.nx).hypot(g.y(n / g.nx)) <= rr)
        .map(|n| b.omega[[n / g.nx, n % g.nx]] * g.dx * g.dy)
        .sum();
    let want = gamma * (1.0 - (-rr * rr / rc2).exp());
    assert!((sum - want).abs() < 0.02 * want, "{sum} vs {want}");
}

#[test]
fn burgers_vortex_balances_advection_against_stretching_and_diffusion() {
    // pitch 0.1 mm, core 2.5 mm: fourth-order differences err by about
    // (h/rc)^4 = 3e-6 of the swirl's gradients
    let mut o = opts(Scenario::Burgers, 101, 0.1e-3);
    o.core_pitches = Some(25.0);
    let r = setup_run(&o, 0.2).unwrap();
    let Flow::Burgers { alpha, nu, .. } = r.flow else {
        panic!("{:?}", r.flow)
    };
    let g = r.grid;
    let (f0, f9) = (r.truth(&o, 0), r.truth(&o, 9));
    assert_eq!(f0.omega, f9.omega, "steady");
    let h = g.dx;
    let (mut worst, mut top) = (0.0f64, 0.0f64);
    for j in 2..g.ny - 2 {
        for i in 2..g.nx - 2 {
            let [wx, wy, wxx, wyy] = d4(&f0.omega, j, i, h);
            let [ux, _, _, _] = d4(&f0.u, j, i, h);
            let [_, vy, _, _] = d4(&f0.v, j, i, h);
            let [vx, _, _, _] = d4(&f0.v, j, i, h);
            let [_, uy, _, _] = d4(&f0.u, j, i, h);
            let w = f0.omega[[j, i]];
            // the written omega is the curl of the written velocity
            assert!(
                (vx - uy - w).abs() < 1e-3 * f0.omega[[50, 50]],
                "curl at {j},{i}"
            );
            // in-plane divergence -alpha (Burgers 1948: w = alpha z)
            assert!((ux + vy + alpha).abs() < 1e-3 * alpha, "div at {j},{i}");
            let adv = f0.u[[j, i]] * wx + f0.v[[j, i]] * wy;
            let stretch = -w * (ux + vy);
            let diff = nu * (wxx + wyy);
            worst = worst.max((adv - stretch - diff).abs());
            top = top.max(adv.abs()).max(stretch.abs());
        }
    }
    assert!(worst < 1e-3 * top, "imbalance {worst} of {top}");
}
