//! The vortex analysis's place in a run: from the finished statistics (and
//! budget) to `Vortices`, and what `curlew check` says.
//!
//! Owns: the glue `reduce` calls (a few lines there). Does not own the
//! numerics (`vortex::core`, `track`, `budget`), the tables
//! (`vortex::table`) or the report's words (`report::vortices`).
//!
//! Slices: the run's mean field (`ensemble`: u_mean, v_mean, omega_mean,
//! omega_mean_unc), then each phase bin's mean field (`phase`), in bin
//! order. Bin times are `phase / (2 pi f)` with f from `[run.conditions]
//! frequency`; without f the tracks have no velocity.

use crate::field::NodeTable;
use crate::plan::RunPlan;
use crate::result::RunResult;
use crate::stencil::correlation::Correlation;
use crate::vortex::corr::OmegaCorrelation;
use crate::vortex::frames::FrameCores;
use crate::vortex::{find_cores, track, Core, Params, Slice, SliceCores, SliceKind, Vortices};

/// The slice of a node table's mean columns, or `None` when one of u, v,
/// omega and omega's uncertainty is missing (the velocity's uncertainties,
/// which only the swirl criterion needs, are NaN when missing).
fn slice_of<'a>(
    t: &'a NodeTable,
    kind: SliceKind,
    time_s: f64,
    nan: &'a [f64],
) -> Option<Slice<'a>> {
    Some(Slice {
        kind,
        time_s,
        grid: t.grid,
        u: t.get("u_mean")?,
        v: t.get("v_mean")?,
        omega: t.get("omega_mean")?,
        omega_unc: t.get("omega_mean_unc")?,
        u_unc: t.get("u_mean_unc").unwrap_or(nan),
        v_unc: t.get("v_mean_unc").unwrap_or(nan),
    })
}

/// The vortex analysis of a finished run, when the run asks for one.
/// `frequency` is the run's cycle frequency in Hz, from the one resolution
/// the budget uses too (`budget::run::frequency`: given, the frame table's
/// column, or fitted to the frames' phases and times). `frame_cores` are
/// the cores the reduction found in every used frame (`frames`), when the
/// run asked for them.
pub(crate) fn analyse(
    rr: &RunResult,
    rp: &RunPlan,
    frequency: Option<f64>,
    frame_cores: Option<FrameCores>,
) -> Option<Vortices> {
    let p: &Params = rp.vortices.as_ref()?;
    let g = rr.grid;
    let corr = OmegaCorrelation::for_run(&rp.derive, &g);
    let radius = rp.derive.gamma_radius;
    let f = frequency;
    let mut warnings = Vec::new();
    let find = |s: &Slice| find_cores(s, p, radius, &corr);
    let mut slices = mean_and_bin_cores(rr, f, &find, &mut warnings);
    let gate = p.gate * g.dx.max(g.dy);
    // the bins, periodic
    let first = slices
        .iter()
        .position(|s| s.kind != SliceKind::Mean)
        .unwrap_or(slices.len());
    let mut tracks = track_range(&slices, first, gate, f.map(|f| 1.0 / f));
    if !rr.stats.phase.is_empty() && f.is_none() {
        warnings.push("vortices: no frequency (none in [run.conditions] or the frame table, and the phases and times fit none): tracks have no convection speed or core growth".into());
    }
    // the frames, in order, when the run is time-resolved
    if let Some(fc) = frame_cores {
        warnings.extend(track_frames(rr, fc, gate, &mut slices, &mut tracks));
    }
    let budget = rr
        .budget
        .as_ref()
        .map(|b| crate::vortex::budget::core_budgets(b, p, radius, f, budget_correlation(rp)))
        .unwrap_or_default();
    Some(Vortices {
        grid: g,
        slices,
        tracks,
        budget,
        params: p.clone(),
        correlation: corr.description,
        warnings,
    })
}

/// The velocity error correlation the circulation budget's integrals carry
/// (none when the overlap is estimated per frame, as in `for_run`).
fn budget_correlation(rp: &RunPlan) -> Correlation {
    if rp.derive.correlation_from_data {
        Correlation::Independent
    } else {
        rp.derive.correlation
    }
}

/// The cores `find` finds in the mean field, then in each phase bin's mean
/// field (at the bin's time when the frequency `f` is known); a warning
/// when the mean field lacks a column.
fn mean_and_bin_cores(
    rr: &RunResult,
    f: Option<f64>,
    find: &dyn Fn(&Slice) -> Vec<Core>,
    warnings: &mut Vec<String>,
) -> Vec<SliceCores> {
    let mut slices = Vec::new();
    let nan = vec![f64::NAN; rr.grid.len()];
    match slice_of(&rr.stats.ensemble, SliceKind::Mean, f64::NAN, &nan).map(|s| find(&s)) {
        Some(cores) => slices.push(SliceCores {
            kind: SliceKind::Mean,
            time_s: f64::NAN,
            cores,
        }),
        None => warnings.push("vortices: the mean field has no u_mean, v_mean, omega_mean or omega_mean_unc column; no cores".into()),
    }
    for b in &rr.stats.phase {
        let kind = SliceKind::Bin {
            bin: b.bin,
            phase_deg: b.centre_deg,
        };
        let t = f.map_or(f64::NAN, |f| b.centre_deg / 360.0 / f);
        if let Some(cores) = slice_of(&b.table, kind, t, &nan).map(|s| find(&s)) {
            slices.push(SliceCores {
                kind,
                time_s: t,
                cores,
            });
        }
    }
    slices
}

/// Appends the cores of every frame `fc` to `slices` and, when the run is
/// time-resolved, their tracks (numbered after `tracks`) to `tracks`;
/// otherwise the warning that says why they are not tracked.
fn track_frames(
    rr: &RunResult,
    fc: FrameCores,
    gate: f64,
    slices: &mut Vec<SliceCores>,
    tracks: &mut Vec<track::Track>,
) -> Option<String> {
    let start = slices.len();
    slices.extend(fc.slices);
    let times: Vec<Option<f64>> = rr.frames.iter().map(|r| r.meta.time_s).collect();
    match crate::spectra::run::clock(&times) {
        Ok(_) => {
            let n = tracks.len();
            let mut more = track_range(slices, start, gate, None);
            for t in &mut more {
                t.id += n;
            }
            tracks.extend(more);
            None
        }
        Err(why) => Some(format!(
            "vortices: cores were found in every frame but not tracked across frames: the run is not time-resolved ({why})"
        )),
    }
}

/// Tracks the slices `slices[start..]` up to the first slice of another
/// kind (bins, or frames), with track points indexing `slices`.
fn track_range(
    slices: &[SliceCores],
    start: usize,
    gate: f64,
    period: Option<f64>,
) -> Vec<track::Track> {
    let frames = |s: &SliceCores| matches!(s.kind, SliceKind::Frame { .. });
    let kind = slices.get(start).map(frames);
    let end = (start..slices.len())
        .find(|&k| Some(frames(&slices[k])) != kind)
        .unwrap_or(slices.len());
    let mut tracks = track::track(&slices[start..end], gate, period);
    for t in &mut tracks {
        for q in &mut t.points {
            q.slice += start;
        }
    }
    tracks
}

/// What `curlew check` says about the vortex analysis of a run.
pub fn check_lines(rp: &RunPlan, has_phase: bool, frequency: Option<f64>) -> Vec<String> {
    let Some(p) = &rp.vortices else {
        return Vec::new();
    };
    let mut out = vec![format!("vortices: {}", p.describe())];
    if has_phase {
        out.push("vortices: cores in the mean field and in every phase-bin mean; tracks across the bins (periodic)".into());
        if frequency.is_none() {
            out.push("vortices: no frequency (none in [run.conditions] or the frame table, and the phases and times fit none): tracks will have no convection speed or core growth".into());
        }
    } else if !p.frames {
        out.push(
            "vortices: the frames have no phases: cores in the mean field only, no tracks".into(),
        );
    }
    if p.frames {
        out.push("vortices: cores in every used frame as well (frame rows of vortices.csv); tracked across frames when every frame has an evenly spaced time (a time-resolved run)".into());
    }
    if rp.budget.is_some() {
        out.push("vortices: circulation budget of every core of every budget slice (circulation-budget.csv)".into());
    }
    out
}
