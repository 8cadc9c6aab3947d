//! The budget's place in a run: making its accumulator from the plan,
//! finishing it with the run's conditions, and its output table.
//!
//! Owns: the glue `reduce` calls (a few lines there) and the columns of
//! `budget.csv` / `budget.parquet` (docs/budget.md). Does not own the
//! numerics (`ops`, `acc`, `terms`) or the writing (`io`).
//!
//! Columns (one row per slice and node, slices in order, nodes row by row):
//! `slice` (phase bin or frame number), `phase_deg` (bin centre; NaN for a
//! frame), `time_s` (NaN for a bin), `x`, `y` (m), `n` (samples), `u`, `v`
//! (m/s), `omega` (1/s), then for each of unsteady, advection, stretching,
//! diffusion, turbulent the value and `<term>_unc` (1/s², standard
//! uncertainty), `residual`, `residual_unc`, and `significant` (1 where
//! |residual| > k residual_unc, 0 where not, NaN where the residual is).

use super::terms::{Budget, SliceKind, TERMS};
use super::{BudgetAcc, Params};
use crate::field::Grid;
use crate::io::{Table, Values};
use crate::plan::RunPlan;

/// The accumulator of `run`'s budget on `grid`, when the run asks for one.
pub fn start(run: &RunPlan, grid: Grid) -> Option<BudgetAcc> {
    let p: &Params = run.budget.as_ref()?;
    Some(BudgetAcc::new(
        p,
        &run.stats,
        grid,
        run.derive.smoother.equivalent_stencil(),
    ))
}

/// What `curlew check` says about the budget of a run: what will be
/// computed and what is missing.
pub fn check_lines(run: &RunPlan, has_phase: bool, has_time: bool) -> Vec<String> {
    let Some(p) = &run.budget else {
        return Vec::new();
    };
    let c = &run.conditions;
    let mut out = vec![format!(
        "budget: {} differences; terms unsteady, advection, stretching, diffusion, turbulent, residual (significant beyond k = {})",
        p.scheme, p.k
    )];
    if c.viscosity.is_none() {
        out.push("budget: no [run.conditions] viscosity: the diffusion term and the residual will be empty".into());
    }
    if has_phase && c.frequency.is_none() {
        out.push("budget: no [run.conditions] frequency: the unsteady term and the residual of the phase bins will be empty".into());
    }
    if !has_phase && p.frames.is_empty() {
        out.push(
            "budget: the frames have no phases and [budget] frames is empty: nothing to compute"
                .into(),
        );
    }
    if !p.frames.is_empty() && !has_time {
        out.push("budget: [budget] frames needs frame times (time_s in the frame table) for the unsteady term".into());
    }
    out
}

/// The finished budget of a run with its conditions.
pub fn finish(acc: &BudgetAcc, run: &RunPlan) -> Budget {
    super::terms::finish(acc, run.conditions.viscosity, run.conditions.frequency)
}

/// The `budget.csv` table.
pub fn table(b: &Budget) -> Table {
    let g = b.grid;
    let rows = b.slices.len() * g.len();
    let col = |f: &dyn Fn(&super::SliceBudget, usize) -> f64| -> Values {
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
