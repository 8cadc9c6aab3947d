//! The tables a run writes: ensemble, phase, frames, convergence, the
//! per-frame fields, and campaign.csv. Column names and order follow
//! docs/interface.md; our own columns come after the contract's.
//!
//! Counting conventions (frames.csv): `n_vectors` is the number of grid
//! nodes; `n_invalid_input` the vectors missing, empty, NaN or flagged in the
//! input; `n_outliers` those rejected by the validation tests; `n_replaced`
//! the outliers that filling gave a value; `n_filled` the invalid inputs that
//! filling gave a value; `n_unfilled` nodes left without a value (masked).
//! One more column per validation test (`rejected_<test>`), as the chain
//! counted them, and `frame_rejected` (1 when the whole frame was left out).

use std::path::Path;

use crate::derive::Derived;
use crate::error::Result;
use crate::field::{Field, NodeTable};
use crate::io::{self, Table, Values};
use crate::result::{FrameRecord, RunResult};
use crate::stats::PhaseBin;

/// Writes a node table as `<stem>.csv` and `<stem>.parquet` in `dir`.
pub(crate) fn write_node_table(dir: &Path, stem: &str, nt: &NodeTable) -> Result<()> {
    let t = io::node_table_to_table(nt);
    io::write_csv(&dir.join(format!("{stem}.csv")), &t)?;
    io::write_parquet(&dir.join(format!("{stem}.parquet")), &t)
}

/// The phase table: `phase_bin, phase_deg, n_frames`, then every ensemble
/// column (x, y first), one row per bin and node.
pub(crate) fn phase_table(bins: &[PhaseBin]) -> Table {
    let mut t = Table::new();
    if bins.is_empty() {
        return t;
    }
    let n = bins[0].table.grid.len();
    let mut bin = Vec::with_capacity(n * bins.len());
    let mut deg = Vec::with_capacity(n * bins.len());
    let mut nf = Vec::with_capacity(n * bins.len());
    let mut rest: Vec<(String, Vec<f64>)> = Vec::new();
    for b in bins {
        bin.extend(std::iter::repeat_n(b.bin as i64, n));
        deg.extend(std::iter::repeat_n(b.centre_deg, n));
        nf.extend(std::iter::repeat_n(b.n_frames as i64, n));
        let bt = io::node_table_to_table(&b.table);
        for (k, (name, vals)) in bt.columns.into_iter().enumerate() {
            let Values::F64(v) = vals else { continue };
            if rest.len() <= k {
                rest.push((name, Vec::with_capacity(n * bins.len())));
            }
            rest[k].1.extend(v);
        }
    }
    t.push("phase_bin", Values::I64(bin));
    t.push("phase_deg", Values::F64(deg));
    t.push("n_frames", Values::I64(nf));
    for (name, v) in rest {
        t.push(name, Values::F64(v));
    }
    t
}

/// frames.csv: one row per frame (see the module doc for the columns).
pub(crate) fn frames_table(frames: &[FrameRecord]) -> Table {
    let mut t = Table::new();
    let col_i = |f: &dyn Fn(&FrameRecord) -> usize| {
        Values::I64(frames.iter().map(|r| f(r) as i64).collect())
    };
    t.push(
        "frame",
        Values::Str(frames.iter().map(|r| r.meta.name.clone()).collect()),
    );
    t.push("n_vectors", col_i(&|r| r.n_vectors));
    t.push("n_invalid_input", col_i(&|r| r.validation.invalid_input));
    t.push("n_outliers", col_i(&|r| r.validation.outliers()));
    t.push("n_replaced", col_i(&|r| r.fill.replaced));
    t.push("n_filled", col_i(&|r| r.fill.filled));
    t.push("n_unfilled", col_i(&|r| r.fill.unfilled));
    // One column per validation test, as the chain names its counters.
    let per_test: Vec<serde_json::Map<String, serde_json::Value>> = frames
        .iter()
        .map(|r| match serde_json::to_value(r.validation) {
            Ok(serde_json::Value::Object(m)) => m,
            _ => serde_json::Map::new(),
        })
        .collect();
    if let Some(first) = per_test.first() {
        for key in first.keys() {
            if key == "invalid_input" {
                continue;
            }
            let vals = per_test
                .iter()
                .map(|m| m.get(key).and_then(|v| v.as_i64()).unwrap_or(0))
                .collect();
            t.push(format!("rejected_{key}"), Values::I64(vals));
        }
    }
    t.push("frame_rejected", col_i(&|r| r.rejected as usize));
    t.push(
        "time_s",
        Values::F64(
            frames
                .iter()
                .map(|r| r.meta.time_s.unwrap_or(f64::NAN))
                .collect(),
        ),
    );
    t.push(
        "phase_deg",
        Values::F64(
            frames
                .iter()
                .map(|r| r.meta.phase_deg.unwrap_or(f64::NAN))
                .collect(),
        ),
    );
    t.push(
        "noise_estimate",
        Values::F64(frames.iter().map(|r| r.noise.unwrap_or(f64::NAN)).collect()),
    );
    t
}

/// Writes every table of one run into `dir` (= `OUT/<run id>`).
pub(crate) fn write_run_tables(dir: &Path, run: &RunResult) -> Result<()> {
    std::fs::create_dir_all(dir).map_err(|e| crate::Error::io(dir, e))?;
    write_node_table(dir, "ensemble", &run.stats.ensemble)?;
    if !run.stats.phase.is_empty() {
        let t = phase_table(&run.stats.phase);
        io::write_csv(&dir.join("phase.csv"), &t)?;
        io::write_parquet(&dir.join("phase.parquet"), &t)?;
    }
    io::write_csv(&dir.join("frames.csv"), &frames_table(&run.frames))?;
    if let Some(c) = &run.stats.convergence {
        io::write_csv(&dir.join("convergence.csv"), c)?;
    }
    if let Some(b) = &run.budget {
        let t = crate::reduce::budget::table(b);
        io::write_csv(&dir.join("budget.csv"), &t)?;
        io::write_parquet(&dir.join("budget.parquet"), &t)?;
    }
    if let Some(v) = &run.vortices {
        crate::vortex::table::write(dir, v)?;
    }
    Ok(())
}

/// Writes `ensemble.nc` (and `phase.nc` when the run has phases) in
/// `dir`: the CF-convention NetCDF of `io::cf`, with the pipeline's text
/// and hash as global attributes.
pub(crate) fn write_run_netcdf(dir: &Path, run: &RunResult, pipeline_text: &str) -> Result<()> {
    let sha = io::hash_bytes(pipeline_text.as_bytes()).1;
    let p = io::cf::Provenance {
        run: &run.id,
        pipeline_text,
        pipeline_sha256: &sha,
    };
    let put = |name: &str, ds: io::netcdf::Dataset| {
        let path = dir.join(name);
        std::fs::write(&path, ds.to_bytes()).map_err(|e| crate::Error::io(&path, e))
    };
    put("ensemble.nc", io::cf::ensemble(&run.stats.ensemble, &p))?;
    if let Some(ds) = io::cf::phase(&run.stats.phase, &p) {
        put("phase.nc", ds)?;
    }
    Ok(())
}

/// One frame's filled field (docs/interface.md per-frame fields): `x, y, u, v,
/// status, omega, omega_unc`; masked nodes have empty u, v, omega.
pub(crate) fn write_frame_field(path: &Path, field: &Field, derived: &Derived) -> Result<()> {
    let g = field.grid;
    let mut t = Table::new();
    let (mut xs, mut ys) = (Vec::with_capacity(g.len()), Vec::with_capacity(g.len()));
    for j in 0..g.ny {
        for i in 0..g.nx {
            xs.push(g.x(i));
            ys.push(g.y(j));
        }
    }
    let flat = |a: &ndarray::Array2<f64>| a.iter().copied().collect::<Vec<f64>>();
    t.push("x", Values::F64(xs));
    t.push("y", Values::F64(ys));
    t.push("u", Values::F64(flat(&field.u)));
    t.push("v", Values::F64(flat(&field.v)));
    t.push(
        "status",
        Values::I64(field.status.iter().map(|&s| s as i64).collect()),
    );
    // The instantaneous scheme map's vorticity where the run chose one
    // apart from the statistics' (`derive::choice`).
    let nan = vec![f64::NAN; g.len()];
    let (om, unc) = match &derived.inst_omega {
        Some(([om, unc], _)) => (flat(om), flat(unc)),
        None => {
            let omega = derived.quantities.iter().find(|q| q.name == "omega");
            (
                omega.map_or(nan.clone(), |q| flat(&q.value)),
                omega.and_then(|q| q.unc.as_ref()).map_or(nan, flat),
            )
        }
    };
    t.push("omega", Values::F64(om));
    t.push("omega_unc", Values::F64(unc));
    io::write_csv(path, &t)
}

/// campaign.csv: one row per run. Numeric columns that only some runs have
/// are empty for the others.
pub(crate) fn campaign_table(runs: &[RunResult], extra: &[Vec<(String, f64)>]) -> Table {
    let mut t = Table::new();
    push_run_columns(&mut t, runs);
    push_quality_columns(&mut t, runs);
    push_key_results(&mut t, runs, extra);
    t
}

/// The columns that say which run and on what grid: id, frame counts and
/// the grid.
fn push_run_columns(t: &mut Table, runs: &[RunResult]) {
    t.push(
        "id",
        Values::Str(runs.iter().map(|r| r.id.clone()).collect()),
    );
    t.push(
        "frames",
        Values::I64(runs.iter().map(|r| r.frames.len() as i64).collect()),
    );
    t.push(
        "frames_used",
        Values::I64(
            runs.iter()
                .map(|r| r.frames.iter().filter(|f| !f.rejected).count() as i64)
                .collect(),
        ),
    );
    t.push(
        "grid",
        Values::Str(
            runs.iter()
                .map(|r| format!("{}x{}", r.grid.nx, r.grid.ny))
                .collect(),
        ),
    );
    t.push(
        "nx",
        Values::I64(runs.iter().map(|r| r.grid.nx as i64).collect()),
    );
    t.push(
        "ny",
        Values::I64(runs.iter().map(|r| r.grid.ny as i64).collect()),
    );
    t.push("dx", Values::F64(runs.iter().map(|r| r.grid.dx).collect()));
    t.push("dy", Values::F64(runs.iter().map(|r| r.grid.dy).collect()));
}

/// The data-quality columns: the fractions of vectors rejected, replaced
/// and filled, the noise estimate and N_eff.
fn push_quality_columns(t: &mut Table, runs: &[RunResult]) {
    let frac = |f: &dyn Fn(&FrameRecord) -> usize| {
        Values::F64(
            runs.iter()
                .map(|r| {
                    let total: usize = r.frames.iter().map(|x| x.n_vectors).sum();
                    let k: usize = r.frames.iter().map(f).sum();
                    if total == 0 {
                        f64::NAN
                    } else {
                        k as f64 / total as f64
                    }
                })
                .collect(),
        )
    };
    t.push(
        "invalid_input_fraction",
        frac(&|x| x.validation.invalid_input),
    );
    t.push("outlier_fraction", frac(&|x| x.validation.outliers()));
    t.push("replaced_fraction", frac(&|x| x.fill.replaced));
    t.push("filled_fraction", frac(&|x| x.fill.filled));
    t.push(
        "noise_estimate",
        Values::F64(
            runs.iter()
                .map(|r| super::mean_noise(&r.frames).unwrap_or(f64::NAN))
                .collect(),
        ),
    );
    t.push(
        "n_eff",
        Values::F64(
            runs.iter()
                .map(|r| r.stats.n_eff.unwrap_or(f64::NAN))
                .collect(),
        ),
    );
}

/// The key results: the statistics' summary and any extra columns, by
/// name, in order of first appearance; empty for a run without it.
fn push_key_results(t: &mut Table, runs: &[RunResult], extra: &[Vec<(String, f64)>]) {
    let mut keys: Vec<String> = Vec::new();
    for (k, r) in runs.iter().enumerate() {
        let names = r
            .stats
            .summary
            .iter()
            .map(|(n, _)| n)
            .chain(extra.get(k).into_iter().flatten().map(|(n, _)| n));
        for n in names {
            if !keys.contains(n) && t.get(n).is_none() {
                keys.push(n.clone());
            }
        }
    }
    for key in keys {
        let vals = runs
            .iter()
            .enumerate()
            .map(|(k, r)| {
                r.stats
                    .summary
                    .iter()
                    .chain(extra.get(k).into_iter().flatten())
                    .find(|(n, _)| *n == key)
                    .map_or(f64::NAN, |(_, v)| *v)
            })
            .collect();
        t.push(key, Values::F64(vals));
    }
}
