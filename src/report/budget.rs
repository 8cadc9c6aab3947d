//! The report's budget section: the reading of the vorticity transport
//! budget in plain words (`budget::reading`), its terms' sizes, and where
//! the frequency came from.
//!
//! Owns: words and layout only; every number comes from the `Reading`,
//! which counts exactly the rows of `budget.csv`.

use std::fmt::Write;

use super::html::{esc, num, table, url};
use crate::budget::reading::{frac, pct};
use crate::budget::TERMS;
use crate::result::RunResult;

/// Appends the section when the run has a budget.
pub(super) fn section(out: &mut String, r: &RunResult) {
    let Some(b) = &r.budget else { return };
    out.push_str("<h3>Vorticity budget</h3>\n");
    if let Some(f) = &b.frequency {
        let _ = writeln!(
            out,
            "<p class=\"note\">Phase bins at {}.</p>",
            esc(&f.describe())
        );
    }
    let Some(rd) = &b.reading else { return };
    out.push_str("<p>");
    for s in rd.sentences() {
        let _ = write!(out, "{} ", esc(&s));
    }
    out.push_str("</p>\n");
    if rd.nodes > 0 {
        let rows: Vec<Vec<String>> = TERMS
            .iter()
            .enumerate()
            .map(|(t, name)| {
                vec![
                    esc(name),
                    num(rd.mean_abs[t], 3),
                    num(rd.core_mean_abs[t], 3),
                ]
            })
            .collect();
        table(
            out,
            &["term", "mean |term| (1/s²)", "in vortex cores (1/s²)"],
            &rows,
        );
        let _ = writeln!(
            out,
            "<p class=\"note\">Closure: {} of {} slice-nodes; in cores {} of {}. \
             A significant residual says the plane misses something (tilting, out-of-plane advection), \
             the grid under-resolves the cores, or the phase steps are too coarse; see docs/budget.md. \
             Table: <a href=\"{}/budget.csv\">budget.csv</a>.</p>",
            pct(1.0 - frac(rd.significant, rd.nodes)),
            rd.nodes,
            pct(1.0 - frac(rd.core_significant, rd.core_nodes)),
            rd.core_nodes,
            url(std::path::Path::new(&r.id))
        );
    }
}
