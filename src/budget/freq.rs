//! The frequency of a phase-resolved budget, and where it came from.
//!
//! Owns: the order of the sources and the words `curlew check` and the
//! report use for them. Does not own: reading the frame table (`io`) nor
//! the least-squares estimate from phases and times
//! (`report::conditions::estimate_frequency`, shared with the Strouhal
//! number of the report).
//!
//! Sources, first found wins:
//! 1. `[run.conditions] frequency` (given);
//! 2. a `frequency_hz` or `period_s` column of the frame table (the mean
//!    over its rows; the spread is reported);
//! 3. the frames' phases and times: the unwrapped phase fitted by least
//!    squares, f = (dφ/dt)/360° (common practice). It assumes more than two
//!    frames per period (each phase step below 180°); phase-locked
//!    acquisitions at a lower rate alias, so give the frequency then.
//!
//! When a frequency is given and the phases and times also give one that
//! differs by more than 1 %, `check` says so (either the conditions or the
//! frame table is wrong, or the sampling aliases).

use crate::io::FrameTable;

/// Where the budget's frequency came from.
#[derive(Debug, Clone, PartialEq)]
pub enum FreqSource {
    /// `[run.conditions] frequency`.
    Given,
    /// The frame table's `column` (mean over `rows`, largest relative
    /// deviation `spread`).
    Table {
        column: &'static str,
        rows: usize,
        spread: f64,
    },
    /// Fitted to the phases and times of `frames` frames.
    PhasesAndTimes { frames: usize },
}

/// The frequency (Hz) of a phase-resolved run and its source.
#[derive(Debug, Clone, PartialEq)]
pub struct Frequency {
    pub hz: f64,
    pub source: FreqSource,
}

impl Frequency {
    /// Plain words: "3.15 Hz, fitted to the phases and times of 100 frames".
    pub(crate) fn describe(&self) -> String {
        let what = match &self.source {
            FreqSource::Given => "given in [run.conditions]".to_string(),
            FreqSource::Table {
                column,
                rows,
                spread,
            } => format!(
                "the mean of the frame table's {column} column over {rows} rows (largest deviation {:.2} %)",
                100.0 * spread
            ),
            FreqSource::PhasesAndTimes { frames } => format!(
                "fitted to the phases and times of {frames} frames (assumes more than two frames per period)"
            ),
        };
        format!("{} Hz, {what}", crate::describe::tick(self.hz))
    }
}

/// The frequency of a run: `given`, else the frame table's column, else a
/// fit to the (time, phase) pairs `tp` of its frames. None when no source
/// gives one.
pub(crate) fn resolve(
    given: Option<f64>,
    table: Option<&FrameTable>,
    tp: &[(f64, f64)],
) -> Option<Frequency> {
    if let Some(hz) = given {
        return Some(Frequency {
            hz,
            source: FreqSource::Given,
        });
    }
    if let Some(f) = table.and_then(|t| t.frequency.as_ref()) {
        return Some(Frequency {
            hz: f.hz,
            source: FreqSource::Table {
                column: f.column,
                rows: f.rows,
                spread: f.spread,
            },
        });
    }
    fitted(tp)
}

/// The least-squares fit to `tp` (finite pairs only).
pub(crate) fn fitted(tp: &[(f64, f64)]) -> Option<Frequency> {
    let mut v: Vec<(f64, f64)> = tp
        .iter()
        .copied()
        .filter(|(t, p)| t.is_finite() && p.is_finite())
        .collect();
    let hz = crate::stats::frequency::estimate_frequency(&mut v)?;
    Some(Frequency {
        hz,
        source: FreqSource::PhasesAndTimes { frames: v.len() },
    })
}

/// A warning when a frequency that was not fitted disagrees with the fit
/// to the phases and times by more than 1 %.
pub(crate) fn disagreement(f: &Frequency, tp: &[(f64, f64)]) -> Option<String> {
    if matches!(f.source, FreqSource::PhasesAndTimes { .. }) {
        return None;
    }
    let e = fitted(tp)?;
    ((e.hz - f.hz).abs() > 0.01 * f.hz).then(|| {
        format!(
            "the phases and times of the frames give {} Hz, not {} Hz: check the frequency (or the sampling aliases)",
            crate::describe::tick(e.hz),
            crate::describe::tick(f.hz)
        )
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::io::TableFrequency;

    /// Frames at 15 Hz of a 3.15 Hz cycle (the demo's u015 run: phase step
    /// 75.6°, as its frame table holds).
    fn demo_tp() -> Vec<(f64, f64)> {
        (0..100)
            .map(|k| {
                let t = k as f64 / 15.0;
                (t, (360.0 * 3.15 * t) % 360.0)
            })
            .collect()
    }

    #[test]
    fn sources_in_order_given_table_fit() {
        let tp = demo_tp();
        let fit = resolve(None, None, &tp).unwrap();
        assert!((fit.hz - 3.15).abs() < 1e-9, "{fit:?}");
        assert_eq!(fit.source, FreqSource::PhasesAndTimes { frames: 100 });
        let table = FrameTable {
            rows: Vec::new(),
            frequency: Some(TableFrequency {
                column: "period_s",
                hz: 3.2,
                spread: 0.0,
                rows: 100,
            }),
        };
        let t = resolve(None, Some(&table), &tp).unwrap();
        assert_eq!(t.hz, 3.2);
        assert!(t.describe().contains("period_s column over 100 rows"));
        // 3.2 against the fitted 3.15: 1.6 % apart.
        assert!(disagreement(&t, &tp)
            .unwrap()
            .contains("give 3.15 Hz, not 3.2 Hz"));
        let g = resolve(Some(3.15), Some(&table), &tp).unwrap();
        assert_eq!(g.source, FreqSource::Given);
        assert_eq!(disagreement(&g, &tp), None);
        assert_eq!(resolve(None, None, &tp[..2]), None);
    }
}
