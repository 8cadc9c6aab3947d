//! The ground-truth statistics of a run: per-node moments of the noise-free
//! fields over the frames, and per-phase-bin means.
//!
//! Method: the reduction's own accumulator (`stats::moments::Moments`:
//! Welford's running mean and central moments, the co-moment of (u, v) by
//! the same update; Welford 1962; Chan, Golub & LeVeque 1983), added in
//! frame order, so the truth and the reduction differ only by the noise,
//! not by how they sum. Phase bins by the reduction's rule
//! (`stats::phase_bin_index`). Standard deviations and the covariance use
//! N - 1; with one frame they are NaN (printed as empty cells). Nodes
//! inside a body carry NaN throughout. A phase bin with no frame has NaN
//! means.

use super::numfmt::{decimals_for, push};
use super::scenario::TruthFrame;
use crate::field::Grid;
use crate::stats::moments::Moments;

/// Running moments of the noise-free fields of one run.
#[derive(Debug, Clone)]
pub(crate) struct TruthStats {
    pub grid: Grid,
    /// Frames added.
    pub n: usize,
    /// u, v and (as the one quantity) omega over every frame.
    all: Moments,
    pub body: Vec<bool>,
    /// Phase bins: frames per bin, and the moments of each bin (made at
    /// its first frame, so a run without phases holds none).
    pub bins: usize,
    pub bin_n: Vec<usize>,
    bin: Vec<Option<Moments>>,
}

impl TruthStats {
    pub(crate) fn new(grid: Grid, bins: usize) -> Self {
        let n = grid.len();
        TruthStats {
            grid,
            n: 0,
            all: Moments::new(n, 1),
            body: vec![false; n],
            bins,
            bin_n: vec![0; bins],
            bin: vec![None; bins],
        }
    }

    /// Adds one frame; `phase_deg` in [0, 360) when the flow is periodic.
    pub(crate) fn add(&mut self, tf: &TruthFrame, phase_deg: Option<f64>) {
        self.n += 1;
        self.all.frames += 1.0;
        let bin = phase_deg.map(|p| phase_bin(p, self.bins));
        if let Some(b) = bin {
            self.bin_n[b] += 1;
            let nodes = self.grid.len();
            self.bin[b]
                .get_or_insert_with(|| Moments::new(nodes, 1))
                .frames += 1.0;
        }
        for (k, (((u, v), w), body)) in
            tf.u.iter()
                .zip(tf.v.iter())
                .zip(tf.omega.iter())
                .zip(tf.body.iter())
                .enumerate()
        {
            self.body[k] |= *body;
            self.all.add_velocity(k, *u, *v);
            self.all.q[0].add(k, *w);
            if let Some(m) = bin.and_then(|b| self.bin[b].as_mut()) {
                m.add_velocity(k, *u, *v);
                m.q[0].add(k, *w);
            }
        }
    }

    fn var(&self, m2: f64) -> f64 {
        if self.n > 1 {
            m2 / (self.n - 1) as f64
        } else {
            f64::NAN
        }
    }

    /// Mean of u, v, omega at node `k` over every frame.
    pub(crate) fn mean_u(&self, k: usize) -> f64 {
        self.all.u.mean[k]
    }
    pub(crate) fn mean_v(&self, k: usize) -> f64 {
        self.all.v.mean[k]
    }
    pub(crate) fn mean_w(&self, k: usize) -> f64 {
        self.all.q[0].mean[k]
    }
    pub(crate) fn std_u(&self, k: usize) -> f64 {
        self.var(self.all.u.m2[k]).sqrt()
    }
    pub(crate) fn std_v(&self, k: usize) -> f64 {
        self.var(self.all.v.m2[k]).sqrt()
    }
    pub(crate) fn std_w(&self, k: usize) -> f64 {
        self.var(self.all.q[0].m2[k]).sqrt()
    }
    pub(crate) fn cov_uv(&self, k: usize) -> f64 {
        self.var(self.all.cuv[k])
    }

    /// Mean of `u`, `v`, omega (component 0, 1, 2) in bin `b` at node `k`.
    pub(crate) fn bin_mean(&self, c: usize, b: usize, k: usize) -> f64 {
        let Some(m) = &self.bin[b] else {
            return f64::NAN;
        };
        match c {
            0 => m.u.mean[k],
            1 => m.v.mean[k],
            _ => m.q[0].mean[k],
        }
    }

    /// `truth/mean.csv` (SI): x, y, body, u_mean, v_mean, u_std, v_std,
    /// uv_cov, omega_mean, omega_std; `digits` significant digits relative to
    /// the scales (`speed` for velocities, `speed / pitch` for vorticity).
    pub(crate) fn mean_csv(&self, speed: f64, digits: u32) -> Vec<u8> {
        let g = self.grid;
        let (dxy, dvel, dw) = truth_decimals(&g, speed, digits);
        let mut out = Vec::with_capacity(g.len() * 100);
        out.extend_from_slice(b"x,y,body,u_mean,v_mean,u_std,v_std,uv_cov,omega_mean,omega_std\n");
        let dcov = decimals_for(speed * speed, digits);
        for j in 0..g.ny {
            for i in 0..g.nx {
                let k = j * g.nx + i;
                push(&mut out, g.x(i), dxy);
                out.push(b',');
                push(&mut out, g.y(j), dxy);
                out.extend_from_slice(if self.body[k] { b",1," } else { b",0," });
                let cells = [
                    (self.mean_u(k), dvel),
                    (self.mean_v(k), dvel),
                    (self.std_u(k), dvel),
                    (self.std_v(k), dvel),
                    (self.cov_uv(k), dcov),
                    (self.mean_w(k), dw),
                    (self.std_w(k), dw),
                ];
                for (c, (v, d)) in cells.iter().enumerate() {
                    if c > 0 {
                        out.push(b',');
                    }
                    push(&mut out, *v, *d);
                }
                out.push(b'\n');
            }
        }
        out
    }

    /// `truth/phase.csv` (SI): phase_bin, phase_deg, n_frames, x, y, u_mean,
    /// v_mean, omega_mean, bins outer, nodes inner.
    pub(crate) fn phase_csv(&self, speed: f64, digits: u32) -> Vec<u8> {
        let g = self.grid;
        let (dxy, dvel, dw) = truth_decimals(&g, speed, digits);
        let mut out = Vec::with_capacity(g.len() * self.bins * 60);
        out.extend_from_slice(b"phase_bin,phase_deg,n_frames,x,y,u_mean,v_mean,omega_mean\n");
        for b in 0..self.bins {
            let head = format!(
                "{b},{},{},",
                (b as f64 + 0.5) * 360.0 / self.bins as f64,
                self.bin_n[b]
            );
            for j in 0..g.ny {
                for i in 0..g.nx {
                    let k = j * g.nx + i;
                    out.extend_from_slice(head.as_bytes());
                    push(&mut out, g.x(i), dxy);
                    out.push(b',');
                    push(&mut out, g.y(j), dxy);
                    out.push(b',');
                    push(&mut out, self.bin_mean(0, b, k), dvel);
                    out.push(b',');
                    push(&mut out, self.bin_mean(1, b, k), dvel);
                    out.push(b',');
                    push(&mut out, self.bin_mean(2, b, k), dw);
                    out.push(b'\n');
                }
            }
        }
        out
    }
}

/// The bin of a phase in degrees: the reduction's rule
/// (`stats::phase_bin_index`; docs/interface.md).
pub(crate) fn phase_bin(phase_deg: f64, bins: usize) -> usize {
    crate::stats::phase_bin_index(phase_deg, bins)
}

fn truth_decimals(g: &Grid, speed: f64, digits: u32) -> (Option<u32>, Option<u32>, Option<u32>) {
    let coord = [g.x0, g.x(g.nx - 1), g.y0, g.y(g.ny - 1)]
        .iter()
        .fold(0f64, |m, v| m.max(v.abs()));
    // coordinates: at least a thousandth of the pitch
    let dxy = decimals_for(coord, digits).map(|d| {
        d.max(((1000.0 / g.dx.min(g.dy)).log10().ceil()).max(0.0) as u32)
            .min(15)
    });
    (
        dxy,
        decimals_for(speed, digits),
        decimals_for(speed / g.dx.min(g.dy), digits),
    )
}

#[cfg(test)]
mod tests {
    use super::*;
    use ndarray::Array2;

    #[test]
    fn welford_moments_match_two_pass_formulas() {
        let g = Grid {
            nx: 2,
            ny: 1,
            x0: 0.0,
            y0: 0.0,
            dx: 1.0,
            dy: 1.0,
        };
        let us = [1.0, 2.0, 4.0, 7.0];
        let vs = [0.5, -1.0, 3.0, 2.0];
        let mut st = TruthStats::new(g, 4);
        for k in 0..4 {
            let tf = TruthFrame {
                u: Array2::from_elem((1, 2), us[k]),
                v: Array2::from_elem((1, 2), vs[k]),
                omega: Array2::from_elem((1, 2), us[k] * 2.0),
                body: Array2::from_elem((1, 2), false),
            };
            st.add(&tf, Some(k as f64 * 90.0 + 10.0));
        }
        // two-pass: mean 3.5, sample variance of u = (6.25+2.25+0.25+12.25)/3 = 7
        assert!((st.mean_u(0) - 3.5).abs() < 1e-15);
        assert!((st.std_u(1) - 7f64.sqrt()).abs() < 1e-14);
        // cov: mean v = 1.125; sum (u-3.5)(v-1.125) = 1.5625+3.1875+0.9375+3.0625 = 8.75 -> /3
        // (numpy.cov gives 2.9166667)
        assert!((st.cov_uv(0) - 8.75 / 3.0).abs() < 1e-14);
        assert_eq!(st.bin_n, vec![1, 1, 1, 1]);
        assert_eq!(st.bin_mean(0, 2, 0), 4.0);
        assert_eq!(phase_bin(359.9999, 12), 11);
        assert_eq!(phase_bin(-30.0, 12), 11);
        assert_eq!(phase_bin(30.0, 12), 1);
        // a phase a hair below 0 folds to 360.0 by rem_euclid: bin 0, as
        // the reduction bins it (it once landed in the last bin here)
        assert_eq!(phase_bin(-1e-17, 12), 0);
    }
}
