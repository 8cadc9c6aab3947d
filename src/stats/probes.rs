//! Convergence at probe points: running mean and standard deviation
//! against the number of frames, and the warning when a statistic is still
//! moving.
//!
//! Method (common practice): at the node nearest each probe, the running
//! mean and standard deviation of u, v and omega over the frames so far
//! (Welford's update, in frame order). The running standard uncertainty of
//! the mean is `s_n / sqrt(n r)`, where r = N_eff / N is the final ratio at
//! that node (1 for independent samples). Convergence rule: over the final
//! `convergence_tail` fraction of the frames (default 20 %) the running
//! mean, and the running standard deviation, must each move by no more than
//! their final expanded uncertainty (coverage `coverage`, Student t at
//! N_eff - 1 degrees of freedom); otherwise a warning names the probe, the
//! statistic, the move and the uncertainty. For a stationary random signal
//! the move of the mean over the last 20 % has a standard deviation of about
//! half its standard uncertainty, so a false alarm is about a 4-sigma event.
//! Fewer than 10 samples before the tail: a warning that convergence cannot
//! be judged.
//!
//! Table columns, one row per probe and frame offered (probe by probe, in
//! frame order): `frame` (run-wide frame index), the running values
//! `u_mean, v_mean, omega_mean, u_std, v_std, omega_std, u_mean_unc,
//! v_mean_unc, omega_mean_unc` (NaN until there are enough samples),
//! `n_samples` (u samples so far), `probe` (0-based, pipeline order),
//! `probe_x, probe_y` (the point asked for), `x, y` (the node traced).

use super::gum;
use crate::field::table::{Table, Values};
use crate::field::Grid;

/// The node nearest (x, y): indices clamped to the grid.
pub(crate) fn nearest_node(g: &Grid, x: f64, y: f64) -> usize {
    let idx = |p: f64, p0: f64, d: f64, n: usize| -> usize {
        let r = ((p - p0) / d).round();
        if r.is_nan() || r < 0.0 {
            0
        } else {
            (r as usize).min(n.saturating_sub(1))
        }
    };
    idx(y, g.y0, g.dy, g.ny) * g.nx + idx(x, g.x0, g.dx, g.nx)
}

const NAMES: [(&str, &str); 3] = [("u", "m/s"), ("v", "m/s"), ("omega", "1/s")];

/// Running statistics of one probe's series.
struct Running {
    n: f64,
    mean: f64,
    m2: f64,
}

impl Running {
    fn add(&mut self, x: f64) {
        self.n += 1.0;
        let d = x - self.mean;
        self.mean += d / self.n;
        self.m2 += d * (x - self.mean);
    }
    fn std(&self) -> f64 {
        if self.n >= 2.0 {
            (self.m2 / (self.n - 1.0)).sqrt()
        } else {
            f64::NAN
        }
    }
}

/// One probe for the table: its index, the probe point, the node, its rows,
/// and the final N_eff/N ratio of (u, v, omega).
pub(super) struct ProbeInput<'a> {
    pub point: (f64, f64),
    pub node: usize,
    pub rows: &'a [(u64, [f64; 3])],
    pub ratio: [f64; 3],
}

/// The convergence table (one row per probe and frame) and its warnings.
pub(super) fn convergence(
    g: &Grid,
    probes: &[ProbeInput],
    tail: f64,
    coverage: f64,
    warnings: &mut Vec<String>,
) -> Table {
    let mut cols = Columns::default();
    for (ip, pr) in probes.iter().enumerate() {
        let node = traced_node(g, ip, pr, warnings);
        let traced = cols.trace(ip, pr, node, tail);
        traced.warn_unconverged(tail, coverage, warnings);
    }
    cols.into_table()
}

/// The position of the node traced for probe `ip`, with a warning when the
/// probe lies outside the grid.
fn traced_node(g: &Grid, ip: usize, pr: &ProbeInput, warnings: &mut Vec<String>) -> (f64, f64) {
    let (j, i) = (pr.node / g.nx, pr.node % g.nx);
    let (x, y) = (g.x(i), g.y(j));
    if (pr.point.0 - x).abs() > 0.5 * g.dx * 1.001 || (pr.point.1 - y).abs() > 0.5 * g.dy * 1.001 {
        warnings.push(format!(
            "probe {ip} at ({:.3}, {:.3}) mm lies outside the grid; the nearest node ({:.3}, {:.3}) mm is traced",
            pr.point.0 * 1e3,
            pr.point.1 * 1e3,
            x * 1e3,
            y * 1e3
        ));
    }
    (x, y)
}

/// The running statistics of one probe's u, v and omega after its last
/// frame, and (n, mean, std) of each at the start of the tail.
struct Traced {
    /// The probe's index and the position of its node.
    ip: usize,
    at: (f64, f64),
    /// The final N_eff/N ratio of (u, v, omega).
    ratio: [f64; 3],
    run: [Running; 3],
    at_cut: Option<[(f64, f64, f64); 3]>,
}

/// The table's columns, filled probe by probe.
#[derive(Default)]
struct Columns {
    probe: Vec<i64>,
    px: Vec<f64>,
    py: Vec<f64>,
    nx_: Vec<f64>,
    ny_: Vec<f64>,
    frame: Vec<i64>,
    /// n_samples, then mean, std and mean_unc of u, v and omega.
    cols: [Vec<f64>; 10],
}

impl Columns {
    /// Adds the rows of probe `ip` (traced at the node `(x, y)`) and returns
    /// its running statistics at the end and at the start of the tail.
    fn trace(&mut self, ip: usize, pr: &ProbeInput, (x, y): (f64, f64), tail: f64) -> Traced {
        let cols = &mut self.cols;
        let mut run = [0, 1, 2].map(|_| Running {
            n: 0.0,
            mean: 0.0,
            m2: 0.0,
        });
        let n_frames = pr.rows.len();
        let cut = ((1.0 - tail) * n_frames as f64).floor() as usize;
        let mut at_cut: Option<[(f64, f64, f64); 3]> = None;
        for (r, (idx, vals)) in pr.rows.iter().enumerate() {
            if r == cut {
                at_cut = Some([0, 1, 2].map(|s| (run[s].n, run[s].mean, run[s].std())));
            }
            for s in 0..3 {
                if vals[s].is_finite() {
                    run[s].add(vals[s]);
                }
            }
            self.probe.push(ip as i64);
            self.px.push(pr.point.0);
            self.py.push(pr.point.1);
            self.nx_.push(x);
            self.ny_.push(y);
            self.frame.push(*idx as i64);
            cols[0].push(run[0].n);
            for s in 0..3 {
                let (m, sd) = if run[s].n > 0.0 {
                    (run[s].mean, run[s].std())
                } else {
                    (f64::NAN, f64::NAN)
                };
                cols[1 + 3 * s].push(m);
                cols[2 + 3 * s].push(sd);
                cols[3 + 3 * s].push(gum::mean_unc(sd, run[s].n * pr.ratio[s]));
            }
        }
        Traced {
            ip,
            at: (x, y),
            ratio: pr.ratio,
            run,
            at_cut,
        }
    }

    /// The table: statistics first, keys after (see the module doc for the
    /// order).
    fn into_table(self) -> Table {
        let cols = self.cols;
        let mut t = Table::new();
        t.push("frame", Values::I64(self.frame));
        let n_samples = cols[0].iter().map(|&n| n as i64).collect();
        for what in 0..3 {
            for (s, (name, _)) in NAMES.iter().enumerate() {
                let suffix = ["mean", "std", "mean_unc"][what];
                t.push(
                    format!("{name}_{suffix}"),
                    Values::F64(cols[1 + 3 * s + what].clone()),
                );
            }
        }
        t.push("n_samples", Values::I64(n_samples));
        t.push("probe", Values::I64(self.probe));
        t.push("probe_x", Values::F64(self.px));
        t.push("probe_y", Values::F64(self.py));
        t.push("x", Values::F64(self.nx_));
        t.push("y", Values::F64(self.ny_));
        t
    }
}

impl Traced {
    /// The convergence rule of the module doc: a warning for each running
    /// statistic that moved over the tail by more than its final expanded
    /// uncertainty (or that has too few samples before the tail).
    fn warn_unconverged(&self, tail: f64, coverage: f64, warnings: &mut Vec<String>) {
        let Some(cut_stats) = self.at_cut else {
            return;
        };
        let (ip, (x, y), run) = (self.ip, self.at, &self.run);
        for s in 0..3 {
            let (name, unit) = NAMES[s];
            let (n0, m0, s0) = cut_stats[s];
            let fin = &run[s];
            if fin.n == 0.0 {
                continue;
            }
            if n0 < 10.0 {
                warnings.push(format!(
                    "probe {ip}: only {n0} samples of {name} before the last {:.0} % of frames; convergence cannot be judged",
                    tail * 100.0
                ));
                continue;
            }
            let ne = fin.n * self.ratio[s];
            let k = gum::coverage_factor(coverage, ne - 1.0);
            let (sd, um, us) = (
                fin.std(),
                gum::mean_unc(fin.std(), ne),
                gum::std_unc(fin.std(), ne),
            );
            for (what, moved, lim) in [
                ("mean", (fin.mean - m0).abs(), k * um),
                ("standard deviation", (sd - s0).abs(), k * us),
            ] {
                if moved > lim {
                    warnings.push(format!(
                        "probe {ip} at ({:.3}, {:.3}) mm: the running {what} of {name} moved by {moved:.4e} {unit} over the last {:.0} % of frames, more than its expanded uncertainty {lim:.4e} {unit} ({:.0} %); not converged",
                        x * 1e3,
                        y * 1e3,
                        tail * 100.0,
                        coverage * 100.0
                    ));
                }
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn grid() -> Grid {
        Grid {
            nx: 4,
            ny: 3,
            x0: 0.0,
            y0: 0.0,
            dx: 1e-3,
            dy: 1e-3,
        }
    }

    #[test]
    fn nearest_node_rounds_and_clamps() {
        let g = grid();
        assert_eq!(nearest_node(&g, 1.4e-3, 0.6e-3), 4 + 1);
        assert_eq!(nearest_node(&g, -5.0, 9.0), 2 * 4);
    }

    #[test]
    fn a_drifting_probe_warns_and_a_stationary_one_does_not() {
        let g = grid();
        // Alternating +-1 about 5: stationary, converged. A ramp: not.
        let steady: Vec<(u64, [f64; 3])> = (0..200)
            .map(|i| (i, [5.0 + if i % 2 == 0 { 1.0 } else { -1.0 }, 0.0, 1.0]))
            .collect();
        let ramp: Vec<(u64, [f64; 3])> = (0..200).map(|i| (i, [i as f64, 0.0, 1.0])).collect();
        let mut w = Vec::new();
        let t = convergence(
            &g,
            &[ProbeInput {
                point: (1e-3, 1e-3),
                node: 5,
                rows: &steady,
                ratio: [1.0; 3],
            }],
            0.2,
            0.95,
            &mut w,
        );
        assert!(w.is_empty(), "{w:?}");
        assert_eq!(t.n_rows(), 200);
        let Some(Values::F64(m)) = t.get("u_mean") else {
            panic!()
        };
        assert_eq!(m[199], 5.0);
        assert_eq!(m[0], 6.0);
        convergence(
            &g,
            &[ProbeInput {
                point: (1e-3, 1e-3),
                node: 5,
                rows: &ramp,
                ratio: [1.0; 3],
            }],
            0.2,
            0.95,
            &mut w,
        );
        assert!(w.iter().any(|s| s.contains("running mean of u")), "{w:?}");
        assert!(!w.iter().any(|s| s.contains("of v ")), "{w:?}");
    }
}
