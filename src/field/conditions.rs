//! A run's flow conditions (SI), as `[run.conditions]` resolves them
//! (`plan::report`): the given velocity, length, viscosity and frequency,
//! free keys, and the Reynolds and Strouhal numbers they make.

use serde::Serialize;

/// A free condition value: a number (goes into campaign.csv) or text.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub enum Extra {
    Number(f64),
    Text(String),
}

/// A run's resolved flow conditions (SI).
#[derive(Debug, Clone, Default, PartialEq, Serialize)]
pub struct Conditions {
    pub velocity: Option<f64>,
    pub length: Option<f64>,
    pub viscosity: Option<f64>,
    pub frequency: Option<f64>,
    pub extra: Vec<(String, Extra)>,
}

impl Conditions {
    /// Reynolds number Re = U L / ν (common practice), when all three are
    /// given.
    pub fn reynolds(&self) -> Option<f64> {
        Some(self.velocity? * self.length? / self.viscosity?)
    }
    /// Strouhal number St = f L / U (common practice) for a frequency `f`
    /// in Hz.
    pub fn strouhal(&self, f: f64) -> Option<f64> {
        Some(f * self.length? / self.velocity?)
    }
    /// (U, L) when both are given: the scales of nondimensional figures.
    pub fn scales(&self) -> Option<(f64, f64)> {
        Some((self.velocity?, self.length?))
    }
}
