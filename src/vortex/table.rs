//! The vortex tables: `vortices.csv`, `tracks.csv` and
//! `circulation-budget.csv` (docs/vortices.md lists every column, SI).
//!
//! Owns: the columns and their order. Does not own: writing (`io`).
//!
//! Common leading columns: `slice_kind` (mean, bin or frame), `slice`
//! (phase bin or frame number; -1 for the mean), `phase_deg` (bin centre;
//! NaN otherwise), `time_s` (NaN when unknown).

use super::budget::CoreBudget;
use super::{Core, SliceKind, Vortices};
use crate::budget::TERMS;
use crate::io::{Table, Values};

fn kind_cols(kinds: &[(SliceKind, f64)], t: &mut Table) {
    t.push(
        "slice_kind",
        Values::Str(
            kinds
                .iter()
                .map(|(k, _)| match k {
                    SliceKind::Mean => "mean",
                    SliceKind::Bin { .. } => "bin",
                    SliceKind::Frame { .. } => "frame",
                })
                .map(String::from)
                .collect(),
        ),
    );
    t.push(
        "slice",
        Values::I64(
            kinds
                .iter()
                .map(|(k, _)| match *k {
                    SliceKind::Mean => -1,
                    SliceKind::Bin { bin, .. } => bin as i64,
                    SliceKind::Frame { index } => index as i64,
                })
                .collect(),
        ),
    );
    t.push(
        "phase_deg",
        Values::F64(
            kinds
                .iter()
                .map(|(k, _)| match *k {
                    SliceKind::Bin { phase_deg, .. } => phase_deg,
                    _ => f64::NAN,
                })
                .collect(),
        ),
    );
    t.push(
        "time_s",
        Values::F64(kinds.iter().map(|(_, t)| *t).collect()),
    );
}

type CoreCol = (&'static str, fn(&Core) -> f64);

/// The per-core measures shared by `vortices.csv` and `tracks.csv`.
const CORE_COLS: [CoreCol; 24] = [
    ("sign", |c| f64::from(c.sign)),
    ("x", |c| c.x),
    ("y", |c| c.y),
    ("x_unc", |c| c.x_unc),
    ("y_unc", |c| c.y_unc),
    ("x_gamma1", |c| c.x_gamma1),
    ("y_gamma1", |c| c.y_gamma1),
    ("n_nodes", |c| c.nodes.len() as f64),
    ("area", |c| c.area),
    ("radius_eq", |c| c.radius_eq),
    ("radius_moment", |c| c.radius_moment),
    ("radius_moment_unc", |c| c.radius_moment_unc),
    ("circulation", |c| c.circulation),
    ("circulation_unc", |c| c.circulation_unc),
    ("peak_omega", |c| c.peak_omega),
    ("peak_omega_unc", |c| c.peak_omega_unc),
    ("fit_x", |c| c.fit.map_or(f64::NAN, |f| f.x)),
    ("fit_y", |c| c.fit.map_or(f64::NAN, |f| f.y)),
    ("fit_gamma", |c| c.fit.map_or(f64::NAN, |f| f.gamma)),
    ("fit_gamma_unc", |c| c.fit.map_or(f64::NAN, |f| f.gamma_unc)),
    ("fit_rc", |c| c.fit.map_or(f64::NAN, |f| f.rc)),
    ("fit_rc_unc", |c| c.fit.map_or(f64::NAN, |f| f.rc_unc)),
    ("fit_chi2_red", |c| c.fit.map_or(f64::NAN, |f| f.chi2_red)),
    ("edge", |c| f64::from(u8::from(c.edge))),
];

fn core_cols(cores: &[&Core], t: &mut Table) {
    for (name, f) in CORE_COLS {
        let v: Vec<f64> = cores.iter().map(|c| f(c)).collect();
        if matches!(name, "sign" | "n_nodes" | "edge") {
            t.push(name, Values::I64(v.iter().map(|&x| x as i64).collect()));
        } else {
            t.push(name, Values::F64(v));
        }
    }
}

/// `vortices.csv`: one row per core of every slice (the mean first): the
/// leading columns, `core` (index in its slice), `track` (-1: none), then
/// `CORE_COLS`.
pub(crate) fn vortices_table(v: &Vortices) -> Table {
    let mut kinds = Vec::new();
    let mut cores = Vec::new();
    let (mut idx, mut trk) = (Vec::new(), Vec::new());
    for (si, s) in v.slices.iter().enumerate() {
        for (ci, c) in s.cores.iter().enumerate() {
            kinds.push((s.kind, s.time_s));
            cores.push(c);
            idx.push(ci as i64);
            let id = v
                .tracks
                .iter()
                .find(|t| t.points.iter().any(|p| p.slice == si && p.core == ci));
            trk.push(id.map_or(-1, |t| t.id as i64));
        }
    }
    let mut t = Table::new();
    kind_cols(&kinds, &mut t);
    t.push("core", Values::I64(idx));
    t.push("track", Values::I64(trk));
    core_cols(&cores, &mut t);
    t
}

/// `tracks.csv`: one row per point of every track: `track`, `point` (0, 1,
/// …), the leading columns (time unwrapped over periods), `core`, then
/// `CORE_COLS`, then the track's own `n_points`, `u_conv`, `u_conv_unc`,
/// `v_conv`, `v_conv_unc` (m/s) and `growth`, `growth_unc` (d(rc²)/dt of
/// the fits, m²/s), repeated on each of its rows.
pub(crate) fn tracks_table(v: &Vortices) -> Table {
    let mut kinds = Vec::new();
    let mut cores = Vec::new();
    let (mut id, mut pt, mut ci) = (Vec::new(), Vec::new(), Vec::new());
    let mut track_cols: Vec<[f64; 7]> = Vec::new();
    for t in &v.tracks {
        let vel = t.velocity;
        let pick = |a: usize| vel.map_or([f64::NAN; 2], |v| [v[a].value, v[a].unc]);
        let row = [
            t.points.len() as f64,
            pick(0)[0],
            pick(0)[1],
            pick(1)[0],
            pick(1)[1],
            t.growth.map_or(f64::NAN, |g| g.value),
            t.growth.map_or(f64::NAN, |g| g.unc),
        ];
        for (k, p) in t.points.iter().enumerate() {
            let s = &v.slices[p.slice];
            kinds.push((s.kind, p.time_s));
            cores.push(&s.cores[p.core]);
            id.push(t.id as i64);
            pt.push(k as i64);
            ci.push(p.core as i64);
            track_cols.push(row);
        }
    }
    let mut t = Table::new();
    t.push("track", Values::I64(id));
    t.push("point", Values::I64(pt));
    kind_cols(&kinds, &mut t);
    t.push("core", Values::I64(ci));
    core_cols(&cores, &mut t);
    let names = [
        "n_points",
        "u_conv",
        "u_conv_unc",
        "v_conv",
        "v_conv_unc",
        "growth",
        "growth_unc",
    ];
    for (k, name) in names.iter().enumerate() {
        let col: Vec<f64> = track_cols.iter().map(|r| r[k]).collect();
        if k == 0 {
            t.push(*name, Values::I64(col.iter().map(|&x| x as i64).collect()));
        } else {
            t.push(*name, Values::F64(col));
        }
    }
    t
}

/// `circulation-budget.csv`: one row per core of every budget slice: the
/// leading columns, `core`, `sign`, `x`, `y`, `n_nodes`, `circulation`
/// (m²/s), then each term integrated over the core and its uncertainty
/// (m²/s²: `unsteady` is dGamma/dt of the fixed region), `residual`,
/// `residual_unc`.
pub(crate) fn budget_table(rows: &[CoreBudget]) -> Table {
    let mut t = Table::new();
    let kinds: Vec<(SliceKind, f64)> = rows.iter().map(|r| (r.kind, r.time_s)).collect();
    kind_cols(&kinds, &mut t);
    let f = |g: &dyn Fn(&CoreBudget) -> f64| Values::F64(rows.iter().map(g).collect());
    let i = |g: &dyn Fn(&CoreBudget) -> i64| Values::I64(rows.iter().map(g).collect());
    t.push("core", i(&|r| r.core as i64));
    t.push("sign", i(&|r| i64::from(r.sign)));
    t.push("x", f(&|r| r.x));
    t.push("y", f(&|r| r.y));
    t.push("n_nodes", i(&|r| r.n_nodes as i64));
    t.push("circulation", f(&|r| r.circulation));
    for (k, name) in TERMS.iter().enumerate() {
        t.push(*name, f(&|r| r.value[k]));
        t.push(format!("{name}_unc"), f(&|r| r.unc[k]));
    }
    t.push("residual", f(&|r| r.residual));
    t.push("residual_unc", f(&|r| r.residual_unc));
    t
}

/// Writes `vortices.csv`, `tracks.csv` (when the run has slices to track
/// across) and `circulation-budget.csv` (when the run has a budget) in
/// `dir` (= `OUT/<run id>`).
pub(crate) fn write(dir: &std::path::Path, v: &Vortices) -> crate::error::Result<()> {
    crate::io::write_csv(&dir.join("vortices.csv"), &vortices_table(v))?;
    if v.slices.iter().any(|s| s.kind != SliceKind::Mean) {
        crate::io::write_csv(&dir.join("tracks.csv"), &tracks_table(v))?;
    }
    if !v.budget.is_empty() {
        crate::io::write_csv(
            &dir.join("circulation-budget.csv"),
            &budget_table(&v.budget),
        )?;
    }
    Ok(())
}
