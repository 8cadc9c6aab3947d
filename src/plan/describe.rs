//! A run's resolved plan for people and for the manifest: the stages in
//! plain words (`RunPlan::describe_stages`, printed by `curlew check` and
//! kept in the manifest) and as typed JSON objects in SI
//! (`RunPlan::resolved_json`, the manifest's `resolved`). Each stage's own
//! `describe` and `Serialize` live beside its `Params`; this file only
//! gathers them in the order a frame meets the stages.

use super::RunPlan;
use crate::error::{Error, Result};

impl RunPlan {
    /// One `(stage, text)` per line, in the order a frame meets the stages;
    /// the validation chain takes a line per step, later steps starting
    /// with "then".
    pub fn describe_stages(&self) -> Vec<(&'static str, String)> {
        let mut out: Vec<(&'static str, String)> = self
            .validation
            .describe_steps(self.px_velocity)
            .into_iter()
            .enumerate()
            .map(|(i, s)| ("validation", if i == 0 { s } else { format!("then {s}") }))
            .collect();
        out.push(("fill", self.fill.describe()));
        out.push(("smoothing", self.derive.smoother.describe()));
        out.push(("derivatives", self.derive.describe()));
        out.push(("quantities", self.derive.describe_quantities()));
        out.push(("statistics", self.stats.describe()));
        out
    }

    /// `describe_stages` as one JSON object, a stage's lines joined by ", ".
    pub(crate) fn describe_json(&self) -> serde_json::Value {
        let mut m = serde_json::Map::new();
        for (stage, text) in self.describe_stages() {
            match m.get_mut(stage) {
                Some(serde_json::Value::String(s)) => {
                    s.push_str(", ");
                    s.push_str(&text);
                }
                _ => {
                    m.insert(stage.into(), text.into());
                }
            }
        }
        serde_json::Value::Object(m)
    }

    /// The resolved stage parameters as typed JSON objects, every value in
    /// SI (m, s, m/s; fractions as fractions): the manifest's `resolved`.
    /// Non-finite numbers become `null`.
    pub(crate) fn resolved_json(&self) -> Result<serde_json::Value> {
        fn v<T: serde::Serialize>(key: &str, x: &T) -> Result<serde_json::Value> {
            serde_json::to_value(x)
                .map_err(|e| Error::data(format!("manifest: resolved {key}: {e}")))
        }
        Ok(serde_json::json!({
            "input": v("input", &self.input)?,
            "calibration_m_s_per_px": self.px_velocity,
            "validation": v("validation", &self.validation)?,
            "fill": v("fill", &self.fill)?,
            "derive": v("derive", &self.derive)?,
            "stats": v("stats", &self.stats)?,
            "modes": v("modes", &self.modes)?,
            "spectra": v("spectra", &self.spectra)?,
            "budget": v("budget", &self.budget)?,
            "vortices": v("vortices", &self.vortices)?,
        }))
    }
}
