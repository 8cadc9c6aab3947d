//! The pipeline file: TOML → plain validated values → a resolved plan in SI.
//!
//! Owns: reading the pipeline file, rejecting unknown keys and wrong types
//! with the key and its line, resolving paths against the pipeline file's
//! folder, and resolving every section into the parameters the stages take.
//! Stages never see the TOML; they get `RunPlan`.
//!
//! Each section has its own file (`input`, `validation`, `derivatives`,
//! `statistics`, `report`) with its raw struct and its `resolve`.

pub mod bounds;
pub(crate) mod budget;
pub(crate) mod derivatives;
mod describe;
pub mod input;
mod locate;
pub(crate) mod modes;
pub(crate) mod report;
pub(crate) mod statistics;
pub(crate) mod validation;
pub(crate) mod vortices;

use std::path::{Path, PathBuf};

use serde::{Deserialize, Serialize};

use crate::error::{Error, Result};
pub(crate) use crate::io::resolve_path;
use crate::io::InputSpec;
use crate::stencil::smooth::Smoother;
use crate::{derive, fill, plot, stats, validate};

/// The pipeline file as written.
#[derive(Debug, Clone, Default, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct RawPipeline {
    /// `[campaign]`: name and description.
    pub campaign: RawCampaign,
    #[serde(default)]
    /// `[input]`: defaults of every run's input (`[run.input]` overrides).
    pub input: input::RawInput,
    /// Geometry masks of every run (`crate::mask`).
    pub mask: Option<crate::mask::RawMask>,
    #[serde(default)]
    /// `[validation]`: median test, limits, ensemble test.
    pub validation: validation::RawValidation,
    #[serde(default)]
    /// `[fill]`: how rejected and missing vectors are filled.
    pub fill: validation::RawFill,
    #[serde(default)]
    /// `[smoothing]`: the smoother applied before derivatives.
    pub smoothing: validation::RawSmoothing,
    #[serde(default)]
    /// `[derivatives]`: scheme and gradient quantities.
    pub derivatives: derivatives::RawDerivatives,
    #[serde(default)]
    /// `[uncertainty]`: velocity noise and neighbour correlation.
    pub uncertainty: derivatives::RawUncertainty,
    #[serde(default)]
    /// `[statistics]`: probes, coverage, systematic uncertainties.
    pub statistics: statistics::RawStatistics,
    #[serde(default)]
    /// `[phase]`: phase bins.
    pub phase: statistics::RawPhase,
    #[serde(default)]
    /// `[modes]`: POD and phase from the modes.
    pub modes: modes::RawModes,
    #[serde(default)]
    /// `[spectra]`: Welch spectra of time-resolved runs.
    pub spectra: modes::RawSpectra,
    #[serde(default)]
    /// `[output]`: frame fields and figures on or off.
    pub output: RawOutput,
    #[serde(default)]
    /// `[figures]`: figure options.
    pub figures: report::RawFigures,
    #[serde(default)]
    /// `[[compare]]`: comparisons between runs.
    pub compare: Vec<report::RawCompare>,
    #[serde(default)]
    /// `[[run]]`: one entry per run.
    pub run: Vec<RawRun>,
    /// The vorticity transport budget (off unless present).
    pub budget: Option<budget::RawBudget>,
    /// Vortex cores found, measured and tracked (off unless present).
    pub vortices: Option<vortices::RawVortices>,
}

#[derive(Debug, Clone, Default, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
/// The `[campaign]` section.
pub struct RawCampaign {
    /// `name`: names the default output folder `out/<name>`.
    pub name: String,
    /// Free text for the report.
    pub description: Option<String>,
}

#[derive(Debug, Clone, Default, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
/// The `[output]` section.
pub struct RawOutput {
    /// Also write every frame's filled field (costs one file per frame).
    pub frame_fields: Option<bool>,
    /// Write figures (default true).
    pub figures: Option<bool>,
}

#[derive(Debug, Clone, Default, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
/// One `[[run]]` entry as written.
pub struct RawRun {
    /// `id`: the run's name and output folder's name.
    pub id: String,
    /// `frames`: a glob of frame files, or one parquet long table.
    pub frames: String,
    /// `frame_table`: a CSV of `frame` with `time_s` and/or `phase_deg`.
    pub frame_table: Option<String>,
    /// `[run.input]`: overrides of `[input]` for this run.
    pub input: Option<input::RawInput>,
    /// This run's masks, added to the campaign's (`crate::mask`).
    pub mask: Option<crate::mask::RawMask>,
    /// `[run.conditions]`: velocity, length, viscosity, frequency and free keys.
    pub conditions: Option<report::RawConditions>,
    /// Free text for the report.
    pub description: Option<String>,
}

/// What a section's resolution may depend on, for one run.
#[derive(Debug, Clone)]
pub(crate) struct ResolveCtx {
    /// (m/s) per unit of the input velocity.
    pub velocity_scale: f64,
    /// (m/s) per pixel of displacement, when the calibration is known.
    pub px_velocity: Option<f64>,
    /// Metres per unit of the input coordinates.
    pub length_scale: f64,
}

/// Everything one run needs, resolved.
#[derive(Debug, Clone)]
pub struct RunPlan {
    /// The run's id.
    pub id: String,
    /// The frames pattern, made absolute.
    pub frames: String,
    /// The frame table, made absolute; `None` when not given.
    pub frame_table: Option<PathBuf>,
    /// How to read the frames (format, columns, units).
    pub input: InputSpec,
    /// Calibration, (m/s) per pixel of displacement; `None` when unknown.
    pub px_velocity: Option<f64>,
    /// Resolved `[validation]`.
    pub validation: validate::Params,
    /// Resolved `[fill]`.
    pub fill: fill::Params,
    /// Resolved `[derivatives]`, `[smoothing]` and `[uncertainty]`.
    pub derive: derive::Params,
    /// Resolved `[statistics]` and `[phase]`.
    pub stats: stats::Params,
    /// Resolved `[figures]`.
    pub plot: plot::Params,
    /// `[modes]`: POD and phase from the flow.
    pub modes: crate::modes::Params,
    /// `[spectra]`: Welch spectra of time-resolved runs.
    pub spectra: crate::spectra::run::Params,
    /// Resolved `[run.conditions]`.
    pub conditions: report::Conditions,
    /// The run's `description`, if given.
    pub description: Option<String>,
    /// The vorticity transport budget, when asked for.
    pub budget: Option<crate::budget::Params>,
    /// The vortex analysis, when asked for.
    pub vortices: Option<crate::vortex::Params>,
    /// Warnings about the run's input found while resolving (e.g. pixel
    /// positions with no stated y direction); `run` records them.
    pub input_warnings: Vec<String>,
    /// The geometry mask (may be empty).
    pub mask: crate::mask::MaskSpec,
}

/// The resolved pipeline.
#[derive(Debug, Clone)]
pub struct Plan {
    /// The pipeline file.
    pub path: PathBuf,
    /// The pipeline file's folder, against which relative paths are taken.
    pub base_dir: PathBuf,
    /// `[campaign] name`.
    pub campaign: String,
    /// `[campaign] description`, if given.
    pub description: Option<String>,
    /// The runs, in pipeline order.
    pub runs: Vec<RunPlan>,
    /// `[output] frame_fields` (default false).
    pub frame_fields: bool,
    /// `[output] figures` (default true).
    pub figures: bool,
    /// The resolved `[[compare]]` entries.
    pub compare: Vec<report::ComparePlan>,
    /// The pipeline as read, for the manifest.
    pub raw: RawPipeline,
    /// The pipeline file's text, for the manifest.
    pub text: String,
}

impl Plan {
    /// Reads and resolves a pipeline file.
    /// A missing, unreadable or non-UTF-8 file is a usage error (exit 2):
    /// the command line names a pipeline that is not one.
    pub fn load(path: &Path) -> Result<Plan> {
        let bytes = std::fs::read(path).map_err(|e| {
            Error::usage(format!(
                "cannot read the pipeline file: {}",
                e.to_string().to_lowercase()
            ))
            .with_path(path)
        })?;
        let text = String::from_utf8(bytes).map_err(|e| {
            let at = e.utf8_error().valid_up_to();
            let line = e.as_bytes()[..at].iter().filter(|&&b| b == b'\n').count() + 1;
            Error::usage("the pipeline file is not UTF-8 text (TOML must be UTF-8)")
                .with_path(path)
                .with_line(line)
        })?;
        Plan::from_str(&text, path)
    }

    /// `e` with this pipeline's path and, when the message names a key
    /// (`[section] key`), the line it is written on.
    pub fn pipeline_error(&self, e: Error) -> Error {
        with_place(e, &self.text, &self.path)
    }

    /// Resolves pipeline text as if read from `path`.
    pub fn from_str(text: &str, path: &Path) -> Result<Plan> {
        let raw: RawPipeline = toml::from_str(text).map_err(|e| toml_error(text, path, e))?;
        let base_dir = path
            .parent()
            .map(|p| {
                if p.as_os_str().is_empty() {
                    Path::new(".")
                } else {
                    p
                }
            })
            .unwrap_or(Path::new("."))
            .to_path_buf();
        Plan::resolve(raw, text.to_string(), path, &base_dir).map_err(|e| with_place(e, text, path))
    }

    /// Checks the pipeline as read and resolves every run into a plan.
    fn resolve(raw: RawPipeline, text: String, path: &Path, base_dir: &Path) -> Result<Plan> {
        bounds::check_raw(&raw)?;
        if raw.campaign.name.trim().is_empty() {
            return Err(Error::usage("[campaign] name must not be empty"));
        }
        if raw.run.is_empty() {
            return Err(Error::usage(
                "the pipeline has no [[run]]; add at least one with id and frames",
            ));
        }
        let mut runs: Vec<RunPlan> = Vec::with_capacity(raw.run.len());
        for r in &raw.run {
            check_run_id(&r.id)?;
            if runs.iter().any(|p| p.id == r.id) {
                return Err(Error::usage(format!(
                    "[[run]] id = '{}' appears twice",
                    r.id
                )));
            }
            runs.push(resolve_run(&raw, r, base_dir)?);
        }
        Ok(Plan {
            path: path.to_path_buf(),
            base_dir: base_dir.to_path_buf(),
            campaign: raw.campaign.name.clone(),
            description: raw.campaign.description.clone(),
            frame_fields: raw.output.frame_fields.unwrap_or(false),
            figures: raw.output.figures.unwrap_or(true),
            compare: report::resolve_compare(
                &raw.compare,
                &runs.iter().map(|r| r.id.clone()).collect::<Vec<_>>(),
            )?,
            runs,
            raw,
            text,
        })
    }

    /// The runs named in `ids` (all when empty); error naming an unknown id.
    pub(crate) fn select_runs(&self, ids: &[String]) -> Result<Vec<&RunPlan>> {
        if ids.is_empty() {
            return Ok(self.runs.iter().collect());
        }
        if let Some((k, id)) = ids
            .iter()
            .enumerate()
            .find(|(k, id)| ids[..*k].contains(*id))
        {
            return Err(Error::usage(format!(
                "--runs names '{id}' twice (item {}); each run is reduced once",
                k + 1
            )));
        }
        ids.iter()
            .map(|id| {
                self.runs.iter().find(|r| &r.id == id).ok_or_else(|| {
                    let known: Vec<&str> = self.runs.iter().map(|r| r.id.as_str()).collect();
                    Error::usage(format!(
                        "--runs names '{id}', which is not a run of the pipeline ({})",
                        known.join(", ")
                    ))
                })
            })
            .collect()
    }
}

/// Resolves one `[[run]]`: its input (units settled by the first frame's
/// header when the pipeline leaves them open) and every section.
fn resolve_run(raw: &RawPipeline, r: &RawRun, base_dir: &Path) -> Result<RunPlan> {
    let what = format!("run '{}'", r.id);
    let (raw_input, spec) = resolve_input(raw, r, base_dir, &what)?;
    let ctx = ResolveCtx {
        velocity_scale: spec.velocity_scale,
        px_velocity: raw_input.px_velocity(),
        length_scale: spec.length_scale,
    };
    let smoother: Smoother = validation::resolve_smoothing(&raw.smoothing, &ctx)?;
    let stats = statistics::resolve_stats(&raw.statistics, &raw.phase, &ctx)?;
    let vortices = vortices::resolve_vortices(raw.vortices.as_ref(), stats.coverage)?;
    Ok(RunPlan {
        id: r.id.clone(),
        frames: resolve_path(base_dir, &r.frames)
            .to_string_lossy()
            .into_owned(),
        frame_table: r.frame_table.as_ref().map(|t| resolve_path(base_dir, t)),
        px_velocity: ctx.px_velocity,
        validation: validation::resolve_validation(&raw.validation, &ctx)?,
        fill: validation::resolve_fill(&raw.fill, &ctx)?,
        derive: derivatives::resolve_derive(&raw.derivatives, &raw.uncertainty, smoother, &ctx)?,
        stats,
        plot: report::resolve_figures(&raw.figures, &ctx)?,
        modes: modes::resolve_modes(&raw.modes)?,
        spectra: modes::resolve_spectra(&raw.spectra)?,
        conditions: report::resolve_conditions(&r.conditions.clone().unwrap_or_default(), &ctx)?,
        description: r.description.clone(),
        input_warnings: raw_input.orientation_warning(&what).into_iter().collect(),
        mask: crate::mask::MaskSpec::resolve(
            raw.mask.as_ref(),
            r.mask.as_ref(),
            spec.length_scale,
            spec.orientation,
            base_dir,
            &what,
        )?,
        input: spec,
        budget: budget::resolve_budget(raw.budget.as_ref())?,
        vortices,
    })
}

/// The run's input, as written and resolved; units the pipeline leaves
/// open are settled by the first frame's header.
fn resolve_input(
    raw: &RawPipeline,
    r: &RawRun,
    base_dir: &Path,
    what: &str,
) -> Result<(input::RawInput, InputSpec)> {
    let mut raw_input = match &r.input {
        Some(o) => raw.input.overridden_by(o),
        None => raw.input.clone(),
    };
    let mut spec = raw_input.resolve(what)?;
    // units the pipeline leaves open, settled by the first frame's
    // header (`io::units`); every key in the input's units follows
    let frames_abs = resolve_path(base_dir, &r.frames);
    if let Some(st) = crate::io::units::settle(&spec, &frames_abs.to_string_lossy()) {
        if let Some(l) = &st.length {
            raw_input.length_unit = Some(l.unit.to_string());
        }
        if let Some(v) = &st.velocity {
            raw_input.velocity_unit = Some(v.unit.to_string());
        }
        spec = raw_input.resolve(what)?;
        spec.units_from_header = Some(st);
    }
    Ok((raw_input, spec))
}

/// Names at the top of an output folder that a run's folder must not take.
const RESERVED: [&str; 5] = [
    "campaign.csv",
    "manifest.json",
    "index.html",
    "compare",
    "partial.json",
];

/// A run id becomes a folder name of the outputs: letters, digits, `-`,
/// `_` and `.`, not starting with `.`, at most 64 characters, not a name
/// the outputs already use.
fn check_run_id(id: &str) -> Result<()> {
    let shown = crate::io::clip_text(id);
    let plain = id
        .chars()
        .all(|c| c.is_ascii_alphanumeric() || matches!(c, '-' | '_' | '.'));
    if id.is_empty() || !plain || id.starts_with('.') || id.chars().count() > 64 {
        return Err(Error::usage(format!(
            "[[run]] id = '{shown}' must be a plain folder name: 1 to 64 letters, digits, \
             '-', '_' or '.', not starting with '.'"
        )));
    }
    if RESERVED.iter().any(|r| r.eq_ignore_ascii_case(id)) {
        return Err(Error::usage(format!(
            "[[run]] id = '{id}' is the name of a campaign output ({}); choose another",
            RESERVED.join(", ")
        )));
    }
    Ok(())
}

/// `e` with `path` and, when found, the line of the key its message names.
fn with_place(e: Error, text: &str, path: &Path) -> Error {
    let line = if e.path.is_none() && e.line.is_none() {
        locate::line_of(text, &e.message)
    } else {
        None
    };
    let e = e.with_path(path);
    match line {
        Some(l) => e.with_line(l),
        None => e,
    }
}

/// A TOML error as a usage error naming the line of the offending key.
fn toml_error(text: &str, path: &Path, e: toml::de::Error) -> Error {
    let line = e
        .span()
        .map(|s| text[..s.start.min(text.len())].matches('\n').count() + 1);
    // toml's message starts with its own location block; keep the plain sentence.
    let msg = e.message().trim().to_string();
    let mut err = Error::usage(msg).with_path(path);
    if let Some(l) = line {
        err = err.with_line(l);
    }
    err
}

#[cfg(test)]
mod tests {
    use super::*;

    const MIN: &str = r#"
[campaign]
name = "t"

[[run]]
id = "a"
frames = "data/*.csv"
"#;

    #[test]
    fn relative_paths_resolve_against_the_pipeline_folder() {
        let p = Plan::from_str(MIN, Path::new("/lab/pipelines/x.toml")).unwrap();
        assert_eq!(p.runs[0].frames, "/lab/pipelines/data/*.csv");
    }

    #[test]
    fn unknown_key_is_a_usage_error_naming_key_and_line() {
        let text = format!("{MIN}\n[input]\nformatt = \"csv\"\n");
        let e = Plan::from_str(&text, Path::new("p.toml")).unwrap_err();
        assert_eq!(e.exit_code(), 2);
        assert!(e.message.contains("formatt"), "{e}");
        assert_eq!(e.line, Some(10), "{e}");
        assert!(e.to_string().starts_with("p.toml:10"), "{e}");
    }

    #[test]
    fn wrong_type_is_a_usage_error() {
        let text = MIN.replace("name = \"t\"", "name = 3");
        let e = Plan::from_str(&text, Path::new("p.toml")).unwrap_err();
        assert_eq!(e.exit_code(), 2);
        assert_eq!(e.line, Some(3), "{e}");
    }
}
