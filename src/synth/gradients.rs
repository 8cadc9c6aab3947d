//! Analytic velocity-gradient tensors of the flows in `flows`, for checking
//! derived quantities (vorticity, strain, swirl, Q) against exact values.
//!
//! Each function returns `Gradient { dudx, dudy, dvdx, dvdy }` in 1/s at one
//! point, for the same arguments as its `flows` counterpart. Vorticity is
//! `dvdx - dudy`, in-plane divergence `dudx + dvdy`.

#[cfg(test)]
use super::flows::Street;

/// The planar velocity-gradient tensor at one point, 1/s.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub(crate) struct Gradient {
    pub dudx: f64,
    pub dudy: f64,
    pub dvdx: f64,
    pub dvdy: f64,
}

impl Gradient {
    /// Out-of-plane vorticity `dv/dx - du/dy`.
    #[cfg(test)]
    pub(crate) fn omega(&self) -> f64 {
        self.dvdx - self.dudy
    }
    /// In-plane divergence `du/dx + dv/dy`.
    #[cfg(test)]
    pub(crate) fn divergence(&self) -> f64 {
        self.dudx + self.dvdy
    }
}

impl std::ops::Add for Gradient {
    type Output = Gradient;
    fn add(self, o: Gradient) -> Gradient {
        Gradient {
            dudx: self.dudx + o.dudx,
            dudy: self.dudy + o.dudy,
            dvdx: self.dvdx + o.dvdx,
            dvdy: self.dvdy + o.dvdy,
        }
    }
}

/// Gradient of `flows::lamb_oseen`.
///
/// With `c = gamma/(2 pi)`, `K(r²) = (1 - exp(-r²/rc²))/r²` and
/// `K' = dK/d(r²)`: `u = -c K dy`, `v = c K dx`, so
/// `du/dx = -2c K' dx dy`, `du/dy = -c (K + 2 K' dy²)`,
/// `dv/dx = c (K + 2 K' dx²)`, `dv/dy = 2c K' dx dy` (derived; the
/// vorticity `2c (K + r² K') = gamma/(pi rc²) exp(-s)` checks it).
/// `K' = f'(s)/rc⁴` with `f(s) = (1 - e^-s)/s`; for `s < 0.5` by its
/// Taylor series `f'(s) = sum_{n>=1} (-1)^n n s^(n-1)/(n+1)!` (16 terms),
/// else by `f'(s) = ((1 + s) e^-s - 1)/s²`; finite at the centre, where
/// the tensor is solid-body rotation at `gamma/(2 pi rc²)`.
pub(crate) fn lamb_oseen(x: f64, y: f64, xc: f64, yc: f64, gamma: f64, rc: f64) -> Gradient {
    let dx = x - xc;
    let dy = y - yc;
    let rc2 = rc * rc;
    let s = (dx * dx + dy * dy) / rc2;
    let (f, fp) = if s < 0.5 {
        // f(s) = sum_{n>=0} (-1)^n s^n/(n+1)!, f'(s) = sum_{n>=1} (-1)^n n s^(n-1)/(n+1)!
        let (mut f, mut fp) = (0.0, 0.0);
        let (mut fact, mut p, mut pm) = (1.0, 1.0, 0.0); // (n+1)!, s^n, s^(n-1)
        for n in 0..17 {
            fact *= (n + 1) as f64;
            let sign = if n % 2 == 0 { 1.0 } else { -1.0 };
            f += sign * p / fact;
            if n >= 1 {
                fp += sign * n as f64 * pm / fact;
            }
            pm = p;
            p *= s;
        }
        (f, fp)
    } else {
        let e = if s > 700.0 { 0.0 } else { (-s).exp() };
        ((1.0 - e) / s, ((1.0 + s) * e - 1.0) / (s * s))
    };
    let k = f / rc2;
    let kp = fp / (rc2 * rc2);
    let c = gamma / (2.0 * std::f64::consts::PI);
    Gradient {
        dudx: -2.0 * c * kp * dx * dy,
        dudy: -c * (k + 2.0 * kp * dy * dy),
        dvdx: c * (k + 2.0 * kp * dx * dx),
        dvdy: 2.0 * c * kp * dx * dy,
    }
}

/// Gradient of `flows::solid_body`: `[[0, -Omega], [Omega, 0]]`.
pub(crate) fn solid_body(omega_rot: f64) -> Gradient {
    Gradient {
        dudx: 0.0,
        dudy: -omega_rot,
        dvdx: omega_rot,
        dvdy: 0.0,
    }
}

/// Gradient of `flows::cylinder`, from the complex velocity
/// `w = u - i v = U (1 - R²/z²)`: `dw/dz = 2 U R² / z³ = du/dx - i dv/dx`,
/// and by Cauchy–Riemann `du/dy = dv/dx`, `dv/dy = -du/dx`. `None` inside
/// the body (as `flows::cylinder`).
pub(crate) fn cylinder(
    x: f64,
    y: f64,
    xc: f64,
    yc: f64,
    radius: f64,
    u_inf: f64,
) -> Option<Gradient> {
    let (a, b) = (x - xc, y - yc);
    let r2 = a * a + b * b;
    if r2 < radius * radius * (1.0 - 1e-12) {
        return None;
    }
    // 1/z³ = conj(z)³ / |z|⁶
    let (re3, im3) = (a * a * a - 3.0 * a * b * b, 3.0 * a * a * b - b * b * b);
    let r6 = r2 * r2 * r2;
    let k = 2.0 * u_inf * radius * radius / r6;
    let (dwr, dwi) = (k * re3, -k * im3);
    Some(Gradient {
        dudx: dwr,
        dudy: -dwi,
        dvdx: -dwi,
        dvdy: -dwr,
    })
}

/// Gradient of `flows::taylor_green`.
pub(crate) fn taylor_green(x: f64, y: f64, t: f64, u0: f64, k: f64, nu: f64) -> Gradient {
    let f = u0 * k * (-2.0 * nu * k * k * t).exp();
    let (sx, cx) = (k * x).sin_cos();
    let (sy, cy) = (k * y).sin_cos();
    Gradient {
        dudx: f * cx * cy,
        dudy: -f * sx * sy,
        dvdx: f * sx * sy,
        dvdy: -f * cx * cy,
    }
}

/// Gradient of `flows::vortex_street` (the stream is uniform, so only the
/// vortices contribute).
#[cfg(test)]
pub(crate) fn vortex_street(
    x: f64,
    y: f64,
    _street: &Street,
    vortices: &[(f64, f64, f64, f64)],
) -> Gradient {
    vortices
        .iter()
        .fold(Gradient::default(), |g, &(xc, yc, gm, rc)| {
            g + lamb_oseen(x, y, xc, yc, gm, rc)
        })
}

#[cfg(test)]
mod tests {
    use super::super::flows::{self, Sample};
    use super::*;

    /// Fourth-order central differences of a velocity field.
    fn fd(f: impl Fn(f64, f64) -> Sample, x: f64, y: f64, h: f64) -> Gradient {
        let d = |g: &dyn Fn(f64) -> f64| {
            (-g(2.0 * h) + 8.0 * g(h) - 8.0 * g(-h) + g(-2.0 * h)) / (12.0 * h)
        };
        Gradient {
            dudx: d(&|s| f(x + s, y).u),
            dudy: d(&|s| f(x, y + s).u),
            dvdx: d(&|s| f(x + s, y).v),
            dvdy: d(&|s| f(x, y + s).v),
        }
    }

    fn close(a: Gradient, b: Gradient, tol: f64, what: &str) {
        for (p, q) in [
            (a.dudx, b.dudx),
            (a.dudy, b.dudy),
            (a.dvdx, b.dvdx),
            (a.dvdy, b.dvdy),
        ] {
            assert!((p - q).abs() <= tol, "{what}: {a:?} vs {b:?}");
        }
    }

    #[test]
    fn lamb_oseen_gradient_matches_differences_and_its_vorticity() {
        let (g, rc) = (2.0e-3, 2.5e-3);
        let scale = g / (std::f64::consts::PI * rc * rc);
        // points across both branches (s < 0.5 and s >= 0.5) and the centre
        for &(x, y) in &[
            (0.0, 0.0),
            (1e-4, -2e-4),
            (1.5e-3, 0.5e-3),
            (1.7e-3, 0.2e-3),
            (1.8e-3, 0.0),
            (4e-3, -3e-3),
            (-9e-3, 6e-3),
        ] {
            let a = lamb_oseen(x, y, 0.0, 0.0, g, rc);
            let b = fd(|x, y| flows::lamb_oseen(x, y, 0.0, 0.0, g, rc), x, y, 1e-6);
            close(a, b, 1e-7 * scale, "lamb-oseen");
            let w = flows::lamb_oseen(x, y, 0.0, 0.0, g, rc).omega;
            assert!(
                (a.omega() - w).abs() <= 1e-12 * scale,
                "omega {} vs {w}",
                a.omega()
            );
            assert!(a.divergence().abs() <= 1e-12 * scale);
        }
        // centre: solid-body rotation at gamma / (2 pi rc²)
        let c = lamb_oseen(0.0, 0.0, 0.0, 0.0, g, rc);
        assert!((c.dvdx - scale / 2.0).abs() < 1e-12 * scale && c.dudx == 0.0);
    }

    #[test]
    fn other_gradients_match_differences() {
        close(
            solid_body(1.5),
            fd(
                |x, y| flows::solid_body(x, y, 0.0, 0.0, 1.5),
                0.01,
                0.02,
                1e-4,
            ),
            1e-9,
            "solid",
        );
        for &(x, y) in &[(6e-3, 1e-3), (-5e-3, 4e-3), (2e-2, -1e-2)] {
            let a = cylinder(x, y, 0.0, 0.0, 5e-3, 0.2).unwrap();
            let b = fd(
                |x, y| flows::cylinder(x, y, 0.0, 0.0, 5e-3, 0.2).unwrap(),
                x,
                y,
                1e-7,
            );
            close(a, b, 1e-5, "cylinder");
            assert!(a.omega().abs() < 1e-12 && a.divergence().abs() < 1e-12);
        }
        let k = std::f64::consts::TAU / 0.04;
        let a = taylor_green(0.003, 0.007, 2.0, 0.1, k, 1e-6);
        close(
            a,
            fd(
                |x, y| flows::taylor_green(x, y, 2.0, 0.1, k, 1e-6),
                0.003,
                0.007,
                1e-6,
            ),
            1e-7,
            "tg",
        );
        let s = Street::behind_cylinder(0.15, 0.01, 0.21, 0.85, 0.281, 0.25, 1e-6, 0.1);
        let vs = s.vortices(2.0);
        let a = vortex_street(0.05, 0.003, &s, &vs);
        let b = fd(
            |x, y| flows::vortex_street(x, y, &s, &vs),
            0.05,
            0.003,
            1e-6,
        );
        close(a, b, 1e-5, "street");
        assert!((a.omega() - flows::vortex_street(0.05, 0.003, &s, &vs).omega).abs() < 1e-9);
    }
}
