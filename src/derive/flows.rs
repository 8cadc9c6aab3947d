//! Analytic flows for the tests of the gradient stage (docs/methods.md, derived).

use std::f64::consts::PI;

/// A Lamb-Oseen vortex (Saffman, *Vortex Dynamics*, 1992) of circulation
/// `gamma` and core radius `rc` at (xc, yc), in a uniform stream `u0` along x:
/// `u_theta = gamma/(2 pi r) (1 - exp(-r^2/rc^2))`.
pub(crate) fn lamb_oseen(
    gamma: f64,
    rc: f64,
    xc: f64,
    yc: f64,
    u0: f64,
) -> impl Fn(f64, f64) -> (f64, f64) {
    move |x, y| {
        let (dx, dy) = (x - xc, y - yc);
        let r2 = dx * dx + dy * dy;
        let k = if r2 == 0.0 {
            0.0
        } else {
            gamma / (2.0 * PI * r2) * (1.0 - (-r2 / (rc * rc)).exp())
        };
        (u0 - k * dy, k * dx)
    }
}

/// The vorticity of `lamb_oseen`: `gamma/(pi rc^2) exp(-r^2/rc^2)`.
pub(crate) fn lamb_oseen_omega(gamma: f64, rc: f64, xc: f64, yc: f64) -> impl Fn(f64, f64) -> f64 {
    move |x, y| {
        let r2 = (x - xc).powi(2) + (y - yc).powi(2);
        gamma / (PI * rc * rc) * (-r2 / (rc * rc)).exp()
    }
}

/// The linear field of rotation `omega_rot` and strain `mu` about (xc, yc):
/// `u = mu x - Omega y`, `v = Omega x - mu y` (vorticity 2 Omega).
pub(crate) fn linear(omega_rot: f64, mu: f64, xc: f64, yc: f64) -> impl Fn(f64, f64) -> (f64, f64) {
    move |x, y| {
        let (x, y) = (x - xc, y - yc);
        (mu * x - omega_rot * y, omega_rot * x - mu * y)
    }
}

/// Taylor-Green cell: `u = U sin kx cos ky`, `v = -U cos kx sin ky`, so
/// `omega = 2 U k sin kx sin ky` and the divergence is 0.
pub(crate) fn taylor_green(u0: f64, k: f64) -> impl Fn(f64, f64) -> (f64, f64) {
    move |x, y| {
        (
            u0 * (k * x).sin() * (k * y).cos(),
            -u0 * (k * x).cos() * (k * y).sin(),
        )
    }
}

/// Potential flow past a cylinder of radius `a` at the origin in a stream
/// `u0`: `u - i v = u0 (1 - a^2/z^2)`.
pub(crate) fn cylinder(u0: f64, a: f64) -> impl Fn(f64, f64) -> (f64, f64) {
    move |x, y| {
        let r2 = x * x + y * y;
        let a2r4 = a * a / (r2 * r2);
        (
            u0 * (1.0 - a2r4 * (x * x - y * y)),
            -u0 * a2r4 * 2.0 * x * y,
        )
    }
}
