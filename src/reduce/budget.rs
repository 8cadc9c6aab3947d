//! The budget's place in a run: making its accumulator from the plan,
//! finishing it with the run's conditions, and its output table.
//!
//! Owns: the glue `reduce` calls (a few lines there) and the columns of
//! `budget.csv` / `budget.parquet` (docs/budget.md). Does not own the
//! numerics (`budget::ops`, `acc`, `terms`) or the writing (`io`).
//!
//! Columns (one row per slice and node, slices in order, nodes row by row):
//! `slice` (phase bin or frame number), `phase_deg` (bin centre; NaN for a
//! frame), `time_s` (NaN for a bin), `x`, `y` (m), `n` (samples), `u`, `v`
//! (m/s), `omega` (1/s), then for each of unsteady, advection, stretching,
//! diffusion, turbulent the value and `<term>_unc` (1/s², standard
//! uncertainty), `residual`, `residual_unc`, and `significant` (1 where
//! |residual| > k residual_unc, 0 where not, NaN where the residual is).

use crate::budget::freq::{self, Frequency};
use crate::budget::terms::{self, Budget, SliceBudget, SliceKind, TERMS};
use crate::budget::{reading, BudgetAcc, Params};
use crate::error::Result;
use crate::field::Grid;
use crate::io::{Table, Values};
use crate::plan::RunPlan;

/// The accumulator of `run`'s budget on `grid`, when the run asks for one.
pub(crate) fn start(run: &RunPlan, grid: Grid) -> Option<BudgetAcc> {
    let p: &Params = run.budget.as_ref()?;
    Some(BudgetAcc::new(
        p,
        &run.stats,
        grid,
        run.derive.smoother.equivalent_stencil(),
    ))
}

/// The frequency of `run`'s phase bins (`freq`): given, from its frame
/// table's column, or fitted to the frames' (time, phase) pairs `tp`.
/// Reads the frame table when there is one.
pub fn frequency(run: &RunPlan, tp: &[(f64, f64)]) -> Result<Option<Frequency>> {
    let table = match &run.frame_table {
        Some(p) if run.conditions.frequency.is_none() => Some(crate::io::read_frame_table(p)?),
        _ => None,
    };
    Ok(freq::resolve(run.conditions.frequency, table.as_ref(), tp))
}

/// What `curlew check` says about the budget of a run: what will be
/// computed, where the frequency comes from and what is missing. `frames`
/// holds each frame's (time, phase).
pub fn check_lines(run: &RunPlan, frames: &[(Option<f64>, Option<f64>)]) -> Result<Vec<String>> {
    let Some(p) = &run.budget else {
        return Ok(Vec::new());
    };
    let has_phase = frames.iter().any(|f| f.1.is_some());
    let has_time = frames.iter().any(|f| f.0.is_some());
    let c = &run.conditions;
    let mut out = vec![format!(
        "budget: {} differences; terms unsteady, advection, stretching, diffusion, turbulent, residual (significant beyond k = {})",
        p.scheme, p.k
    )];
    match c.viscosity {
        Some(nu) => out.push(format!("budget: viscosity {} m²/s, given in [run.conditions]", crate::describe::tick(nu))),
        None => out.push("budget: no [run.conditions] viscosity: the diffusion term and the residual will be empty".into()),
    }
    if has_phase {
        let tp = time_phase(frames);
        match frequency(run, &tp)? {
            Some(f) => {
                out.push(format!("budget: frequency {}", f.describe()));
                if let Some(w) = freq::disagreement(&f, &tp) {
                    out.push(format!("budget: warning: {w}"));
                }
            }
            None => out.push("budget: no frequency (none in [run.conditions], no frequency_hz or period_s column in the frame table, and the phases and times do not fit a steady frequency): the unsteady term and the residual of the phase bins will be empty".into()),
        }
    } else if p.frames.is_empty() {
        out.push(
            "budget: the frames have no phases and [budget] frames is empty: nothing to compute"
                .into(),
        );
    }
    if !p.frames.is_empty() && !has_time {
        out.push("budget: [budget] frames needs frame times (time_s in the frame table) for the unsteady term".into());
    }
    Ok(out)
}

/// The (time, phase) pairs of the frames that have both.
pub fn time_phase(frames: &[(Option<f64>, Option<f64>)]) -> Vec<(f64, f64)> {
    frames.iter().filter_map(|&(t, p)| t.zip(p)).collect()
}

/// The finished budget of a run with its conditions; `frames` holds each
/// frame's (time, phase) for the frequency when none is given.
pub(crate) fn finish(
    acc: &BudgetAcc,
    run: &RunPlan,
    frames: &[(Option<f64>, Option<f64>)],
) -> Result<Budget> {
    let f = if acc.bins.iter().any(Option::is_some) {
        frequency(run, &time_phase(frames))?
    } else {
        None
    };
    let mut b = terms::finish(acc, run.conditions.viscosity, f.as_ref().map(|f| f.hz));
    b.frequency = f;
    b.reading = Some(reading::read(&b, run.derive.gamma_radius));
    Ok(b)
}

/// The `budget.csv` table.
pub(crate) fn table(b: &Budget) -> Table {
    let g = b.grid;
    let rows = b.slices.len() * g.len();
    let col = |f: &dyn Fn(&SliceBudget, usize) -> f64| -> Values {
        let mut v = Vec::with_capacity(rows);
        for s in &b.slices {
            v.extend((0..g.len()).map(|k| f(s, k)));
        }
        Values::F64(v)
    };
    let mut t = Table::new();
    let slice = col(&|s, _| match s.kind {
        SliceKind::Bin { bin, .. } => bin as f64,
        SliceKind::Frame { index, .. } => index as f64,
    });
    let Values::F64(slice) = slice else {
        unreachable!()
    };
    t.push(
        "slice",
        Values::I64(slice.iter().map(|&x| x as i64).collect()),
    );
    t.push(
        "phase_deg",
        col(&|s, _| match s.kind {
            SliceKind::Bin { centre_deg, .. } => centre_deg,
            SliceKind::Frame { .. } => f64::NAN,
        }),
    );
    t.push(
        "time_s",
        col(&|s, _| match s.kind {
            SliceKind::Frame { time_s, .. } => time_s,
            SliceKind::Bin { .. } => f64::NAN,
        }),
    );
    t.push("x", col(&|_, k| g.x(k % g.nx)));
    t.push("y", col(&|_, k| g.y(k / g.nx)));
    t.push("n", col(&|s, k| s.n[k]));
    t.push("u", col(&|s, k| s.u[k]));
    t.push("v", col(&|s, k| s.v[k]));
    t.push("omega", col(&|s, k| s.omega[k]));
    for (i, name) in TERMS.iter().enumerate() {
        t.push(*name, col(&|s, k| s.value[i][k]));
        t.push(format!("{name}_unc"), col(&|s, k| s.unc[i][k]));
    }
    t.push("residual", col(&|s, k| s.residual[k]));
    t.push("residual_unc", col(&|s, k| s.residual_unc[k]));
    let kk = b.k;
    t.push(
        "significant",
        col(&|s, k| {
            if s.residual[k].is_finite() && s.residual_unc[k].is_finite() {
                f64::from(u8::from(s.significant(k, kk)))
            } else {
                f64::NAN
            }
        }),
    );
    t
}
