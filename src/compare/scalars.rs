//! Scalar results of one run for the table across conditions: peak
//! vorticity, circulation of the strongest vortex, and the velocity deficit
//! at a wake station, each with its standard uncertainty.
//!
//! - Peak vorticity: the node of largest |ω̄| among the well-determined
//!   nodes (u(ω̄) at most 3 × its median over the field, which keeps a
//!   poorly sampled edge or corner node from posing as the peak); its
//!   signed value and its `omega_mean_unc`.
//! - Strongest vortex: the 4-connected region around that node where ω̄ has
//!   the peak's sign and |ω̄| ≥ θ·|ω̄_peak| (θ = `vortex_threshold`, 0.2 by
//!   default). Circulation Γ = Σ ω̄ dA over the region (Stokes' theorem,
//!   the area form; common practice), dA = dx·dy. Its uncertainty
//!   u(Γ) = dA·sqrt(Σ u(ω̄)²) assumes independent node errors; vorticity
//!   errors of neighbours are correlated through the shared stencil, so
//!   this understates u(Γ) and should be read as a lower estimate.
//!   Threshold region of a Lamb–Oseen vortex: Γ(θ) = Γ_total·(1 − θ)
//!   (tested).
//! - Strongest phase-mean vortex (runs with phase bins): the same region
//!   rule in every bin's phase-mean field; the value is the mean over bins
//!   of |Γ_b|, its uncertainty sqrt(Σ u(Γ_b)²)/n (bins are independent
//!   frame sets). Shed vortices are usually sharper in the phase means
//!   than in the ensemble mean, where they smear into shear layers.
//! - Wake deficit at station x: ΔU = U_e − min_y ū(x, y), with U_e the
//!   run's reference velocity when given, otherwise the profile's maximum.
//!   u(ΔU) = sqrt(u(ū_min)² + u(ū_max)²) (the second term only when U_e is
//!   the profile maximum).
//!
//! Nodes with NaN are skipped; a run without the needed columns gives no
//! row.

use super::interp::sample;
use crate::field::Conditions;
use crate::field::NodeTable;
pub(crate) use crate::result::Scalar;

pub(crate) use crate::stats::finish::peak_node;

/// The strongest vortex: (circulation, its uncertainty, area in m², nodes).
pub(crate) fn strongest_vortex(t: &NodeTable, threshold: f64) -> Option<(f64, f64, f64, usize)> {
    let w = t.get("omega_mean")?;
    let u = t.get("omega_mean_unc");
    let g = t.grid;
    let (k0, peak) = peak_node(t)?;
    if peak == 0.0 {
        return None;
    }
    let lim = threshold * peak.abs();
    let inside = |k: usize| w[k].is_finite() && w[k] * peak.signum() >= lim;
    let mut seen = vec![false; g.len()];
    let mut stack = vec![k0];
    seen[k0] = true;
    let (mut sum, mut var, mut n) = (0.0, 0.0, 0usize);
    while let Some(k) = stack.pop() {
        sum += w[k];
        var += u.map_or(f64::NAN, |u| u[k] * u[k]);
        n += 1;
        let (j, i) = (k / g.nx, k % g.nx);
        let mut push = |jj: usize, ii: usize| {
            let kk = jj * g.nx + ii;
            if !seen[kk] && inside(kk) {
                seen[kk] = true;
                stack.push(kk);
            }
        };
        if i > 0 {
            push(j, i - 1);
        }
        if i + 1 < g.nx {
            push(j, i + 1);
        }
        if j > 0 {
            push(j - 1, i);
        }
        if j + 1 < g.ny {
            push(j + 1, i);
        }
    }
    let da = g.dx * g.dy;
    Some((sum * da, var.sqrt() * da, n as f64 * da, n))
}

/// The scalars of one run (see the module doc).
pub(crate) fn run_scalars(
    id: &str,
    t: &NodeTable,
    phase: &[crate::stats::PhaseBin],
    cond: &Conditions,
    threshold: f64,
    wake_x: Option<f64>,
) -> Vec<Scalar> {
    let mut out = Vec::new();
    let row = |name: &str, value: f64, uncertainty: f64, unit: &str| Scalar {
        run: id.to_string(),
        name: name.to_string(),
        value,
        uncertainty,
        unit: unit.to_string(),
    };
    if let Some((k, v)) = peak_node(t) {
        let u = t.get("omega_mean_unc").map_or(f64::NAN, |u| u[k]);
        out.push(row("peak vorticity", v, u, "1/s"));
    }
    if let Some((gam, ug, area, _)) = strongest_vortex(t, threshold) {
        out.push(row("circulation of the strongest vortex", gam, ug, "m²/s"));
        out.push(row("area of the strongest vortex", area, f64::NAN, "m²"));
    }
    let per_bin: Vec<(f64, f64)> = phase
        .iter()
        .filter_map(|b| strongest_vortex(&b.table, threshold).map(|v| (v.0.abs(), v.1)))
        .collect();
    if !per_bin.is_empty() {
        let n = per_bin.len() as f64;
        let mean = per_bin.iter().map(|p| p.0).sum::<f64>() / n;
        let u = per_bin.iter().map(|p| p.1 * p.1).sum::<f64>().sqrt() / n;
        out.push(row(
            "circulation of the strongest phase-mean vortex",
            mean,
            u,
            "m²/s",
        ));
    }
    if let Some((d, u, _)) = wake_deficit(t, cond, wake_x) {
        out.push(row("velocity deficit", d, u, "m/s"));
    }
    out
}

/// (ΔU, u(ΔU), station x) at `x` (default: the last column).
pub(crate) fn wake_deficit(
    t: &NodeTable,
    cond: &Conditions,
    x: Option<f64>,
) -> Option<(f64, f64, f64)> {
    let um = t.get("u_mean")?;
    let uu = t.get("u_mean_unc");
    let g = t.grid;
    let xs = x.unwrap_or(g.x(g.nx - 1));
    let prof: Vec<(f64, f64)> = (0..g.ny)
        .map(|j| {
            let y = g.y(j);
            (
                sample(&g, um, xs, y),
                uu.map_or(f64::NAN, |u| sample(&g, u, xs, y)),
            )
        })
        .filter(|p| p.0.is_finite())
        .collect();
    let min = prof.iter().copied().min_by(|a, b| a.0.total_cmp(&b.0))?;
    let (ue, uue) = match cond.velocity {
        Some(u) => (u, 0.0),
        None => prof.iter().copied().max_by(|a, b| a.0.total_cmp(&b.0))?,
    };
    Some((ue - min.0, min.1.hypot(uue), xs))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::plot::fixtures::{ensemble, grid, Vortex};
    use crate::testutil::assert_close;

    #[test]
    fn lamb_oseen_threshold_region_holds_one_minus_theta_of_the_circulation() {
        // Lamb–Oseen: ω ∝ exp(−r²/rc²), so the region |ω| ≥ θ ω_peak is
        // r² ≤ rc² ln(1/θ), holding Γ(1 − θ) (integral of the Gaussian).
        let v = Vortex {
            gamma: 0.004,
            rc: 0.004,
            xc: 0.0315,
            yc: 0.0005,
            u_inf: 0.0,
        };
        let g = crate::field::Grid {
            dx: 0.25e-3,
            dy: 0.25e-3,
            nx: 256,
            ny: 192,
            ..grid(1, 1)
        };
        let t = ensemble(g, &v, 0.004, 2.0, 10);
        for theta in [0.2, 0.5] {
            let (gam, ug, area, n) = strongest_vortex(&t, theta).unwrap();
            assert_close(gam, 0.004 * (1.0 - theta), 0.0, 0.01, "circulation");
            // Area π rc² ln(1/θ).
            let a = std::f64::consts::PI * v.rc * v.rc * (1.0 / theta).ln();
            assert_close(area, a, 0.0, 0.01, "area");
            // u(Γ) = dA · 2 · sqrt(n) with u(ω) = 2 1/s at every node.
            assert_close(
                ug,
                g.dx * g.dy * 2.0 * (n as f64).sqrt(),
                0.0,
                1e-12,
                "u(Γ)",
            );
        }
    }

    /// An ensemble table of a Lamb-Oseen vortex on 10 x 8 nodes
    /// (`plot::fixtures`), u(omega_mean) 2 1/s everywhere.
    fn vortex_table() -> NodeTable {
        let v = Vortex {
            gamma: 0.004,
            rc: 0.004,
            xc: 0.005,
            yc: 0.0,
            u_inf: 0.0,
        };
        ensemble(grid(10, 8), &v, 0.004, 2.0, 10)
    }

    #[test]
    fn a_poorly_determined_node_is_not_the_peak() {
        let mut t = vortex_table();
        let (k_true, w_true) = peak_node(&t).unwrap();
        let k_bad = 0;
        for (n, c) in t.columns.iter_mut() {
            if n == "omega_mean" {
                c[k_bad] = -10.0 * w_true;
            }
            if n == "omega_inst_unc" {
                c[k_bad] = 50.0;
            }
        }
        assert_eq!(peak_node(&t).unwrap().0, k_true);
        // a node seen in few frames is poorly determined too
        for (n, c) in t.columns.iter_mut() {
            if n == "omega_inst_unc" {
                c[k_bad] = c[k_true];
            }
            if n == "n_valid" {
                c[k_bad] = 0.05 * c[k_true];
            }
        }
        assert_eq!(peak_node(&t).unwrap().0, k_true);
    }

    #[test]
    fn a_core_with_a_large_truncation_part_stays_the_peak() {
        // u(omega_mean) 20 x the field's median at the peak, all of it
        // systematic (omega_inst_unc and n_valid as elsewhere): still the peak.
        let mut t = vortex_table();
        let (k_true, _) = peak_node(&t).unwrap();
        for (n, c) in t.columns.iter_mut() {
            if n == "omega_mean_unc" {
                c[k_true] = 40.0;
            }
        }
        assert_eq!(peak_node(&t).unwrap().0, k_true);
    }

    #[test]
    fn wake_deficit_of_a_gaussian_wake() {
        // u = U (1 − 0.3 exp(−y²/b²)): deficit 0.3 U at the centreline.
        let g = grid(16, 47);
        let mut t = NodeTable::new(g);
        let mut u = Vec::new();
        for j in 0..g.ny {
            for _ in 0..g.nx {
                let y = g.y(j);
                u.push(0.5 * (1.0 - 0.3 * (-(y / 0.005).powi(2)).exp()));
            }
        }
        t.push("u_mean", u);
        t.push("u_mean_unc", vec![0.003; g.len()]);
        let given = Conditions {
            velocity: Some(0.5),
            ..Default::default()
        };
        let (d, ud, _) = wake_deficit(&t, &given, None).unwrap();
        // y = 0 is not a node (y0 = −23.5 mm): min at y = ±0.5 mm.
        assert_close(
            d,
            0.15 * (-(0.5f64 / 5.0).powi(2)).exp(),
            1e-12,
            0.0,
            "deficit",
        );
        assert_close(ud, 0.003, 1e-12, 0.0, "u(deficit) with given U");
        let (d2, ud2, _) = wake_deficit(&t, &Conditions::default(), Some(0.0071)).unwrap();
        assert!(d2 < d && d2 > 0.9 * d, "{d2} vs {d}");
        assert_close(
            ud2,
            0.003 * 2f64.sqrt(),
            1e-12,
            0.0,
            "u(deficit) from profile",
        );
    }
}
