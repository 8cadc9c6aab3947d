//! A plain-words reading of a finished budget: where it closes, which terms
//! dominate, and where the residual is significant.
//!
//! Owns: the numbers behind the report's budget section and the sentences
//! that state them. Does not own: the terms (`terms`) or the page
//! (`report`).
//!
//! Every count is over slice-nodes (a node in one phase bin or one kept
//! frame) where the residual and its uncertainty are finite, exactly the
//! rows of `budget.csv` whose `significant` is 0 or 1; so each fraction
//! can be recomputed from that file. Vortex cores are the nodes of a slice
//! where Γ2 of the slice's mean (or frame) velocity exceeds 2/π
//! (Graftieaux, Michard & Grosjean 2001; `derive::quantities::gamma`, disc
//! of `gamma_radius` nodes). "Near the edge" means within two nodes
//! (Chebyshev distance) of a node without a residual or of the grid's
//! border. Term magnitudes are mean |term| over the slice-nodes where the
//! term is finite (the turbulent term has one node less of reach).

use ndarray::Array2;

use super::terms::{Budget, SliceBudget, TERMS};

/// The counts and magnitudes behind the report's budget section.
#[derive(Debug, Clone, PartialEq)]
pub struct Reading {
    /// Slice-nodes with a residual, and those where it is significant.
    pub nodes: usize,
    pub significant: usize,
    /// The same within vortex cores.
    pub core_nodes: usize,
    pub core_significant: usize,
    /// Significant slice-nodes within two nodes of the budget's edge.
    pub significant_near_edge: usize,
    /// Mean |term| (1/s²) per term (`TERMS` order) over slice-nodes with a
    /// residual; NaN where a term is nowhere finite.
    pub mean_abs: [f64; 5],
    /// The same within vortex cores.
    pub core_mean_abs: [f64; 5],
    /// Coverage factor of the significance test.
    pub k: f64,
}

/// Γ2 > 2/π of a slice's velocity, per node (row-major).
fn cores(b: &Budget, s: &SliceBudget, radius: usize) -> Vec<bool> {
    let g = b.grid;
    let arr = |v: &[f64]| Array2::from_shape_vec(g.shape(), v.to_vec()).expect("grid shape");
    let (u, v) = (arr(&s.u), arr(&s.v));
    let ok = Array2::from_shape_fn(g.shape(), |(j, i)| {
        u[[j, i]].is_finite() && v[[j, i]].is_finite()
    });
    let (_, g2) = crate::derive::quantities::gamma(&u, &v, &ok, radius, g.dx, g.dy);
    g2.iter().map(|x| *x > 2.0 / std::f64::consts::PI).collect()
}

/// Is node `k` within two nodes of a node where `has` is false, or of the
/// grid's border?
fn near_edge(b: &Budget, has: &[bool], k: usize) -> bool {
    let g = b.grid;
    let (j, i) = ((k / g.nx) as i64, (k % g.nx) as i64);
    (-2..=2).any(|dj| {
        (-2..=2).any(|di| {
            let (jj, ii) = (j + dj, i + di);
            jj < 0
                || ii < 0
                || jj >= g.ny as i64
                || ii >= g.nx as i64
                || !has[jj as usize * g.nx + ii as usize]
        })
    })
}

/// The reading of budget `b`; `gamma_radius` the Γ2 disc in nodes.
pub(crate) fn read(b: &Budget, gamma_radius: usize) -> Reading {
    let mut r = Reading {
        nodes: 0,
        significant: 0,
        core_nodes: 0,
        core_significant: 0,
        significant_near_edge: 0,
        mean_abs: [0.0; 5],
        core_mean_abs: [0.0; 5],
        k: b.k,
    };
    let (mut n_all, mut n_core) = ([0usize; 5], [0usize; 5]);
    for s in &b.slices {
        let has: Vec<bool> = (0..b.grid.len())
            .map(|k| s.residual[k].is_finite() && s.residual_unc[k].is_finite())
            .collect();
        let core = cores(b, s, gamma_radius);
        for k in (0..b.grid.len()).filter(|&k| has[k]) {
            let sig = s.significant(k, b.k);
            r.nodes += 1;
            r.significant += usize::from(sig);
            if sig && near_edge(b, &has, k) {
                r.significant_near_edge += 1;
            }
            if core[k] {
                r.core_nodes += 1;
                r.core_significant += usize::from(sig);
            }
            for t in 0..TERMS.len() {
                let x = s.value[t][k].abs();
                if x.is_finite() {
                    r.mean_abs[t] += x;
                    n_all[t] += 1;
                    if core[k] {
                        r.core_mean_abs[t] += x;
                        n_core[t] += 1;
                    }
                }
            }
        }
    }
    for t in 0..TERMS.len() {
        r.mean_abs[t] /= n_all[t] as f64;
        r.core_mean_abs[t] /= n_core[t] as f64;
        if n_all[t] == 0 {
            r.mean_abs[t] = f64::NAN;
        }
        if n_core[t] == 0 {
            r.core_mean_abs[t] = f64::NAN;
        }
    }
    r
}

/// `a / b`, NaN when `b` is 0.
pub(crate) fn frac(a: usize, b: usize) -> f64 {
    if b == 0 {
        f64::NAN
    } else {
        a as f64 / b as f64
    }
}

/// A percentage with one decimal ("92.4 %"), or "–".
pub(crate) fn pct(x: f64) -> String {
    if x.is_finite() {
        format!("{:.1} %", 100.0 * x)
    } else {
        "–".into()
    }
}

/// Term names ordered by decreasing magnitude `m` (finite ones only).
pub(crate) fn ranked(m: &[f64; 5]) -> Vec<(&'static str, f64)> {
    let mut v: Vec<(&'static str, f64)> = TERMS
        .iter()
        .copied()
        .zip(m.iter().copied())
        .filter(|(_, x)| x.is_finite())
        .collect();
    v.sort_by(|a, b| b.1.total_cmp(&a.1));
    v
}

impl Reading {
    /// The reading in plain words, one sentence per string.
    pub(crate) fn sentences(&self) -> Vec<String> {
        let t = crate::describe::tick;
        if self.nodes == 0 {
            return vec!["The budget has no node with a residual (a missing viscosity or frequency, or too few frames per bin): nothing to read.".into()];
        }
        let mut out = vec![format!(
            "The budget closes within k = {} standard uncertainties at {} of the {} slice-nodes with a residual; the residual is significant at {} ({}).",
            t(self.k),
            pct(1.0 - frac(self.significant, self.nodes)),
            self.nodes,
            pct(frac(self.significant, self.nodes)),
            self.significant
        )];
        if self.core_nodes > 0 {
            out.push(format!(
                "In the vortex cores (Γ2 > 2/π, {} slice-nodes) it closes at {}.",
                self.core_nodes,
                pct(1.0 - frac(self.core_significant, self.core_nodes))
            ));
        } else {
            out.push("No vortex core (Γ2 > 2/π) was found in the slices with a budget.".into());
        }
        let rank = ranked(&self.mean_abs);
        if let [(a, x), (b, y), ..] = rank[..] {
            out.push(format!(
                "The largest terms are {a} (mean |·| {} 1/s²) and {b} ({} 1/s²); the smallest is {} ({} 1/s²).",
                t(sig3(x)),
                t(sig3(y)),
                rank.last().map_or("", |r| r.0),
                t(sig3(rank.last().map_or(f64::NAN, |r| r.1)))
            ));
        }
        let rc = ranked(&self.core_mean_abs);
        if let [(a, _), (b, _), ..] = rc[..] {
            out.push(format!("In the cores, {a} and {b} dominate."));
        }
        if self.significant > 0 {
            out.push(format!(
                "Of the significant nodes, {} lie in vortex cores and {} within two nodes of the edge of the region with a budget.",
                pct(frac(self.core_significant, self.significant)),
                pct(frac(self.significant_near_edge, self.significant))
            ));
        }
        out
    }
}

/// `x` rounded to three significant digits.
fn sig3(x: f64) -> f64 {
    if x == 0.0 || !x.is_finite() {
        return x;
    }
    let p = 10f64.powi(2 - x.abs().log10().floor() as i32);
    (x * p).round() / p
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ranking_rounding_and_fractions() {
        let m = [1.0, 30.0, f64::NAN, 2.0, 0.5];
        let r = ranked(&m);
        assert_eq!(
            r.iter().map(|x| x.0).collect::<Vec<_>>(),
            ["advection", "diffusion", "unsteady", "turbulent"]
        );
        assert_eq!(sig3(123456.0), 123000.0);
        assert_eq!(sig3(0.0012345), 0.00123);
        assert_eq!(pct(frac(1, 3)), "33.3 %");
        assert_eq!(pct(frac(1, 0)), "–");
    }
}
