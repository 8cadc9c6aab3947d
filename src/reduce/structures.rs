//! Finishing a run's coherent structures and scales: the POD (`modes`),
//! the two-point statistics at the probes (`scales`) and the spectra of a
//! time-resolved run (`spectra::run`), with their tables in `<run>/`.
//!
//! Owns: which of them run and the series handed to the spectra. Does not
//! own any numerics. Tables: `modes::output` (POD), `correlation.csv` and
//! `scales.csv` (`scales::finish`), `spectra.csv` and `spectral-peaks.csv`
//! (`spectra::run`); docs/interface.md lists every column and unit,
//! docs/modes.md the methods.

use std::path::Path;

use crate::describe::num;
use crate::error::Result;
use crate::field::Grid;
use crate::io;
use crate::modes::{self, phase, ModeSketch, RunPod};
use crate::plan::RunPlan;
use crate::result::{FrameRecord, RunResult, Structures};
use crate::scales::CorrAcc;
use crate::spectra::run as spec;
use crate::stats::RunAccumulator;

/// The run's accumulated parts that structures are made from.
pub(crate) struct Parts<'a> {
    pub acc: &'a RunAccumulator,
    pub sketch: Option<&'a ModeSketch>,
    pub corr: Option<&'a CorrAcc>,
}

/// Finishes and writes the structures of `rr` into `dir`; warnings are
/// prefixed with the run.
pub(crate) fn finish(
    rp: &RunPlan,
    rr: &RunResult,
    parts: Parts,
    dir: &Path,
) -> Result<(Structures, Vec<String>)> {
    let mut st = Structures {
        figure_modes: rp.modes.figure_modes,
        ..Structures::default()
    };
    let mut warnings = Vec::new();
    if let Some(s) = parts.sketch {
        let (pod, est, w) = write_pod(s, rp, &rr.frames, &rr.grid, dir)?;
        warnings.extend(w);
        st.pod = Some(pod);
        st.phase = est;
    }
    if let Some(c) = parts.corr {
        let s = crate::scales::finish(c);
        io::write_csv(
            &dir.join("correlation.csv"),
            &crate::scales::finish::correlation_table(&s),
        )?;
        io::write_csv(
            &dir.join("scales.csv"),
            &crate::scales::finish::scales_table(&s),
        )?;
        st.scales = Some(s);
    }
    let mut sw = Vec::new();
    st.spectra = run_spectra(rp, rr, parts.acc, st.pod.as_ref(), &mut sw)?;
    warnings.extend(sw.into_iter().map(|w| format!("run '{}': {w}", rr.id)));
    if let Some(s) = &st.spectra {
        io::write_csv(&dir.join("spectra.csv"), &spec::spectra_table(s))?;
        io::write_csv(&dir.join("spectral-peaks.csv"), &spec::peaks_table(s))?;
    }
    Ok((st, warnings))
}

/// Whether `[spectra]` asks for spectra of a run with (or without) probe
/// series and a POD: `psd = true`, or by default when there is a series to
/// take (`spectra::run::Params::enabled`). Time-resolution is checked
/// apart (`spectra::run::clock`).
fn spectra_asked(p: &spec::Params, probes: bool, pod: bool) -> bool {
    match p.enabled {
        Some(on) => on,
        None => probes || pod,
    }
}

/// `curlew check`'s lines on the POD, the two-point correlations and the
/// spectra of a run: whether each will run, and what it needs. `times`:
/// every frame's time, in frame order (from the frame table).
pub fn check_lines(rp: &RunPlan, times: &[Option<f64>]) -> Vec<String> {
    let mut out = Vec::new();
    let m = &rp.modes;
    out.push(if m.enabled {
        format!(
            "POD: on, {} modes reported from a one-pass sketch of {} columns{} (pod.csv, pod-coefficients.csv, modes.csv)",
            m.modes,
            m.modes + m.oversampling,
            if m.phase {
                "; each frame's phase from modes 1 and 2 (phase-from-modes.csv)"
            } else {
                ""
            }
        )
    } else {
        "POD: off ([modes] pod = true turns it on; needs nothing else)".into()
    });
    let np = rp.stats.probes.len();
    out.push(if np > 0 {
        format!(
            "correlations: two-point correlations of u' and v' about {np} probe(s) and integral length scales along x and y (correlation.csv, scales.csv)"
        )
    } else {
        "correlations: off (needs [statistics] probes)".into()
    });
    let p = &rp.spectra;
    if !spectra_asked(p, np > 0, m.enabled) {
        out.push(if p.enabled == Some(false) {
            "spectra: off ([spectra] psd = false)".into()
        } else {
            "spectra: off (needs [statistics] probes or [modes] pod = true, and a time-resolved run)".into()
        });
        return out;
    }
    match spec::clock(times) {
        Ok(fs) => {
            let n = times.len();
            let nper = spec::segment_length(p, n).min(n);
            let nover = ((p.overlap * nper as f64).round() as usize).min(nper - 1);
            let k = (n - nper) / (nper - nover) + 1;
            let mut what = Vec::new();
            if np > 0 {
                what.push(format!("u and v at {np} probe(s)"));
            }
            if m.enabled {
                what.push(format!(
                    "POD coefficients a1..a{}",
                    p.modes.min(m.modes)
                ));
            }
            if what.is_empty() {
                out.push("spectra: [spectra] psd = true, but there is no series to take (needs [statistics] probes or [modes] pod = true)".into());
                return out;
            }
            out.push(format!(
                "spectra: Welch PSD of {} from {n} frames at {} Hz: {k} segments of {nper} samples overlapping by {nover}, resolution {} Hz (spectra.csv, spectral-peaks.csv)",
                what.join(" and "),
                num(fs, 4),
                num(fs / nper as f64, 4)
            ));
        }
        Err(why) => out.push(format!(
            "spectra: off: the run is not time-resolved ({why}); spectra need every frame's time_s in the frame table, evenly spaced"
        )),
    }
    out
}

/// Whether the spectra run, and the series (see `spectra::run`).
fn run_spectra(
    rp: &RunPlan,
    rr: &RunResult,
    acc: &RunAccumulator,
    pod: Option<&crate::modes::Pod>,
    warnings: &mut Vec<String>,
) -> Result<Option<spec::RunSpectra>> {
    let p = &rp.spectra;
    let probes = acc.probe_series();
    if !spectra_asked(p, !probes.is_empty(), pod.is_some()) {
        return Ok(None);
    }
    let times: Vec<Option<f64>> = rr.frames.iter().map(|f| f.meta.time_s).collect();
    let fs = match spec::clock(&times) {
        Ok(fs) => fs,
        Err(why) => {
            if p.enabled == Some(true) {
                warnings.push(format!("no spectra: {why}"));
            }
            return Ok(None);
        }
    };
    // Position of each run-wide frame index on the clock.
    let pos = |index: u64| rr.frames.iter().position(|f| f.meta.index as u64 == index);
    let n = rr.frames.len();
    let mut series = Vec::new();
    for (k, (_, rows)) in probes.iter().enumerate() {
        for (c, name) in ["u", "v"].iter().enumerate() {
            let mut x = vec![f64::NAN; n];
            for (idx, vals) in rows.iter() {
                if let Some(i) = pos(*idx) {
                    x[i] = vals[c];
                }
            }
            series.push((format!("probe{k}_{name}"), "m/s".to_string(), x));
        }
    }
    if let Some(pod) = pod {
        for j in 0..p.modes.min(pod.energy.len()) {
            let mut x = vec![f64::NAN; n];
            for (f, &idx) in pod.frame_index.iter().enumerate() {
                if let Some(i) = pos(idx) {
                    x[i] = pod.coefficients[f][j];
                }
            }
            series.push((format!("a{}", j + 1), "m/s".to_string(), x));
        }
    }
    let mut out = spec::spectra(p, fs, rp.stats.coverage, series, warnings)?;
    if let Some(s) = out.as_mut() {
        s.scales = rr.conditions.scales();
        s.reference = crate::report::conditions::run_frequency(rr).map(|(f, src)| {
            use crate::report::conditions::FrequencySource;
            (
                f,
                match src {
                    FrequencySource::Given => "given",
                    FrequencySource::Estimated => "frame table",
                },
            )
        });
    }
    Ok(out)
}

/// Finishes the POD of a run and writes its tables (and the phase frame
/// table when asked) into `dir`.
pub(crate) fn write_pod(
    sketch: &ModeSketch,
    run: &RunPlan,
    frames: &[FrameRecord],
    grid: &Grid,
    dir: &Path,
) -> Result<RunPod> {
    let pod = modes::finish(sketch, run.stats.max_lag)?;
    let names = |i: u64| {
        frames
            .iter()
            .find(|f| f.meta.index as u64 == i)
            .map_or_else(|| i.to_string(), |f| f.meta.name.clone())
    };
    let mut warnings = Vec::new();
    let est = if run.modes.phase {
        let e = phase::estimate(&pod)?;
        if e.failed.is_empty() {
            phase::write_frame_table(&dir.join("phase-from-modes.csv"), &pod, &e, &names)?;
        } else {
            warnings.push(format!(
                "run '{}': modes 1 and 2 are not a pair, so no phase is estimated: {}",
                run.id,
                e.failed.join("; ")
            ));
        }
        Some(e)
    } else {
        None
    };
    modes::output::write_tables(dir, &pod, grid, &names, est.as_ref())?;
    Ok((pod, est, warnings))
}
