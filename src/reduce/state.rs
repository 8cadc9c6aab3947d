//! The state a run's frames add up to, whoever reduced them: a chunk of
//! one thread, a shard of a cluster job, or the whole run.
//!
//! Owns: what a frame adds (`push`) and the one merge of two states in
//! frame order (`merge`), used alike by the threads' chunks
//! (`reduce_run`) and by the shards' partial folders (`partial::merge`),
//! so that a piece of state added to a run (an accumulator of a new
//! analysis) is merged the same way everywhere or not at all. Does not own
//! the numerics of any accumulator (each merges itself exactly), the frame
//! loop (`reduce_run`) or the serialisation (`partial`).
//!
//! Merge rule: `later` holds the frames that follow `self`'s. Every
//! accumulator merges exactly (sums of moments, co-moments, sketches), so
//! the merged state equals the one a single sequential pass would give up
//! to floating-point association, which the fixed chunking makes the same
//! for any thread count. Optional accumulators must be present on both
//! sides or on neither: a state with a budget cannot merge with one
//! without (an error naming which).

use crate::error::{Error, Result};
use crate::field::{Field, FrameMeta, Grid};
use crate::modes::ModeSketch;
use crate::plan::RunPlan;
use crate::result::FrameRecord;
use crate::scales::CorrAcc;
use crate::stats::RunAccumulator;
use crate::validate::peaklock::PeakLockAcc;
use crate::vortex::frames::{Finder, FrameCores};
use std::sync::Arc;

use super::InputFile;

/// Everything a run's frames add up to (see the module doc).
pub(crate) struct RunState {
    /// The statistics' accumulators.
    pub acc: RunAccumulator,
    /// One record per frame, in frame order.
    pub frames: Vec<FrameRecord>,
    /// The input files read, with their sizes and hashes.
    pub inputs: Vec<InputFile>,
    /// Node-frames per derivative scheme (what `auto` chose, or the one fixed scheme).
    pub scheme_counts: Vec<(String, usize)>,
    /// The peak-locking accumulator of the valid displacements, when the
    /// calibration is known.
    pub peak_acc: Option<PeakLockAcc>,
    /// The vorticity budget's accumulator, when the run asks for one.
    pub budget: Option<crate::budget::BudgetAcc>,
    /// The POD sketch, when `[modes]` asks for it.
    pub modes: Option<ModeSketch>,
    /// The two-point co-moments at the probes, when the run names probes.
    pub corr: Option<CorrAcc>,
    /// The cores of every used frame, when `[vortices] frames = true`.
    pub frame_cores: Option<FrameCores>,
}

/// The empty shapes of the accumulators that need a first pass to size
/// (the POD sketch's random test matrix, the probes' co-moments): made
/// once per run and cloned empty into every chunk.
pub(crate) struct Templates {
    /// The POD sketch (with its test matrix), when `[modes]` asks for it.
    pub modes: Option<ModeSketch>,
    /// The probes' co-moments, when the run names probes.
    pub corr: Option<CorrAcc>,
    /// What finds a frame's cores, when `[vortices] frames = true`.
    pub cores: Option<Arc<Finder>>,
}

impl Templates {
    /// The templates of `run` on `grid`, a run of `total` frames.
    pub(crate) fn of(run: &RunPlan, grid: Grid, total: u64) -> Templates {
        Templates {
            modes: run
                .modes
                .enabled
                .then(|| ModeSketch::new(&run.modes, grid.len())),
            corr: CorrAcc::new(&run.stats, grid, total),
            cores: Finder::of(run.vortices.as_ref(), &run.derive, grid),
        }
    }
}

impl RunState {
    /// The state of no frames of `run` on `grid`, with the quantities
    /// `names`.
    pub(crate) fn empty(
        run: &RunPlan,
        grid: Grid,
        names: &[&'static str],
        t: &Templates,
    ) -> RunState {
        RunState {
            acc: RunAccumulator::new(&run.stats, grid, names),
            frames: Vec::new(),
            inputs: Vec::new(),
            scheme_counts: Vec::new(),
            peak_acc: run.px_velocity.map(PeakLockAcc::new),
            budget: crate::reduce::budget::start(run, grid),
            modes: t.modes.as_ref().map(ModeSketch::empty_like),
            corr: t.corr.as_ref().map(CorrAcc::empty_like),
            frame_cores: t.cores.clone().map(FrameCores::new),
        }
    }

    /// Adds one used (not rejected) frame to every accumulator.
    pub(crate) fn push(
        &mut self,
        meta: &FrameMeta,
        field: &Field,
        derived: &crate::derive::Derived,
    ) {
        self.acc.push(meta, field, derived);
        if let Some(b) = self.budget.as_mut() {
            b.push(meta, field, derived);
        }
        if let Some(m) = self.modes.as_mut() {
            m.push_frame(meta, derived);
        }
        if let Some(c) = self.corr.as_mut() {
            c.push(meta.index as u64, field, derived);
        }
        if let Some(c) = self.frame_cores.as_mut() {
            c.push(meta, field.grid, derived);
        }
    }

    /// Adds `names[k]` × `counts[k]` to the scheme counts, keeping
    /// first-seen order.
    pub(crate) fn add_scheme_counts(&mut self, names: &[&str], counts: &[usize]) {
        add_counts(&mut self.scheme_counts, names, counts);
    }

    /// Merges `later`, the state of the frames that follow `self`'s, or
    /// says why the two cannot merge (`self` may then be partly merged:
    /// the caller stops with the error).
    pub(crate) fn merge(&mut self, later: RunState) -> Result<()> {
        self.acc.try_merge(later.acc)?;
        both(
            "a peak-locking accumulator",
            &mut self.peak_acc,
            later.peak_acc,
            |a, b| {
                a.merge(b);
                Ok(())
            },
        )?;
        both(
            "a vorticity budget (budget.bin)",
            &mut self.budget,
            later.budget,
            |a, b| {
                a.merge(b);
                Ok(())
            },
        )?;
        both("a POD sketch", &mut self.modes, later.modes, |a, b| {
            a.compatible(&b)?;
            a.merge(b);
            Ok(())
        })?;
        both(
            "two-point correlations",
            &mut self.corr,
            later.corr,
            |a, b| {
                a.compatible(&b)?;
                a.merge(b);
                Ok(())
            },
        )?;
        both(
            "cores in every frame (frame-cores.bin)",
            &mut self.frame_cores,
            later.frame_cores,
            |a, b| {
                a.merge(b);
                Ok(())
            },
        )?;
        self.frames.extend(later.frames);
        self.inputs.extend(later.inputs);
        for (k, c) in later.scheme_counts {
            match self.scheme_counts.iter_mut().find(|(n, _)| *n == k) {
                Some(e) => e.1 += c,
                None => self.scheme_counts.push((k, c)),
            }
        }
        Ok(())
    }
}

/// Merges an optional accumulator present on both sides (or on neither).
fn both<T>(
    what: &str,
    a: &mut Option<T>,
    b: Option<T>,
    merge: impl FnOnce(&mut T, T) -> Result<()>,
) -> Result<()> {
    match (a.as_mut(), b) {
        (Some(a), Some(b)) => merge(a, b),
        (None, None) => Ok(()),
        _ => Err(Error::data(format!(
            "cannot merge: some parts of the run have {what} and some not"
        ))),
    }
}

/// Adds `names[k]` × `counts[k]` into `into`, keeping first-seen order.
pub(super) fn add_counts(into: &mut Vec<(String, usize)>, names: &[&str], counts: &[usize]) {
    for (name, &c) in names.iter().zip(counts) {
        match into.iter_mut().find(|(n, _)| n == name) {
            Some(e) => e.1 += c,
            None => into.push(((*name).to_string(), c)),
        }
    }
}
