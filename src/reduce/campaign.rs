//! Finishing a campaign: accumulators → statistics → tables, figures,
//! campaign.csv, manifest.json and the report, all into one output folder.
//! The same path serves `run` and `merge`, so a merged campaign writes
//! exactly what a single run writes.

use std::path::Path;
use std::time::Instant;

use sha2::{Digest, Sha256};

use super::{outputs, InputFile, Reduced};
use crate::error::{Error, Result};
use crate::plan::{Plan, RunPlan};
use crate::result::{CampaignResult, ComparisonResult, RunResult};
use crate::{compare, io, plot, report};

/// How the campaign was reduced, for the manifest.
#[derive(Debug, Clone, Default)]
pub(crate) struct Provenance {
    /// The command line, as typed.
    pub command: Vec<String>,
    pub jobs: usize,
    /// Seconds spent reading and reducing, per run (from `Reduced`).
    pub started_unix: f64,
    /// Shards merged, when the campaign came from `merge`.
    pub merged_shards: Option<usize>,
}

/// Statistics, tables, figures, campaign.csv, manifest and report for the
/// reduced runs, written into `out` (normally an `io::OutputDir`'s temp path).
pub(crate) fn finish_campaign(
    plan: &Plan,
    reduced: Vec<Reduced>,
    out: &Path,
    prov: &Provenance,
) -> Result<CampaignResult> {
    let t_all = Instant::now();
    let mut fin = finish_runs(plan, reduced, out)?;
    let compared = compare_runs(plan, &fin.runs, out, &mut fin.warnings)?;
    let extra: Vec<Vec<(String, f64)>> = fin
        .runs
        .iter()
        .map(report::conditions::campaign_columns)
        .collect();
    io::write_csv(
        &out.join("campaign.csv"),
        &outputs::campaign_table(&fin.runs, &extra),
    )?;
    let manifest = campaign_manifest(plan, prov, &fin, &compared, t_all);
    let result = CampaignResult {
        name: plan.campaign.clone(),
        runs: fin.runs,
        manifest: manifest.clone(),
        warnings: fin.warnings,
        comparisons: compared.list,
    };
    let text = serde_json::to_string_pretty(&manifest)
        .map_err(|e| Error::data(format!("manifest: {e}")))?;
    let mpath = out.join("manifest.json");
    std::fs::write(&mpath, text).map_err(|e| Error::io(&mpath, e))?;
    report::write_report(&result, out)?;
    Ok(result)
}

/// Every run finished: the results, their manifest entries, the input
/// files and the warnings, in run order.
struct FinishedRuns {
    runs: Vec<RunResult>,
    manifest_runs: Vec<serde_json::Value>,
    inputs: Vec<InputFile>,
    warnings: Vec<String>,
}

/// Finishes each reduced run in turn (`finish_run`).
fn finish_runs(plan: &Plan, reduced: Vec<Reduced>, out: &Path) -> Result<FinishedRuns> {
    let mut runs: Vec<RunResult> = Vec::with_capacity(reduced.len());
    let mut manifest_runs = Vec::new();
    let mut inputs: Vec<InputFile> = Vec::new();
    let mut warnings: Vec<String> = Vec::new();
    for r in reduced {
        let done = finish_run(plan, r, out)?;
        warnings.extend(done.run.warnings.iter().cloned());
        manifest_runs.push(done.manifest);
        inputs.extend(done.inputs);
        runs.push(done.run);
    }
    Ok(FinishedRuns {
        runs,
        manifest_runs,
        inputs,
        warnings,
    })
}

/// The comparisons between runs and the seconds they took.
struct Compared {
    list: Vec<ComparisonResult>,
    seconds: f64,
}

/// Runs the comparisons (when figures are drawn or `[[compare]]` asks for
/// some) and adds their warnings to `warnings`.
fn compare_runs(
    plan: &Plan,
    runs: &[RunResult],
    out: &Path,
    warnings: &mut Vec<String>,
) -> Result<Compared> {
    let mut compare_s = 0.0;
    let comparisons = if plan.figures || !plan.compare.is_empty() {
        let t = Instant::now();
        let c = compare::run_comparisons(&plan.compare, runs, out)?;
        for r in &c {
            warnings.extend(r.warnings.iter().cloned());
        }
        compare_s = t.elapsed().as_secs_f64();
        c
    } else {
        Vec::new()
    };
    Ok(Compared {
        list: comparisons,
        seconds: compare_s,
    })
}

/// manifest.json: the tool, the command, the pipeline, the inputs, each
/// run's entry, the warnings, the comparisons and the timings (`t_all`:
/// when finishing started).
fn campaign_manifest(
    plan: &Plan,
    prov: &Provenance,
    fin: &FinishedRuns,
    compared: &Compared,
    t_all: Instant,
) -> serde_json::Value {
    let pipeline_sha = hex(&Sha256::digest(plan.text.as_bytes()));
    serde_json::json!({
        "tool": "curlew",
        "version": crate::VERSION,
        "command": prov.command,
        "jobs": prov.jobs,
        "started_unix": prov.started_unix,
        "merged_shards": prov.merged_shards,
        "campaign": plan.campaign,
        "pipeline": {
            "path": plan.path.display().to_string(),
            "sha256": pipeline_sha,
            "text": plan.text,
            "as_read": serde_json::to_value(&plan.raw).unwrap_or(serde_json::Value::Null),
        },
        "inputs": fin.inputs,
        "runs": fin.manifest_runs,
        "warnings": fin.warnings,
        "comparisons": compared.list.iter().map(|c| serde_json::json!({
            "title": c.title,
            "runs": c.runs,
            "quantity": c.quantity,
            "n_compared": c.n_compared,
            "n_significant": c.n_significant,
            "interpolated": c.interpolated,
        })).collect::<Vec<_>>(),
        "comparisons_s": compared.seconds,
        "finish_s": t_all.elapsed().as_secs_f64(),
    })
}

/// One run finished: its result, its entry of the manifest and its inputs.
struct FinishedRun {
    run: RunResult,
    manifest: serde_json::Value,
    inputs: Vec<InputFile>,
}

/// Statistics, derived products (budget, vortices), tables, structures and
/// figures of one reduced run, written under `out/<id>`.
fn finish_run(plan: &Plan, mut r: Reduced, out: &Path) -> Result<FinishedRun> {
    let rp = plan
        .runs
        .iter()
        .find(|p| p.id == r.id)
        .ok_or_else(|| Error::usage(format!("run '{}' is not in the pipeline", r.id)))?;
    let t = Instant::now();
    let stats = r.state.acc.finish(&rp.stats);
    let mut timings = r.timings.clone();
    timings.push(("statistics".into(), t.elapsed().as_secs_f64()));
    let mut run_warnings = r.warnings.clone();
    run_warnings.extend(stats.warnings.iter().cloned());
    let frames = std::mem::take(&mut r.state.frames);
    let rr = new_result(rp, &r, frames, stats);
    let sketch = r.state.modes.take();
    let mut f = Finishing {
        plan,
        rp,
        out,
        rr,
        warnings: run_warnings,
        timings,
    };
    if let Some(b) = &r.state.budget {
        f.budget(b)?;
    }
    f.vortices(r.state.frame_cores.take())?;
    f.write_outputs(super::structures::Parts {
        acc: &r.state.acc,
        sketch: sketch.as_ref(),
        corr: r.state.corr.as_ref(),
    })?;
    if plan.figures {
        f.figures();
    }
    let Finishing {
        mut rr,
        warnings: run_warnings,
        timings,
        ..
    } = f;
    rr.warnings = run_warnings;
    let manifest = run_manifest(
        &rr,
        rp,
        &timings,
        r.n_frames_run,
        &r.state.scheme_counts,
        r.peak_lock.as_ref(),
    )?;
    Ok(FinishedRun {
        run: rr,
        manifest,
        inputs: r.state.inputs,
    })
}

/// The result of run `r` (plan `rp`) with its frame records `frames` and
/// statistics, and the mask of its figures; the products come later.
fn new_result(
    rp: &RunPlan,
    r: &Reduced,
    frames: Vec<crate::result::FrameRecord>,
    stats: crate::stats::RunStats,
) -> RunResult {
    let mut rr = RunResult {
        id: r.id.clone(),
        grid: r.grid,
        frames,
        stats,
        warnings: Vec::new(),
        figures: Vec::new(),
        conditions: rp.conditions.clone(),
        description: rp.description.clone(),
        budget: None,
        vortices: None,
        mask: None,
        structures: Default::default(),
    };
    let geometry = rp.mask.nodes(&r.grid, rp.input.grid_tolerance).ok();
    rr.mask = crate::mask::figure_mask(geometry.as_ref(), &rr.stats.ensemble);
    rr
}

/// One run being finished: its result so far, its warnings and timings.
struct Finishing<'a> {
    plan: &'a Plan,
    rp: &'a RunPlan,
    out: &'a Path,
    rr: RunResult,
    warnings: Vec<String>,
    timings: Vec<(String, f64)>,
}

impl Finishing<'_> {
    /// The vorticity budget from its accumulator `b`.
    fn budget(&mut self, b: &crate::budget::BudgetAcc) -> Result<()> {
        let rr = &mut self.rr;
        let t = Instant::now();
        let tp: Vec<_> = rr
            .frames
            .iter()
            .map(|f| (f.meta.time_s, f.meta.phase_deg))
            .collect();
        let bud = crate::reduce::budget::finish(b, self.rp, &tp)?;
        self.warnings
            .extend(bud.warnings.iter().map(|w| format!("run '{}': {w}", rr.id)));
        rr.budget = Some(bud);
        self.timings
            .push(("budget".into(), t.elapsed().as_secs_f64()));
        Ok(())
    }

    /// The vortex analysis, with the cores of every frame when they were
    /// found.
    fn vortices(&mut self, frame_cores: Option<crate::vortex::frames::FrameCores>) -> Result<()> {
        let (rr, rp) = (&mut self.rr, self.rp);
        // the cycle's frequency by the budget's one resolution
        let f = match rp.vortices.is_some() && !rr.stats.phase.is_empty() {
            true => {
                let tp: Vec<_> = rr
                    .frames
                    .iter()
                    .map(|f| (f.meta.time_s, f.meta.phase_deg))
                    .collect();
                crate::reduce::budget::frequency(rp, &crate::reduce::budget::time_phase(&tp))?
                    .map(|f| f.hz)
            }
            false => None,
        };
        if let Some(v) = crate::reduce::vortices::analyse(rr, rp, f, frame_cores) {
            self.warnings
                .extend(v.warnings.iter().map(|w| format!("run '{}': {w}", rr.id)));
            rr.vortices = Some(v);
        }
        Ok(())
    }

    /// The run's tables, its NetCDF file and its structures (POD modes,
    /// two-point correlations, spectra) from `parts`.
    fn write_outputs(&mut self, parts: super::structures::Parts) -> Result<()> {
        let (rr, out) = (&mut self.rr, self.out);
        let t = Instant::now();
        outputs::write_run_tables(&out.join(&rr.id), rr)?;
        outputs::write_run_netcdf(&out.join(&rr.id), rr, &self.plan.text)?;
        let (st, w) = super::structures::finish(self.rp, rr, parts, &out.join(&rr.id))?;
        self.warnings.extend(w);
        rr.structures = st;
        self.timings
            .push(("write".into(), t.elapsed().as_secs_f64()));
        Ok(())
    }

    /// The run's figures; a failure to draw them is a warning, not an error.
    fn figures(&mut self) {
        let (rr, rp, out) = (&mut self.rr, self.rp, self.out);
        let t = Instant::now();
        match plot::run_figures(&rp.plot, rr, out).and_then(|mut f| {
            f.extend(crate::plot::vortices::draw(&rp.plot, rr, out)?);
            Ok(f)
        }) {
            Ok(f) => rr.figures = f,
            Err(e) => self
                .warnings
                .push(format!("run '{}': figures could not be drawn: {e}", rr.id)),
        }
        self.timings
            .push(("figures".into(), t.elapsed().as_secs_f64()));
    }
}

/// The manifest's entry of one run: per-test vector totals, rejected frames,
/// timings, the resolved settings, warnings, schemes and peak-locking.
fn run_manifest(
    rr: &RunResult,
    rp: &RunPlan,
    timings: &[(String, f64)],
    n_frames_run: usize,
    scheme_counts: &[(String, usize)],
    peak_lock: Option<&crate::validate::peaklock::PeakLock>,
) -> Result<serde_json::Value> {
    // Per-test totals over the run's frames (each vector counted once, by
    // the first test of the chain that rejected it), and the filling.
    let mut tests = serde_json::Map::new();
    for f in &rr.frames {
        let counts = [
            serde_json::to_value(f.validation),
            serde_json::to_value(f.fill),
        ];
        for v in counts.into_iter().flatten() {
            if let serde_json::Value::Object(m) = v {
                for (k, x) in m {
                    let e = tests.entry(k).or_insert(serde_json::json!(0));
                    *e = serde_json::json!(e.as_u64().unwrap_or(0) + x.as_u64().unwrap_or(0));
                }
            }
        }
    }
    let frames_rejected = rr
        .frames
        .iter()
        .filter(|f| f.rejected)
        .map(|f| f.meta.name.clone())
        .collect::<Vec<_>>();
    Ok(serde_json::json!({
        "id": rr.id,
        "vector_counts": tests,
        "frames_rejected": frames_rejected,
        "frames": rr.frames.len(),
        "frames_in_run": n_frames_run,
        "grid": rr.grid,
        "orientation": rp.input.orientation.describe(),
        "units": crate::io::units::describe(&rp.input),
        "timings_s": timings.iter().map(|(k, v)| (k.clone(), serde_json::json!(v))).collect::<serde_json::Map<_, _>>(),
        "resolved": rp.resolved_json()?,
        "resolved_in_words": rp.describe_json(),
        "warnings": rr.warnings,
        "derivative_schemes": scheme_counts.iter().map(|(k, v)| (k.clone(), serde_json::json!(v))).collect::<serde_json::Map<_, _>>(),
        "peak_locking": peak_lock.map(|p| serde_json::json!({
            "n": p.n, "R": p.r, "p_value": p.p_value, "inconclusive": p.inconclusive,
            "warning": p.warning, "histogram": p.histogram,
        })),
    }))
}

/// Lower-case hex of bytes.
pub(crate) fn hex(b: &[u8]) -> String {
    b.iter().map(|x| format!("{x:02x}")).collect()
}
