//! The pipeline file: TOML → plain validated values → a resolved plan in SI.
//!
//! Owns: reading the pipeline file, rejecting unknown keys and wrong types
//! with the key and its line, resolving paths against the pipeline file's
//! folder, and resolving every section into the parameters the stages take.
//! Stages never see the TOML; they get `RunPlan`.
//!
//! Each section has its own file (`input`, `validation`, `derivatives`,
//! `statistics`, `report`) with its raw struct and its `resolve`.

pub mod derivatives;
pub mod input;
pub mod modes;
pub mod report;
pub mod statistics;
pub mod validation;

use std::path::{Path, PathBuf};

use serde::{Deserialize, Serialize};

use crate::error::{Error, Result, WithPath};
use crate::io::InputSpec;
use crate::stencil::smooth::Smoother;
use crate::{derive, fill, plot, stats, validate};

/// The pipeline file as written.
#[derive(Debug, Clone, Default, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct RawPipeline {
    pub campaign: RawCampaign,
    #[serde(default)]
    pub input: input::RawInput,
    #[serde(default)]
    pub validation: validation::RawValidation,
    #[serde(default)]
    pub fill: validation::RawFill,
    #[serde(default)]
    pub smoothing: validation::RawSmoothing,
    #[serde(default)]
    pub derivatives: derivatives::RawDerivatives,
    #[serde(default)]
    pub uncertainty: derivatives::RawUncertainty,
    #[serde(default)]
    pub statistics: statistics::RawStatistics,
    #[serde(default)]
    pub phase: statistics::RawPhase,
    #[serde(default)]
    pub modes: modes::RawModes,
    #[serde(default)]
    pub output: RawOutput,
    #[serde(default)]
    pub figures: report::RawFigures,
    #[serde(default)]
    pub compare: Vec<report::RawCompare>,
    #[serde(default)]
    pub run: Vec<RawRun>,
}

#[derive(Debug, Clone, Default, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct RawCampaign {
    pub name: String,
    /// Free text for the report.
    pub description: Option<String>,
}

#[derive(Debug, Clone, Default, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct RawOutput {
    /// Also write every frame's filled field (costs one file per frame).
    pub frame_fields: Option<bool>,
    /// Write figures (default true).
    pub figures: Option<bool>,
}

#[derive(Debug, Clone, Default, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct RawRun {
    pub id: String,
    pub frames: String,
    pub frame_table: Option<String>,
    pub input: Option<input::RawInput>,
    pub conditions: Option<report::RawConditions>,
    /// Free text for the report.
    pub description: Option<String>,
}

/// What a section's resolution may depend on, for one run.
#[derive(Debug, Clone)]
pub struct ResolveCtx {
    /// The folder of the pipeline file (relative paths resolve against it).
    pub base_dir: PathBuf,
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
    pub id: String,
    /// The frames pattern, made absolute.
    pub frames: String,
    pub frame_table: Option<PathBuf>,
    pub input: InputSpec,
    pub px_velocity: Option<f64>,
    pub validation: validate::Params,
    pub fill: fill::Params,
    pub derive: derive::Params,
    pub stats: stats::Params,
    pub plot: plot::Params,
    /// `[modes]`: POD and phase from the flow.
    pub modes: crate::modes::Params,
    pub conditions: report::Conditions,
    pub description: Option<String>,
}

/// The resolved pipeline.
#[derive(Debug, Clone)]
pub struct Plan {
    pub path: PathBuf,
    pub base_dir: PathBuf,
    pub campaign: String,
    pub description: Option<String>,
    pub runs: Vec<RunPlan>,
    pub frame_fields: bool,
    pub figures: bool,
    pub compare: Vec<report::ComparePlan>,
    /// The pipeline as read, for the manifest.
    pub raw: RawPipeline,
    pub text: String,
}

impl Plan {
    /// Reads and resolves a pipeline file.
    pub fn load(path: &Path) -> Result<Plan> {
        let text = std::fs::read_to_string(path).with_path(path)?;
        Plan::from_str(&text, path)
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
        Plan::resolve(raw, text.to_string(), path, &base_dir).with_path(path)
    }

    fn resolve(raw: RawPipeline, text: String, path: &Path, base_dir: &Path) -> Result<Plan> {
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
            if r.id.is_empty() || r.id.contains(['/', '\\']) || r.id.starts_with('.') {
                return Err(Error::usage(format!(
                    "[[run]] id = '{}' must be a plain folder name (no slashes, not starting with '.')",
                    r.id
                )));
            }
            if runs.iter().any(|p| p.id == r.id) {
                return Err(Error::usage(format!(
                    "[[run]] id = '{}' appears twice",
                    r.id
                )));
            }
            let what = format!("run '{}'", r.id);
            let raw_input = match &r.input {
                Some(o) => raw.input.overridden_by(o),
                None => raw.input.clone(),
            };
            let spec = raw_input.resolve(&what)?;
            let ctx = ResolveCtx {
                base_dir: base_dir.to_path_buf(),
                velocity_scale: spec.velocity_scale,
                px_velocity: raw_input.px_velocity(),
                length_scale: spec.length_scale,
            };
            let smoother: Smoother = validation::resolve_smoothing(&raw.smoothing, &ctx)?;
            runs.push(RunPlan {
                id: r.id.clone(),
                frames: resolve_path(base_dir, &r.frames)
                    .to_string_lossy()
                    .into_owned(),
                frame_table: r.frame_table.as_ref().map(|t| resolve_path(base_dir, t)),
                px_velocity: ctx.px_velocity,
                validation: validation::resolve_validation(&raw.validation, &ctx)?,
                fill: validation::resolve_fill(&raw.fill, &ctx)?,
                derive: derivatives::resolve_derive(
                    &raw.derivatives,
                    &raw.uncertainty,
                    smoother,
                    &ctx,
                )?,
                stats: statistics::resolve_stats(&raw.statistics, &raw.phase, &ctx)?,
                plot: report::resolve_figures(&raw.figures, &ctx)?,
                modes: modes::resolve_modes(&raw.modes)?,
                conditions: report::resolve_conditions(
                    &r.conditions.clone().unwrap_or_default(),
                    &ctx,
                )?,
                description: r.description.clone(),
                input: spec,
            });
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
    pub fn select_runs(&self, ids: &[String]) -> Result<Vec<&RunPlan>> {
        if ids.is_empty() {
            return Ok(self.runs.iter().collect());
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

/// `p` if absolute, else `base/p`.
pub fn resolve_path(base: &Path, p: &str) -> PathBuf {
    let pb = PathBuf::from(p);
    if pb.is_absolute() {
        pb
    } else {
        base.join(pb)
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
