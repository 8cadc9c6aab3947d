//! The report's paragraph on a run's vortex cores and tracks, in plain words.

use crate::vortex::{track, SliceKind, Vortices};

/// The report's paragraph in plain words.
pub(crate) fn words(v: &Vortices) -> String {
    use crate::describe::num;
    let n_mean = v
        .slices
        .iter()
        .find(|s| s.kind == SliceKind::Mean)
        .map_or(0, |s| s.cores.len());
    let n_bins = v
        .slices
        .iter()
        .filter(|s| s.kind != SliceKind::Mean)
        .count();
    let total: usize = v.slices.iter().map(|s| s.cores.len()).sum::<usize>() - n_mean;
    let mut s = format!(
        "The mean field holds {n_mean} vortex core{}; the {n_bins} phase-bin means hold {total} in all. ",
        if n_mean == 1 { "" } else { "s" }
    );
    let long: Vec<&track::Track> = v.tracks.iter().filter(|t| t.points.len() >= 3).collect();
    if !long.is_empty() {
        s += &format!(
            "{} track{} span three bins or more. ",
            long.len(),
            if long.len() == 1 { "" } else { "s" }
        );
    }
    if let Some(t) = long
        .iter()
        .filter(|t| t.velocity.is_some())
        .max_by_key(|t| t.points.len())
    {
        let [a, b] = t.velocity.expect("filtered");
        s += &format!(
            "The longest (track {}, {} points) convects at ({} ± {}, {} ± {}) m/s",
            t.id,
            t.points.len(),
            num(a.value, 3),
            num(a.unc, 2),
            num(b.value, 3),
            num(b.unc, 2)
        );
        if let Some(gr) = t.growth {
            s += &format!(
                "; its fitted core radius squared grows at {} ± {} m²/s (a Lamb-Oseen core in a fluid of viscosity nu grows at 4 nu)",
                num(gr.value, 3),
                num(gr.unc, 2)
            );
        }
        s += ". ";
    }
    s += &format!(
        "Circulation uncertainties carry the neighbour correlation: {}.",
        v.correlation
    );
    s
}
