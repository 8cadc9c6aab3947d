//! A run's flow conditions (SI), as `[run.conditions]` resolves them
//! (`plan::report`): the given velocity, length, viscosity and frequency,
//! free keys, and the Reynolds and Strouhal numbers they make.

use serde::Serialize;

/// A free condition value: a number (goes into campaign.csv) or text.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub enum Extra {
    /// A numeric value, written as a `campaign.csv` column of its key.
    Number(f64),
    /// A text (or boolean, as text) value, shown in the report only.
    Text(String),
}

/// A run's resolved flow conditions (SI).
#[derive(Debug, Clone, Default, PartialEq, Serialize)]
pub struct Conditions {
    /// Reference velocity U, m/s (`[run.conditions] velocity`); `None`:
    /// not given.
    pub velocity: Option<f64>,
    /// Reference length L, m (`[run.conditions] length`); `None`: not
    /// given.
    pub length: Option<f64>,
    /// Kinematic viscosity ν, m²/s (`[run.conditions] viscosity`);
    /// `None`: not given.
    pub viscosity: Option<f64>,
    /// The run's frequency f, Hz (`[run.conditions] frequency`); `None`:
    /// not given.
    pub frequency: Option<f64>,
    /// The free keys of `[run.conditions]` with their values, in file
    /// order.
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
