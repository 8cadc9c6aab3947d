//! Second-derivative stencils: the Laplacian the viscous term of the
//! vorticity budget needs.
//!
//! Owns: the three-point second difference along an axis and the five-point
//! Laplacian, as `Stencil`s with the 1/h² of the grid pitch in the weights.
//! Does not own: what they are composed with (the budget composes them
//! after the vorticity stencil with `Stencil::after`, so the Laplacian of
//! vorticity is one stencil on u and one on v, and its noise correlation
//! with every other term follows from shared taps).
//!
//! Method (common practice; any numerical-analysis text, e.g. LeVeque 2007,
//! *Finite Difference Methods*, §1.5): `f'' ≈ (f[-1] - 2 f[0] + f[1]) / h²`,
//! truncation `h² f''''/12`; noise factor `sqrt(1 + 4 + 1)/h² = 2.449/h²`
//! along one axis (independent unit errors). The five-point Laplacian is
//! the sum along x and y: truncation `(dx² f_xxxx + dy² f_yyyy)/12`, noise
//! factor `sqrt(2/dx⁴ + 2/dy⁴ + (2/dx² + 2/dy²)²)` (`20^½/h²` = 4.47/h² on a
//! square grid). Second differences amplify noise by 1/h² where first ones
//! do by 1/h: smooth first (`[smoothing]`) when the viscous term matters.
//!
//! Edges: a stencil is used only where every tap lands on a node with a
//! value (`Stencil::fits`); the budget leaves other nodes NaN.

use super::derivatives::Axis;
use super::{Stencil, Tap};

/// `(f[-1] - 2 f[0] + f[1]) / h²` along `axis`.
pub(crate) fn second(axis: Axis, h: f64) -> Stencil {
    let k = 1.0 / (h * h);
    let tap = |a: i32, w: f64| match axis {
        Axis::X => Tap { dj: 0, di: a, w },
        Axis::Y => Tap { dj: a, di: 0, w },
    };
    Stencil::new(vec![tap(-1, k), tap(0, -2.0 * k), tap(1, k)])
}

/// The five-point Laplacian `d²/dx² + d²/dy²` on pitches `dx`, `dy`.
pub(crate) fn laplacian(dx: f64, dy: f64) -> Stencil {
    second(Axis::X, dx).combine(1.0, &second(Axis::Y, dy), 1.0)
}

#[cfg(test)]
mod tests {
    use super::*;
    use ndarray::Array2;

    #[test]
    fn laplacian_of_a_quadratic_is_exact_and_noise_factor_matches_the_formula() {
        // f = 3x² - 2y² + xy on dx = 0.1, dy = 0.2: laplacian 6 - 4 = 2 exactly.
        let (dx, dy) = (0.1, 0.2);
        let f = Array2::from_shape_fn((5, 5), |(j, i)| {
            let (x, y) = (i as f64 * dx, j as f64 * dy);
            3.0 * x * x - 2.0 * y * y + x * y
        });
        let l = laplacian(dx, dy);
        assert!((l.apply_at(&f, 2, 2) - 2.0).abs() < 1e-9);
        assert_eq!(l.taps.len(), 5);
        let want =
            (2.0 / dx.powi(4) + 2.0 / dy.powi(4) + (2.0 / (dx * dx) + 2.0 / (dy * dy)).powi(2))
                .sqrt();
        assert!((l.noise_factor() - want).abs() < 1e-9 * want);
        // square grid: sqrt(20)/h²
        assert!((laplacian(1.0, 1.0).noise_factor() - 20f64.sqrt()).abs() < 1e-12);
    }

    #[test]
    fn second_difference_truncation_is_h2_fourth_derivative_over_12() {
        // f = sin x: f'' = -sin x; error ≈ h² f''''/12 = h² sin x / 12.
        let h = 0.05;
        let x0 = 0.7;
        let f = Array2::from_shape_fn((1, 3), |(_, i)| (x0 + (i as f64 - 1.0) * h).sin());
        let err = second(Axis::X, h).apply_at(&f, 0, 1) + x0.sin();
        let want = h * h * x0.sin() / 12.0;
        assert!((err - want).abs() < 1e-3 * want, "{err} vs {want}");
    }
}
