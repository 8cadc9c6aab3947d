//! Test data for figures, comparisons and the report: a Lamb–Oseen vortex
//! in a uniform stream as an ensemble mean with constant uncertainty, a few
//! frame records, a convergence trace and phase bins.
//!
//! Lamb–Oseen vortex (Lamb 1932, Hydrodynamics §334a; Saffman 1992,
//! Vortex Dynamics §2.3): u_θ(r) = Γ/(2πr)·(1 − exp(−r²/r_c²)),
//! ω(r) = Γ/(π r_c²)·exp(−r²/r_c²); total circulation Γ.

use crate::field::table::{Table, Values};
use crate::field::{FrameMeta, Grid, NodeTable};
use crate::result::{FrameRecord, RunResult};
use crate::stats::{PhaseBin, RunStats};
use crate::{fill, validate};

/// The fixture's vortex: circulation (m²/s), core radius (m), centre (m),
/// free stream (m/s).
#[derive(Debug, Clone, Copy)]
pub(crate) struct Vortex {
    pub gamma: f64,
    pub rc: f64,
    pub xc: f64,
    pub yc: f64,
    pub u_inf: f64,
}

impl Vortex {
    pub(crate) fn velocity(&self, x: f64, y: f64) -> (f64, f64) {
        let (dx, dy) = (x - self.xc, y - self.yc);
        let r2 = dx * dx + dy * dy;
        if r2 == 0.0 {
            return (self.u_inf, 0.0);
        }
        let f = self.gamma / (2.0 * std::f64::consts::PI * r2)
            * (1.0 - (-r2 / (self.rc * self.rc)).exp());
        (self.u_inf - f * dy, f * dx)
    }
    pub(crate) fn omega(&self, x: f64, y: f64) -> f64 {
        let r2 = (x - self.xc).powi(2) + (y - self.yc).powi(2);
        self.gamma / (std::f64::consts::PI * self.rc * self.rc) * (-r2 / (self.rc * self.rc)).exp()
    }
}

pub(crate) fn grid(nx: usize, ny: usize) -> Grid {
    Grid {
        nx,
        ny,
        x0: 0.0,
        y0: -0.0235,
        dx: 1.0e-3,
        dy: 1.0e-3,
    }
}

/// An ensemble table of every docs/interface.md column for `v` on `g`, with
/// constant uncertainties `u_unc` (m/s) and `w_unc` (1/s), n samples.
pub(crate) fn ensemble(g: Grid, v: &Vortex, u_unc: f64, w_unc: f64, n: usize) -> NodeTable {
    let mut cols: Vec<Vec<f64>> = vec![Vec::new(); 14];
    for j in 0..g.ny {
        for i in 0..g.nx {
            let (x, y) = (g.x(i), g.y(j));
            let (u, vv) = v.velocity(x, y);
            let w = v.omega(x, y);
            let row = [
                x,
                y,
                n as f64,
                u,
                vv,
                0.05 + 0.01 * (y / 0.02).powi(2),
                0.04,
                -0.002 * (y / 0.02),
                w,
                0.1 * w.abs() + 1.0,
                u_unc,
                u_unc,
                w_unc,
                w_unc * (n as f64).sqrt(),
            ];
            for (c, r) in cols.iter_mut().zip(row) {
                c.push(r);
            }
        }
    }
    // x, y, then the docs/interface.md ensemble columns as the statistics stage names them.
    let names: Vec<&str> = ["x", "y"]
        .into_iter()
        .chain(crate::stats::CONTRACT_COLUMNS)
        .collect();
    let mut t = NodeTable::new(g);
    for (nm, c) in names.iter().zip(cols) {
        t.push(*nm, c);
    }
    t
}

/// Adds the statistics helper's own columns: outliers concentrated in the
/// vortex core, filled vectors along the upper edge.
pub(crate) fn add_validation_columns(t: &mut NodeTable, v: &Vortex) {
    let g = t.grid;
    let (mut o, mut f) = (Vec::new(), Vec::new());
    for j in 0..g.ny {
        for i in 0..g.nx {
            let (x, y) = (g.x(i), g.y(j));
            let core = (-((x - v.xc).powi(2) + (y - v.yc).powi(2)) / (4.0 * v.rc * v.rc)).exp();
            o.push(0.005 + 0.12 * core);
            f.push(if j + 3 >= g.ny { 0.2 } else { 0.0 });
        }
    }
    t.push("outlier_frac", o);
    t.push("filled_frac", f);
}

pub(crate) fn frames(n: usize, nodes: usize) -> Vec<FrameRecord> {
    (0..n)
        .map(|k| FrameRecord {
            meta: FrameMeta {
                index: k,
                name: format!("f{k:04}"),
                time_s: Some(k as f64 * 0.01),
                phase_deg: Some((k as f64 * 0.01 * 5.0 * 360.0) % 360.0),
            },
            n_vectors: nodes,
            validation: validate::Counts {
                invalid_input: k % 3,
                median: (k * 7) % 11,
                ..Default::default()
            },
            fill: fill::Counts {
                replaced: (k * 7) % 11,
                filled: k % 3,
                unfilled: 0,
            },
            rejected: k == 5,
            noise: Some(0.01),
        })
        .collect()
}

/// A run with the default vortex on a 64 × 48 grid.
pub(crate) fn run(id: &str, v: &Vortex, g: Grid) -> RunResult {
    let n = 40;
    let mut ens = ensemble(g, v, 0.004, 2.0, n);
    add_validation_columns(&mut ens, v);
    let mut conv = Table::new();
    conv.push("n_frames", Values::I64((1..=n as i64).collect()));
    conv.push(
        "u_mean_probe",
        Values::F64((1..=n).map(|k| 0.3 + 0.05 / k as f64).collect()),
    );
    conv.push(
        "u_std_probe",
        Values::F64((1..=n).map(|k| 0.05 * (1.0 - 0.5 / k as f64)).collect()),
    );
    let phase = (0..4)
        .map(|b| {
            let shifted = Vortex {
                xc: v.xc + 0.004 * b as f64,
                ..*v
            };
            PhaseBin {
                bin: b,
                centre_deg: 45.0 + 90.0 * b as f64,
                n_frames: 10,
                table: ensemble(g, &shifted, 0.008, 4.0, 10),
            }
        })
        .collect();
    RunResult {
        id: id.into(),
        grid: g,
        frames: frames(n, g.len()),
        stats: RunStats {
            ensemble: ens,
            phase,
            convergence: Some(conv),
            n_eff: Some(35.0),
            summary: vec![("noise_m_s".into(), 0.01)],
            warnings: vec![],
        },
        warnings: vec!["2 frames had more than 5 % outliers".into()],
        figures: vec![],
        conditions: crate::field::Conditions {
            velocity: Some(0.3),
            length: Some(0.01),
            viscosity: Some(1.0e-6),
            ..Default::default()
        },
        description: Some("a test run".into()),
        budget: None,
        vortices: None,
        structures: Default::default(),
        mask: None,
    }
}

pub(crate) const VORTEX: Vortex = Vortex {
    gamma: 0.004,
    rc: 0.004,
    xc: 0.03,
    yc: 0.0,
    u_inf: 0.3,
};
