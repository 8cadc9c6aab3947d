//! `[figures]`, `[[compare]]` and a run's `[run.conditions]`: raw keys and
//! their resolution.
//!
//! Owns: the keys of those sections, their checks (errors name the key and
//! the offending value) and the resolved `plot::Params`, `Conditions` and
//! `ComparePlan`. All values are SI: velocities in m/s, lengths in m,
//! viscosity in m²/s, frequency in Hz, stations in m.
//!
//! A `[run.conditions]` table may hold free keys besides the known ones
//! (`velocity`, `length`, `viscosity`, `frequency`); numeric ones become
//! columns of `campaign.csv`, text ones appear in the report. A free key
//! that is one or two letters away from a known key is rejected as a
//! probable typo ("did you mean").

use std::collections::BTreeMap;

use serde::{Deserialize, Serialize};

use super::ResolveCtx;
use crate::error::{Error, Result};
use crate::plot;

pub use crate::field::conditions::{Conditions, Extra};

/// `[figures]` as written.
#[derive(Debug, Clone, Default, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct RawFigures {
    /// Axes in x/L, y/L and values in u/U, ωL/U (needs the run's
    /// `velocity` and `length` conditions).
    pub nondimensional: Option<bool>,
    /// Draw every n-th vector of the overlay (default: about 24 across).
    pub vector_every: Option<usize>,
    /// Width of the PNG in pixels (default 1000; 600 to 4000).
    pub width: Option<u32>,
    /// Symmetric colour limit of vorticity maps in 1/s (default: the 99th
    /// percentile of |ω|).
    pub vorticity_limit: Option<f64>,
}

/// A run's flow conditions as written (SI).
#[derive(Debug, Clone, Default, Deserialize, Serialize, PartialEq)]
pub struct RawConditions {
    /// Reference velocity U (m/s).
    pub velocity: Option<f64>,
    /// Reference length L (m).
    pub length: Option<f64>,
    /// Kinematic viscosity ν (m²/s).
    pub viscosity: Option<f64>,
    /// Frequency of the periodic flow f (Hz); when absent it is estimated
    /// from the frames' phases and times.
    pub frequency: Option<f64>,
    /// Anything else the lab records (temperature, angle of attack…).
    #[serde(flatten)]
    pub extra: BTreeMap<String, toml::Value>,
}

/// One `[[compare]]` entry as written.
#[derive(Debug, Clone, Default, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct RawCompare {
    /// Heading in the report (default: the run ids joined by " vs ").
    pub title: Option<String>,
    /// Run ids; the difference map uses the first two.
    pub runs: Vec<String>,
    /// Ensemble column of the difference map (default "omega_mean").
    pub quantity: Option<String>,
    /// Ensemble column of the profiles (default "u_mean").
    pub profile: Option<String>,
    /// Profiles along vertical lines at these x (m).
    pub at_x: Option<Vec<f64>>,
    /// Profiles along horizontal lines at these y (m).
    pub at_y: Option<Vec<f64>>,
    /// Coverage factor k of bands and of the significance test (default 2).
    pub coverage: Option<f64>,
    /// Strongest-vortex region: |ω| above this fraction of its peak
    /// (default 0.2).
    pub vortex_threshold: Option<f64>,
    /// Station of the wake deficit (m; default the last column of the grid).
    pub wake_x: Option<f64>,
}

/// A resolved comparison.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ComparePlan {
    pub title: String,
    /// A folder name for its outputs: `OUT/compare/<slug>/`.
    pub slug: String,
    pub runs: Vec<String>,
    pub quantity: String,
    pub profile: String,
    /// Stations (m). Both empty: three vertical lines at 25, 50 and 75 % of
    /// the first run's x range.
    pub at_x: Vec<f64>,
    pub at_y: Vec<f64>,
    pub coverage: f64,
    pub vortex_threshold: f64,
    pub wake_x: Option<f64>,
    /// True for the comparison curlew adds by itself (no `[[compare]]`).
    pub automatic: bool,
}

const KNOWN_CONDITIONS: [&str; 4] = ["velocity", "length", "viscosity", "frequency"];

pub(crate) fn resolve_conditions(c: &RawConditions, ctx: &ResolveCtx) -> Result<Conditions> {
    let _ = ctx;
    let positive = |name: &str, v: Option<f64>| -> Result<Option<f64>> {
        match v {
            Some(x) if !(x.is_finite() && x > 0.0) => Err(Error::usage(format!(
                "[run.conditions] {name} = {x} must be a positive number (SI units)"
            ))),
            other => Ok(other),
        }
    };
    let mut extra = Vec::new();
    for (k, v) in &c.extra {
        if let Some(near) = KNOWN_CONDITIONS.iter().find(|n| edit_distance(k, n) <= 2) {
            return Err(Error::usage(format!(
                "[run.conditions] key '{k}' looks like a misspelling of '{near}'; \
                 rename it (free keys must not be this close to a known one)"
            )));
        }
        let e = match v {
            toml::Value::Integer(i) => Extra::Number(*i as f64),
            toml::Value::Float(f) => Extra::Number(*f),
            toml::Value::String(s) => Extra::Text(s.clone()),
            toml::Value::Boolean(b) => Extra::Text(b.to_string()),
            other => {
                return Err(Error::usage(format!(
                    "[run.conditions] {k} = {other} must be a number or a string"
                )))
            }
        };
        extra.push((k.clone(), e));
    }
    Ok(Conditions {
        velocity: positive("velocity", c.velocity)?,
        length: positive("length", c.length)?,
        viscosity: positive("viscosity", c.viscosity)?,
        frequency: positive("frequency", c.frequency)?,
        extra,
    })
}

/// Levenshtein distance (insertions, deletions, substitutions), for typo hints.
fn edit_distance(a: &str, b: &str) -> usize {
    let b: Vec<char> = b.chars().collect();
    let mut prev: Vec<usize> = (0..=b.len()).collect();
    for (i, ca) in a.chars().enumerate() {
        let mut cur = vec![i + 1];
        for (j, cb) in b.iter().enumerate() {
            let sub = prev[j] + usize::from(ca != *cb);
            cur.push(sub.min(prev[j + 1] + 1).min(cur[j] + 1));
        }
        prev = cur;
    }
    prev[b.len()]
}

/// A folder-safe name: lower-case letters, digits and '-'.
fn slugify(s: &str) -> String {
    let mut out = String::new();
    for ch in s.chars() {
        if ch.is_ascii_alphanumeric() {
            out.push(ch.to_ascii_lowercase());
        } else if !out.ends_with('-') && !out.is_empty() {
            out.push('-');
        }
    }
    let t = out.trim_end_matches('-').to_string();
    if t.is_empty() {
        "comparison".into()
    } else {
        t
    }
}

/// Resolves `[[compare]]`; `run_ids` are the pipeline's runs, in order.
///
/// Without any `[[compare]]` and with at least two runs, one automatic
/// comparison of the first two runs is planned (vorticity difference,
/// streamwise-velocity profiles at three stations, k = 2).
pub(crate) fn resolve_compare(c: &[RawCompare], run_ids: &[String]) -> Result<Vec<ComparePlan>> {
    if c.is_empty() {
        if run_ids.len() < 2 {
            return Ok(Vec::new());
        }
        let raw = RawCompare {
            runs: run_ids[..2].to_vec(),
            ..Default::default()
        };
        let mut p = resolve_one(&raw, run_ids, 0)?;
        p.automatic = true;
        return Ok(vec![p]);
    }
    let mut plans: Vec<ComparePlan> = Vec::new();
    for (n, raw) in c.iter().enumerate() {
        let mut p = resolve_one(raw, run_ids, n)?;
        let base = p.slug.clone();
        let mut k = 2;
        while plans.iter().any(|q| q.slug == p.slug) {
            p.slug = format!("{base}-{k}");
            k += 1;
        }
        plans.push(p);
    }
    Ok(plans)
}

fn resolve_one(raw: &RawCompare, run_ids: &[String], n: usize) -> Result<ComparePlan> {
    let at = format!("[[compare]] number {}", n + 1);
    if raw.runs.len() < 2 {
        return Err(Error::usage(format!(
            "{at}: runs = {:?} must name at least two runs",
            raw.runs
        )));
    }
    for r in &raw.runs {
        if !run_ids.contains(r) {
            return Err(Error::usage(format!(
                "{at}: runs names '{r}', which is not a run of the pipeline ({})",
                run_ids.join(", ")
            )));
        }
    }
    let coverage = raw.coverage.unwrap_or(2.0);
    if !(coverage.is_finite() && coverage > 0.0) {
        return Err(Error::usage(format!(
            "{at}: coverage = {coverage} must be a positive number"
        )));
    }
    let thr = raw.vortex_threshold.unwrap_or(0.2);
    if !(thr > 0.0 && thr < 1.0) {
        return Err(Error::usage(format!(
            "{at}: vortex_threshold = {thr} must lie strictly between 0 and 1"
        )));
    }
    for (key, vals) in [("at_x", &raw.at_x), ("at_y", &raw.at_y)] {
        if let Some(v) = vals
            .as_ref()
            .and_then(|v| v.iter().find(|x| !x.is_finite()))
        {
            return Err(Error::usage(format!("{at}: {key} holds {v}, not a number")));
        }
    }
    let title = raw.title.clone().unwrap_or_else(|| raw.runs.join(" vs "));
    Ok(ComparePlan {
        slug: slugify(&title),
        title,
        runs: raw.runs.clone(),
        quantity: raw.quantity.clone().unwrap_or_else(|| "omega_mean".into()),
        profile: raw.profile.clone().unwrap_or_else(|| "u_mean".into()),
        at_x: raw.at_x.clone().unwrap_or_default(),
        at_y: raw.at_y.clone().unwrap_or_default(),
        coverage,
        vortex_threshold: thr,
        wake_x: raw.wake_x,
        automatic: false,
    })
}

pub(crate) fn resolve_figures(f: &RawFigures, ctx: &ResolveCtx) -> Result<plot::Params> {
    let _ = ctx;
    let mut p = plot::Params::default();
    if let Some(n) = f.nondimensional {
        p.nondimensional = n;
    }
    if let Some(e) = f.vector_every {
        if e == 0 {
            return Err(Error::usage(
                "[figures] vector_every = 0 must be at least 1",
            ));
        }
        p.vector_every = Some(e);
    }
    if let Some(w) = f.width {
        if !(600..=4000).contains(&w) {
            return Err(Error::usage(format!(
                "[figures] width = {w} must lie between 600 and 4000 pixels"
            )));
        }
        p.width = w;
    }
    if let Some(l) = f.vorticity_limit {
        if !(l.is_finite() && l > 0.0) {
            return Err(Error::usage(format!(
                "[figures] vorticity_limit = {l} must be a positive number in 1/s"
            )));
        }
        p.vorticity_limit = Some(l);
    }
    Ok(p)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn ctx() -> ResolveCtx {
        ResolveCtx {
            velocity_scale: 1.0,
            px_velocity: None,
            length_scale: 1.0,
        }
    }

    #[test]
    fn conditions_keep_free_keys_and_reject_near_misses() {
        let raw: RawConditions = toml::from_str(
            "velocity = 0.5\nlength = 0.02\nviscosity = 1e-6\ntemperature_c = 21\nfluid = \"water\"",
        )
        .unwrap();
        let c = resolve_conditions(&raw, &ctx()).unwrap();
        assert_eq!(c.velocity, Some(0.5));
        // Re = 0.5 * 0.02 / 1e-6 = 10000 (hand-computed).
        crate::testutil::assert_close(c.reynolds().unwrap(), 1.0e4, 0.0, 1e-12, "Re");
        // St = 2 Hz * 0.02 m / 0.5 m/s = 0.08 (hand-computed).
        crate::testutil::assert_close(c.strouhal(2.0).unwrap(), 0.08, 0.0, 1e-12, "St");
        assert_eq!(c.extra.len(), 2);
        assert!(c
            .extra
            .contains(&("temperature_c".into(), Extra::Number(21.0))));
        let typo: RawConditions = toml::from_str("viscocity = 1e-6").unwrap();
        let e = resolve_conditions(&typo, &ctx()).unwrap_err();
        assert!(e.message.contains("viscosity"), "{e}");
        let neg: RawConditions = toml::from_str("length = -1.0").unwrap();
        assert!(resolve_conditions(&neg, &ctx()).is_err());
    }

    #[test]
    fn compare_defaults_and_errors() {
        let ids = vec!["a".to_string(), "b".to_string(), "c".to_string()];
        let auto = resolve_compare(&[], &ids).unwrap();
        assert_eq!(auto.len(), 1);
        assert!(auto[0].automatic);
        assert_eq!(auto[0].runs, vec!["a", "b"]);
        assert_eq!(auto[0].slug, "a-vs-b");
        assert!(resolve_compare(&[], &ids[..1]).unwrap().is_empty());
        let bad = RawCompare {
            runs: vec!["a".into(), "zz".into()],
            ..Default::default()
        };
        let e = resolve_compare(&[bad], &ids).unwrap_err();
        assert!(e.message.contains("'zz'"), "{e}");
        let two = RawCompare {
            runs: vec!["a".into(), "c".into()],
            ..Default::default()
        };
        let p = resolve_compare(&[two.clone(), two], &ids).unwrap();
        assert_eq!(p[1].slug, "a-vs-c-2");
    }

    #[test]
    fn figures_keys_resolve_and_check() {
        let f = RawFigures {
            nondimensional: Some(true),
            width: Some(1200),
            ..Default::default()
        };
        let p = resolve_figures(&f, &ctx()).unwrap();
        assert!(p.nondimensional);
        assert_eq!(p.width, 1200);
        let f = RawFigures {
            width: Some(100),
            ..Default::default()
        };
        assert!(resolve_figures(&f, &ctx()).is_err());
    }
}
