//! The POD tables of a run, written into `<run>/`:
//!
//! * `modes.parquet` and `modes.csv`: one row per node, `x, y, u_mean,
//!   v_mean` (the POD's own mean, over the frames where the node has a
//!   value), then `mode<j>_u, mode<j>_v` for j = 1, 2, …: the unit-norm
//!   modes (Σ over nodes of u² + v² = 1, dimensionless).
//! * `pod.csv`: one row per mode: `mode, energy` (λ_j, m²/s², the variance
//!   captured summed over nodes and both components), `energy_fraction`,
//!   `cumulative_fraction` (of the total fluctuation energy), `energy_unc`
//!   (North et al. 1982 standard error), `fraction_unc`, `n_eff`,
//!   `separated` (1/0), `noise_floor` (m²/s², empty when unknown) and
//!   `above_noise` (1/0, empty when unknown).
//! * `pod-coefficients.csv`: one row per frame in frame order: `frame`,
//!   `index`, `time_s` (empty without a time), `a<j>` (m/s), and with
//!   `phase = true` also `phase_deg` and `ring_radius` (see `phase`).

use std::path::Path;

use super::phase::PhaseEstimate;
use super::Pod;
use crate::error::Result;
use crate::field::Grid;
use crate::io::{self, Table, Values};

/// The modes table (see the module doc).
pub(crate) fn modes_table(pod: &Pod, grid: &Grid) -> Table {
    let n = grid.len();
    let mut t = Table::new();
    let (mut x, mut y) = (Vec::with_capacity(n), Vec::with_capacity(n));
    for j in 0..grid.ny {
        for i in 0..grid.nx {
            x.push(grid.x(i));
            y.push(grid.y(j));
        }
    }
    t.push("x", Values::F64(x));
    t.push("y", Values::F64(y));
    t.push("u_mean", Values::F64(pod.mean[..n].to_vec()));
    t.push("v_mean", Values::F64(pod.mean[n..].to_vec()));
    for (j, m) in pod.modes.iter().enumerate() {
        t.push(format!("mode{}_u", j + 1), Values::F64(m[..n].to_vec()));
        t.push(format!("mode{}_v", j + 1), Values::F64(m[n..].to_vec()));
    }
    t
}

/// The energy table (see the module doc).
pub(crate) fn energy_table(pod: &Pod) -> Table {
    let r = pod.energy.len();
    let tot = pod.total_energy;
    let mut cum = 0.0;
    let mut cumulative = Vec::with_capacity(r);
    for e in &pod.energy {
        cum += e;
        cumulative.push(cum / tot);
    }
    let floor = pod.noise_floor.unwrap_or(f64::NAN);
    let mut t = Table::new();
    t.push("mode", Values::I64((1..=r as i64).collect()));
    t.push("energy", Values::F64(pod.energy.clone()));
    t.push(
        "energy_fraction",
        Values::F64(pod.energy.iter().map(|e| e / tot).collect()),
    );
    t.push("cumulative_fraction", Values::F64(cumulative));
    t.push("energy_unc", Values::F64(pod.energy_unc.clone()));
    t.push(
        "fraction_unc",
        Values::F64(pod.energy_unc.iter().map(|e| e / tot).collect()),
    );
    t.push("n_eff", Values::F64(pod.n_eff.clone()));
    t.push(
        "separated",
        Values::I64(pod.separated.iter().map(|&s| s as i64).collect()),
    );
    t.push("noise_floor", Values::F64(vec![floor; r]));
    let above: Vec<f64> = pod
        .energy
        .iter()
        .map(|&e| match pod.noise_floor {
            Some(f) => f64::from(u8::from(e > f)),
            None => f64::NAN,
        })
        .collect();
    t.push("above_noise", Values::F64(above));
    t
}

/// The coefficients table (see the module doc); `names` gives a frame's
/// name from its index in the run.
pub(crate) fn coefficients_table(
    pod: &Pod,
    names: &dyn Fn(u64) -> String,
    phase: Option<&PhaseEstimate>,
) -> Table {
    let mut t = Table::new();
    t.push(
        "frame",
        Values::Str(pod.frame_index.iter().map(|&i| names(i)).collect()),
    );
    t.push(
        "index",
        Values::I64(pod.frame_index.iter().map(|&i| i as i64).collect()),
    );
    t.push(
        "time_s",
        Values::F64(
            pod.frame_time
                .iter()
                .map(|t| t.unwrap_or(f64::NAN))
                .collect(),
        ),
    );
    for j in 0..pod.energy.len() {
        t.push(
            format!("a{}", j + 1),
            Values::F64(pod.coefficients.iter().map(|a| a[j]).collect()),
        );
    }
    if let Some(p) = phase {
        t.push("phase_deg", Values::F64(p.phase_deg.clone()));
        t.push("ring_radius", Values::F64(p.radius.clone()));
    }
    t
}

/// Writes the three POD tables into `dir` (the run's folder).
pub(crate) fn write_tables(
    dir: &Path,
    pod: &Pod,
    grid: &Grid,
    names: &dyn Fn(u64) -> String,
    phase: Option<&PhaseEstimate>,
) -> Result<()> {
    std::fs::create_dir_all(dir).map_err(|e| crate::error::Error::io(dir, e))?;
    let m = modes_table(pod, grid);
    io::write_parquet(&dir.join("modes.parquet"), &m)?;
    io::write_csv(&dir.join("modes.csv"), &m)?;
    io::write_csv(&dir.join("pod.csv"), &energy_table(pod))?;
    io::write_csv(
        &dir.join("pod-coefficients.csv"),
        &coefficients_table(pod, names, phase),
    )
}
