//! Analytic planar flows with exact velocity and out-of-plane vorticity.
//!
//! Owns: pure functions of position (and time) returning `Sample { u, v,
//! omega }` in SI, with `omega = dv/dx - du/dy`. Does not own: grids, noise
//! or files (the rest of `synth`).
//!
//! Every function is total over finite input: the Lamb–Oseen centre (r = 0)
//! uses the analytic limit; the cylinder returns `None` inside the body.

/// Velocity (m/s) and out-of-plane vorticity (1/s) at one point.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub(crate) struct Sample {
    pub u: f64,
    pub v: f64,
    pub omega: f64,
}

impl std::ops::Add for Sample {
    type Output = Sample;
    fn add(self, o: Sample) -> Sample {
        Sample {
            u: self.u + o.u,
            v: self.v + o.v,
            omega: self.omega + o.omega,
        }
    }
}

/// Radius of the peak swirl of a Lamb–Oseen vortex, in core radii, and the
/// peak swirl in units of `gamma / (2 pi rc)` (Saffman, *Vortex Dynamics*,
/// 1992, §1.3; also docs/methods.md).
#[cfg(test)]
pub(crate) const LAMB_OSEEN_PEAK_RADIUS: f64 = 1.120_906_4;
pub(crate) const LAMB_OSEEN_PEAK_SWIRL: f64 = 0.638_172_7;

/// The Lamb–Oseen vortex of circulation `gamma` (m²/s, positive
/// anticlockwise) and core radius `rc` (m) centred at `(xc, yc)`.
///
/// Method (Saffman 1992, §1.3; Lamb 1932, *Hydrodynamics* §334a):
/// `u_theta = gamma / (2 pi r) (1 - exp(-r²/rc²))`,
/// `omega = gamma / (pi rc²) exp(-r²/rc²)`; in Cartesian form
/// `u = -u_theta (y - yc)/r`, `v = u_theta (x - xc)/r`.
/// The factor `(1 - exp(-s))/r²` (`s = r²/rc²`) is evaluated with `exp_m1`
/// for `s < 0.5` (no cancellation), and at `r = 0` by its limit `1/rc²`, so the centre gives `u = v = 0` and the peak
/// vorticity. A viscously spreading vortex has `rc² = rc0² + 4 nu t`
/// (the caller passes the current `rc`).
pub(crate) fn lamb_oseen(x: f64, y: f64, xc: f64, yc: f64, gamma: f64, rc: f64) -> Sample {
    let dx = x - xc;
    let dy = y - yc;
    let r2 = dx * dx + dy * dy;
    let inv_rc2 = 1.0 / (rc * rc);
    let s = r2 * inv_rc2;
    // e = exp(-s); beyond s = 700 it is below 1e-304 and taken as 0 (this
    // skips libm's slow underflow path; no printed digit can change)
    let e = if s > 700.0 { 0.0 } else { (-s).exp() };
    // (1 - exp(-s)) / r², accurate near the centre, limit 1/rc² at r = 0
    let g = if r2 == 0.0 {
        inv_rc2
    } else if s < 0.5 {
        -(-s).exp_m1() / r2
    } else {
        (1.0 - e) / r2
    };
    let k = gamma / (2.0 * std::f64::consts::PI) * g;
    Sample {
        u: -k * dy,
        v: k * dx,
        omega: gamma * inv_rc2 / std::f64::consts::PI * e,
    }
}

/// Solid-body rotation at angular speed `omega_rot` (rad/s, anticlockwise)
/// about `(xc, yc)`: `u = -Omega (y - yc)`, `v = Omega (x - xc)`,
/// `omega = 2 Omega` (fact of the trade).
pub(crate) fn solid_body(x: f64, y: f64, xc: f64, yc: f64, omega_rot: f64) -> Sample {
    Sample {
        u: -omega_rot * (y - yc),
        v: omega_rot * (x - xc),
        omega: 2.0 * omega_rot,
    }
}

/// Potential flow of speed `u_inf` (along +x) past a circular cylinder of
/// radius `radius` centred at `(xc, yc)`, without circulation.
///
/// Method (complex potential `W = U (z + R²/z)`; e.g. Batchelor 1967,
/// *An Introduction to Fluid Dynamics*, §6.4, from memory):
/// `u = U (1 - R² (dx² - dy²)/r⁴)`, `v = -2 U R² dx dy / r⁴`, `omega = 0`
/// (the flow is the gradient of a potential). `None` strictly inside the
/// body (`r < R`, with a relative margin of 1e-12 on `r²` so that points
/// on the surface count as outside whatever their rounding); on the surface the tangential speed is `2 U sin theta`.
pub(crate) fn cylinder(
    x: f64,
    y: f64,
    xc: f64,
    yc: f64,
    radius: f64,
    u_inf: f64,
) -> Option<Sample> {
    let dx = x - xc;
    let dy = y - yc;
    let r2 = dx * dx + dy * dy;
    // nodes on the surface (within rounding of the squares) are outside
    if r2 < radius * radius * (1.0 - 1e-12) {
        return None;
    }
    let a = radius * radius / (r2 * r2);
    Some(Sample {
        u: u_inf * (1.0 - a * (dx * dx - dy * dy)),
        v: -2.0 * u_inf * a * dx * dy,
        omega: 0.0,
    })
}

/// The decaying Taylor–Green vortex array (Taylor & Green 1937, Proc. R.
/// Soc. A 158:499; an exact Navier–Stokes solution), in docs/methods.md's
/// convention: `u = U sin(kx) cos(ky) F`, `v = -U cos(kx) sin(ky) F`,
/// `omega = 2 U k sin(kx) sin(ky) F`, with `F = exp(-2 nu k² t)`.
/// `nu = 0` or `t = 0` gives the steady array.
pub(crate) fn taylor_green(x: f64, y: f64, t: f64, u0: f64, k: f64, nu: f64) -> Sample {
    let f = (-2.0 * nu * k * k * t).exp();
    let (sx, cx) = (k * x).sin_cos();
    let (sy, cy) = (k * y).sin_cos();
    Sample {
        u: u0 * sx * cy * f,
        v: -u0 * cx * sy * f,
        omega: 2.0 * u0 * k * sx * sy * f,
    }
}

/// A Lamb–Oseen vortex at the origin diffusing in still fluid (Saffman
/// 1992, *Vortex Dynamics* §1.3: the exact solution of the Navier–Stokes
/// equations for a line vortex): at time `t` the core radius is
/// `rc² = rc0² + 4 nu t` and the field is `lamb_oseen` with that core, so
/// `omega = gamma / (pi rc²) exp(-r²/rc²)` and `d omega/dt = nu lap(omega)`
/// exactly, with no advection and no stretching. The circulation `gamma`
/// is constant.
pub(crate) fn diffusing_vortex(x: f64, y: f64, t: f64, gamma: f64, rc0: f64, nu: f64) -> Sample {
    let rc = (rc0 * rc0 + 4.0 * nu * t).sqrt();
    lamb_oseen(x, y, 0.0, 0.0, gamma, rc)
}

/// The Burgers vortex (Burgers 1948, Adv. Appl. Mech. 1:171; the steady
/// solution as given in Saffman 1992 §1.3) at the origin, in the plane
/// z = 0: axial strain `alpha` (w = alpha z), radial inflow
/// `u_r = -alpha r / 2` and the Lamb–Oseen swirl and vorticity of core
/// radius `rc = sqrt(4 nu / alpha)`. Steady: the advection by the inflow
/// balances the stretching `alpha omega` and the diffusion `nu lap(omega)`,
/// `u . grad(omega) = alpha omega + nu lap(omega)`. The in-plane divergence
/// is `-alpha` everywhere.
pub(crate) fn burgers(x: f64, y: f64, gamma: f64, alpha: f64, nu: f64) -> Sample {
    let rc = (4.0 * nu / alpha).sqrt();
    let s = lamb_oseen(x, y, 0.0, 0.0, gamma, rc);
    Sample {
        u: s.u - 0.5 * alpha * x,
        v: s.v - 0.5 * alpha * y,
        omega: s.omega,
    }
}

/// A staggered double row of Lamb–Oseen vortices convecting over a uniform
/// stream: our model of the wake behind a circular cylinder (diameter `d`,
/// centre at the origin, stream `u_inf` along +x).
///
/// The model: vortices are shed at the frequency `f = St U / D` and
/// convect at `Uc = kappa U`, so the street's wavelength is `a = Uc / f`.
/// The upper row (`y = +b/2`) carries clockwise vortices (negative
/// circulation, as the upper shear layer does), the lower row (`y = -b/2`)
/// anticlockwise ones, shifted by `a/2`. At phase `theta` (radians) the
/// upper vortices sit at `x = x_form + a (n + theta/2pi)` and the lower ones
/// at `x = x_form + a (n + 1/2 + theta/2pi)` for every integer `n`.
/// Circulation is `gamma w(x)`, where `w` rises smoothly (a cubic
/// smoothstep) from 0 at `x_form` to 1 at `x_full` (the vortex forming
/// behind the body) and falls smoothly back to 0 between `x_fade` and
/// `x_fade + 2a` (so that only a finite set of vortices acts and the field
/// is exactly periodic in `theta`). The core spreads viscously with its age
/// `(x - x_form)/Uc`: `rc² = rc0² + 4 nu age` (Lamb–Oseen).
///
/// The field is exact for this configuration: velocity and vorticity are
/// sums over the vortices of `lamb_oseen` plus the stream.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct Street {
    pub u_inf: f64,
    pub uc: f64,
    pub a: f64,
    pub b: f64,
    pub gamma: f64,
    pub rc0: f64,
    pub nu: f64,
    pub x_form: f64,
    pub x_full: f64,
    pub x_fade: f64,
}

impl Street {
    /// The street behind a cylinder of diameter `d` in a stream `u_inf`.
    ///
    /// `gamma` follows from the street's self-induced speed relative to the
    /// fluid, `U - Uc = gamma/(2a) tanh(pi b/a)` (von Kármán's infinite
    /// point-vortex street; Lamb 1932, *Hydrodynamics* §156, from memory).
    /// `x_end` is the downstream end of the measured domain; the fade starts
    /// one wavelength beyond it.
    #[allow(clippy::too_many_arguments)]
    pub(crate) fn behind_cylinder(
        u_inf: f64,
        d: f64,
        strouhal: f64,
        kappa: f64,
        b_over_a: f64,
        rc0_over_d: f64,
        nu: f64,
        x_end: f64,
    ) -> Street {
        let f = strouhal * u_inf / d;
        let uc = kappa * u_inf;
        let a = uc / f;
        let b = b_over_a * a;
        let gamma = 2.0 * a * (u_inf - uc) / (std::f64::consts::PI * b / a).tanh();
        Street {
            u_inf,
            uc,
            a,
            b,
            gamma,
            rc0: rc0_over_d * d,
            nu,
            x_form: 0.5 * d,
            x_full: 2.0 * d,
            x_fade: x_end.max(2.0 * d) + a,
        }
    }

    /// The circulation weight `w(x)` (see the type's doc).
    pub(crate) fn weight(&self, x: f64) -> f64 {
        fn smooth(s: f64) -> f64 {
            let s = s.clamp(0.0, 1.0);
            s * s * (3.0 - 2.0 * s)
        }
        smooth((x - self.x_form) / (self.x_full - self.x_form))
            * (1.0 - smooth((x - self.x_fade) / (2.0 * self.a)))
    }

    /// The vortices acting at phase `theta` (radians): `(x, y, gamma, rc)`.
    pub(crate) fn vortices(&self, theta: f64) -> Vec<(f64, f64, f64, f64)> {
        let frac = (theta / std::f64::consts::TAU).rem_euclid(1.0);
        let x_last = self.x_fade + 2.0 * self.a;
        let n_max = ((x_last - self.x_form) / self.a).ceil() as i64 + 1;
        let mut out = Vec::new();
        for n in -1..=n_max {
            for (shift, y, sign) in [(0.0, 0.5 * self.b, -1.0), (0.5, -0.5 * self.b, 1.0)] {
                let x = self.x_form + self.a * (n as f64 + frac + shift);
                let w = self.weight(x);
                if w > 0.0 {
                    let age = ((x - self.x_form) / self.uc).max(0.0);
                    let rc = (self.rc0 * self.rc0 + 4.0 * self.nu * age).sqrt();
                    out.push((x, y, sign * self.gamma * w, rc));
                }
            }
        }
        out
    }
}

/// The street's field at `(x, y)` given its vortices (from
/// `Street::vortices`): the uniform stream plus every Lamb–Oseen vortex.
pub(crate) fn vortex_street(
    x: f64,
    y: f64,
    street: &Street,
    vortices: &[(f64, f64, f64, f64)],
) -> Sample {
    let mut s = Sample {
        u: street.u_inf,
        v: 0.0,
        omega: 0.0,
    };
    for &(xc, yc, g, rc) in vortices {
        s = s + lamb_oseen(x, y, xc, yc, g, rc);
    }
    s
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::testutil::assert_close;
    use std::f64::consts::PI;

    /// Curl by fourth-order central differences with step `h`.
    fn curl(f: impl Fn(f64, f64) -> Sample, x: f64, y: f64, h: f64) -> f64 {
        let d = |g: &dyn Fn(f64) -> f64| {
            (-g(2.0 * h) + 8.0 * g(h) - 8.0 * g(-h) + g(-2.0 * h)) / (12.0 * h)
        };
        d(&|s| f(x + s, y).v) - d(&|s| f(x, y + s).u)
    }

    #[test]
    fn lamb_oseen_peak_swirl_matches_saffman_1992() {
        // Saffman, Vortex Dynamics (1992): peak u_theta at r = 1.1209064 rc,
        // equal to 0.6381727 gamma/(2 pi rc). Scan finely, then refine by
        // golden section on the analytic profile.
        let (gamma, rc) = (2.5e-3, 3.0e-3);
        let swirl = |r: f64| lamb_oseen(r, 0.0, 0.0, 0.0, gamma, rc).v;
        let (mut lo, mut hi) = (0.5 * rc, 2.0 * rc);
        let g = (5f64.sqrt() - 1.0) / 2.0;
        for _ in 0..200 {
            let m1 = hi - g * (hi - lo);
            let m2 = lo + g * (hi - lo);
            if swirl(m1) < swirl(m2) {
                lo = m1
            } else {
                hi = m2
            }
        }
        let r = 0.5 * (lo + hi);
        assert_close(
            r / rc,
            LAMB_OSEEN_PEAK_RADIUS,
            2e-7,
            0.0,
            "peak radius / rc",
        );
        assert_close(
            swirl(r) / (gamma / (2.0 * PI * rc)),
            LAMB_OSEEN_PEAK_SWIRL,
            1e-7,
            0.0,
            "peak swirl",
        );
    }

    #[test]
    fn lamb_oseen_peak_agrees_with_scipy_bounded_minimisation() {
        // reference library: scipy.optimize.minimize_scalar (bounded) on the
        // same profile written independently in numpy
        // (tests/reference/lamb_oseen.py)
        let v = crate::testutil::reference("lamb_oseen");
        let v = [
            crate::testutil::float(&v["radius"]),
            crate::testutil::float(&v["swirl"]),
        ];
        let r = v[0];
        // ours at scipy's radius (rc = 1, gamma = 2 pi: u_theta = (1-e^-r²)/r)
        let ours = lamb_oseen(r, 0.0, 0.0, 0.0, 2.0 * PI, 1.0).v;
        assert_close(ours, v[1], 1e-14, 0.0, "swirl at scipy's optimum");
        assert_close(
            r,
            LAMB_OSEEN_PEAK_RADIUS,
            1e-6,
            0.0,
            "scipy's radius vs Saffman",
        );
    }

    #[test]
    fn lamb_oseen_vorticity_is_the_curl_and_centre_is_finite() {
        let (gamma, rc) = (-1.7e-3, 2.0e-3);
        let f = |x, y| lamb_oseen(x, y, 1e-3, -2e-3, gamma, rc);
        for &(x, y) in &[
            (1e-3, -2e-3),
            (2.5e-3, -1e-3),
            (-4e-3, 3e-3),
            (1e-3 + 1e-9, -2e-3),
        ] {
            let w = curl(f, x, y, 1e-5);
            assert_close(
                w,
                f(x, y).omega,
                1e-6 * gamma.abs() / (rc * rc),
                1e-7,
                "curl",
            );
        }
        let c = f(1e-3, -2e-3);
        assert_eq!((c.u, c.v), (0.0, 0.0));
        assert_close(c.omega, gamma / (PI * rc * rc), 0.0, 1e-15, "centre omega");
        // circulation far out: u_theta * 2 pi r -> gamma (Stokes), r = 10 rc
        let r = 10.0 * rc;
        let s = lamb_oseen(1e-3 + r, -2e-3, 1e-3, -2e-3, gamma, rc);
        assert_close(s.v * 2.0 * PI * r, gamma, 0.0, 1e-12, "far circulation");
    }

    #[test]
    fn solid_body_vorticity_is_twice_the_rotation_rate() {
        // fact of the trade: omega = 2 Omega
        let om = 3.25;
        let f = |x, y| solid_body(x, y, 0.01, -0.02, om);
        for &(x, y) in &[(0.0, 0.0), (0.03, 0.01), (-0.2, 0.5)] {
            assert_close(curl(f, x, y, 1e-4), 2.0 * om, 1e-9, 0.0, "curl");
            assert_eq!(f(x, y).omega, 6.5);
        }
        let s = f(0.01, -0.01);
        assert_close(s.u, -om * 0.01, 1e-15, 0.0, "u");
    }

    #[test]
    fn cylinder_potential_flow_is_irrotational_and_divergence_free() {
        // curl and divergence of a potential flow vanish (Batchelor 1967);
        // evaluated with fine fourth-order differences (truncation ~h^4).
        let (r0, u0) = (5e-3, 0.2);
        let f = |x, y| cylinder(x, y, 0.0, 0.0, r0, u0).unwrap();
        let h = 1e-6;
        for &(x, y) in &[(6e-3, 1e-3), (-5e-3, 4e-3), (0.0, -5.5e-3), (2e-2, 1e-2)] {
            let w = curl(f, x, y, h);
            assert!(
                w.abs() < 1e-6,
                "curl at ({x},{y}) = {w:e} 1/s (scale U/R = 40)"
            );
            let dudx = (f(x + h, y).u - f(x - h, y).u) / (2.0 * h);
            let dvdy = (f(x, y + h).v - f(x, y - h).v) / (2.0 * h);
            assert!((dudx + dvdy).abs() < 1e-4, "divergence {:e}", dudx + dvdy);
        }
        // stagnation points and the surface speed 2U at theta = 90°
        let s = f(-r0, 0.0);
        assert_close(s.u, 0.0, 1e-15, 0.0, "front stagnation");
        assert_close(f(0.0, r0).u, 2.0 * u0, 1e-15, 0.0, "surface top speed");
        assert!(cylinder(1e-3, 1e-3, 0.0, 0.0, r0, u0).is_none());
    }

    #[test]
    fn taylor_green_vorticity_is_the_curl_and_decays() {
        let (u0, k, nu, t) = (0.1, 2.0 * PI / 0.04, 1e-6, 3.0);
        let f = |x, y| taylor_green(x, y, t, u0, k, nu);
        for &(x, y) in &[(0.003, 0.007), (0.011, -0.002)] {
            assert_close(curl(f, x, y, 1e-6), f(x, y).omega, 1e-6, 1e-8, "curl");
        }
        let s0 = taylor_green(0.005, 0.0, 0.0, u0, k, nu);
        let s1 = taylor_green(0.005, 0.0, t, u0, k, nu);
        assert_close(
            s1.u / s0.u,
            (-2.0 * nu * k * k * t).exp(),
            0.0,
            1e-14,
            "decay",
        );
    }

    #[test]
    fn street_is_periodic_in_phase_and_vorticity_is_the_curl() {
        let s = Street::behind_cylinder(0.15, 0.01, 0.21, 0.85, 0.281, 0.25, 1e-6, 0.1);
        // self-induced speed relation (von Kármán street, Lamb 1932 §156)
        assert_close(
            s.gamma / (2.0 * s.a) * (PI * s.b / s.a).tanh(),
            0.15 - s.uc,
            1e-15,
            1e-12,
            "street speed",
        );
        assert_close(s.a, 0.85 * 0.01 / 0.21, 0.0, 1e-12, "wavelength");
        let (x, y) = (0.047, 0.004);
        for theta in [0.3, 2.0, 5.9] {
            let a = vortex_street(x, y, &s, &s.vortices(theta));
            let b = vortex_street(x, y, &s, &s.vortices(theta + std::f64::consts::TAU));
            assert_close(a.u, b.u, 1e-12, 0.0, "periodic u");
            assert_close(a.omega, b.omega, 1e-9, 0.0, "periodic omega");
            let vs = s.vortices(theta);
            let w = curl(|x, y| vortex_street(x, y, &s, &vs), x, y, 1e-6);
            assert_close(w, a.omega, 1e-5, 1e-7, "street curl");
        }
        // far from the street the two rows of opposite sign nearly cancel:
        // for the infinite street the induced velocity decays like
        // exp(-2 pi |y| / a) (Lamb 1932 §156); the finite street's ends leave
        // an algebraic tail. At |y| = 2a the street induces under 2 % of U,
        // and less than a fifth of what its upper row alone induces.
        let vs = s.vortices(1.0);
        let upper: Vec<_> = vs.iter().copied().filter(|v| v.1 > 0.0).collect();
        for y in [2.0 * s.a, -2.0 * s.a] {
            let far = vortex_street(0.06, y, &s, &vs);
            let ind = (far.u - 0.15).hypot(far.v);
            let one = vortex_street(0.06, y, &s, &upper);
            let single = (one.u - 0.15).hypot(one.v);
            // measured here: street 0.6 % and 1.3 % of U, one row 10-11 %
            assert!(ind < 0.02 * 0.15 && single > 0.08 * 0.15, "{far:?} {one:?}");
            assert!(ind < 0.2 * single, "rows must cancel: {ind} vs {single}");
        }
        // upper row clockwise, lower anticlockwise
        assert!(vs.iter().all(|v| (v.1 > 0.0) == (v.2 < 0.0)));
    }
}
