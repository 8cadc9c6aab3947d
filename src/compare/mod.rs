//! Comparisons between runs: profiles at stations overlaid with
//! uncertainty bands, a difference map with the significance of each
//! difference, and a table of scalar results across flow conditions.
//!
//! Owns: the comparison arithmetic (`interp`, `scalars`), its tables and
//! figures (`figures`) under `OUT/compare/<slug>/`. Does not own: the plan
//! (`plan::report`) or the drawing layer (`plot::draw`).
//!
//! Conventions: Δ = second run − first run, on the first run's grid; the
//! second run is interpolated bilinearly where its grid differs (see
//! `interp`). Bands and the significance test use the plan's coverage
//! factor k (default 2). A run named by a comparison but not reduced in
//! this invocation (`--runs`) leaves the comparison with a warning and
//! nothing else.

mod figures;
pub(crate) mod interp;
pub(crate) mod scalars;

use std::path::{Path, PathBuf};

use crate::error::{Error, Result};
use crate::plan::report::ComparePlan;
use crate::result::RunResult;

pub(crate) use crate::result::ComparisonResult;
pub(crate) use scalars::Scalar;

/// A profile of one run at one station.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct Profile {
    pub run: String,
    /// "x = 30 mm" or "y = 0 mm".
    pub station: String,
    /// Position along the line (m).
    pub s: Vec<f64>,
    pub value: Vec<f64>,
    pub uncertainty: Vec<f64>,
}

/// Runs every comparison; `runs` are the reduced runs (any order).
pub(crate) fn run_comparisons(
    plans: &[ComparePlan],
    runs: &[RunResult],
    out: &Path,
) -> Result<Vec<ComparisonResult>> {
    plans.iter().map(|p| run_one(p, runs, out)).collect()
}

/// Runs one comparison: scalars, the difference map of the first two runs,
/// profiles and the scalar figure, under `OUT/compare/<slug>/`.
fn run_one(p: &ComparePlan, runs: &[RunResult], out: &Path) -> Result<ComparisonResult> {
    let mut res = empty_result(p);
    let sel = select_runs(p, runs, &mut res);
    if sel.len() < p.runs.len() {
        return Ok(res);
    }
    let dir = out.join("compare").join(&p.slug);
    std::fs::create_dir_all(&dir).map_err(|e| Error::io(&dir, e))?;
    let ctx = Outputs { dir: &dir, out };

    // Scalars across conditions.
    write_scalars(p, &sel, &ctx, &mut res)?;
    // Difference map of the first two runs.
    write_difference(p, sel[0], sel[1], &ctx, &mut res)?;
    // Profiles.
    write_profiles(p, &sel, &ctx, &mut res)?;
    res.figures
        .extend(figures::scalar_figure(p, &sel, &res.scalars, &dir, out)?);
    Ok(res)
}

/// Where one comparison writes: its own folder and the output root that
/// recorded paths are relative to.
struct Outputs<'a> {
    dir: &'a Path,
    out: &'a Path,
}

impl Outputs<'_> {
    /// `q` relative to the output root (unchanged when outside it).
    fn rel(&self, q: &Path) -> PathBuf {
        q.strip_prefix(self.out).unwrap_or(q).to_path_buf()
    }
}

/// The result of a comparison before anything is compared.
fn empty_result(p: &ComparePlan) -> ComparisonResult {
    ComparisonResult {
        title: p.title.clone(),
        slug: p.slug.clone(),
        runs: p.runs.clone(),
        automatic: p.automatic,
        quantity: p.quantity.clone(),
        coverage: p.coverage,
        figures: Vec::new(),
        tables: Vec::new(),
        scalars: Vec::new(),
        n_compared: 0,
        n_significant: 0,
        significant_fraction: None,
        interpolated: false,
        warnings: Vec::new(),
    }
}

/// The plan's runs among the reduced ones, in the plan's order; a warning
/// in `res` for each run that was not reduced.
fn select_runs<'r>(
    p: &ComparePlan,
    runs: &'r [RunResult],
    res: &mut ComparisonResult,
) -> Vec<&'r RunResult> {
    let mut sel: Vec<&RunResult> = Vec::new();
    for id in &p.runs {
        match runs.iter().find(|r| &r.id == id) {
            Some(r) => sel.push(r),
            None => res.warnings.push(format!(
                "run '{id}' was not reduced in this invocation; comparison skipped"
            )),
        }
    }
    sel
}

/// Computes the scalars of every run into `res` and writes `scalars.csv`.
fn write_scalars(
    p: &ComparePlan,
    sel: &[&RunResult],
    ctx: &Outputs,
    res: &mut ComparisonResult,
) -> Result<()> {
    for r in sel {
        res.scalars.extend(scalars::run_scalars(
            &r.id,
            &r.stats.ensemble,
            &r.stats.phase,
            &r.conditions,
            p.vortex_threshold,
            p.wake_x,
        ));
    }
    let path = ctx.dir.join("scalars.csv");
    write_rows(
        &path,
        &["run", "quantity", "value", "uncertainty", "unit"],
        res.scalars.iter().map(|s| {
            vec![
                s.run.clone(),
                s.name.clone(),
                num(s.value),
                num(s.uncertainty),
                s.unit.clone(),
            ]
        }),
    )?;
    res.tables.push(ctx.rel(&path));
    Ok(())
}

/// The difference `b − a` of the plan's quantity: its counts and warnings
/// into `res`, `difference.csv` and the difference figures.
fn write_difference(
    p: &ComparePlan,
    a: &RunResult,
    b: &RunResult,
    ctx: &Outputs,
    res: &mut ComparisonResult,
) -> Result<()> {
    let Some(d) = interp::difference(
        &a.stats.ensemble,
        &b.stats.ensemble,
        &p.quantity,
        p.coverage,
    ) else {
        res.warnings.push(format!(
            "'{}' is not a column of both runs; no difference map",
            p.quantity
        ));
        return Ok(());
    };
    if d.n_compared == 0 {
        res.warnings.push(format!(
            "no node has both a difference and an uncertainty ('{}' missing or the grids do not overlap)",
            interp::uncertainty_column(&p.quantity)
        ));
    }
    res.n_compared = d.n_compared;
    res.n_significant = d.n_significant;
    res.interpolated = d.interpolated;
    res.significant_fraction =
        (d.n_compared > 0).then(|| d.n_significant as f64 / d.n_compared as f64);
    if d.interpolated {
        res.warnings.push(format!(
            "the grids of '{}' and '{}' differ; '{}' was interpolated bilinearly onto the grid of '{}'",
            a.id, b.id, b.id, a.id
        ));
    }
    let path = ctx.dir.join("difference.csv");
    let g = d.grid;
    write_rows(
        &path,
        &["x", "y", "a", "b", "delta", "delta_unc", "significant"],
        (0..g.len()).map(|k| {
            vec![
                num(g.x(k % g.nx)),
                num(g.y(k / g.nx)),
                num(d.a[k]),
                num(d.b[k]),
                num(d.delta[k]),
                num(d.u_delta[k]),
                u8::from(d.significant[k]).to_string(),
            ]
        }),
    )?;
    res.tables.push(ctx.rel(&path));
    res.figures
        .extend(figures::difference_figures(p, a, b, &d, ctx.dir, ctx.out)?);
    Ok(())
}

/// Profiles of the plan's profile quantity: `profiles.csv` and the profile
/// figure, or a warning when no run has the column.
fn write_profiles(
    p: &ComparePlan,
    sel: &[&RunResult],
    ctx: &Outputs,
    res: &mut ComparisonResult,
) -> Result<()> {
    let profiles = profiles(p, sel);
    if profiles.is_empty() {
        res.warnings.push(format!(
            "'{}' is not a column of the runs; no profiles",
            p.profile
        ));
        return Ok(());
    }
    let path = ctx.dir.join("profiles.csv");
    write_rows(
        &path,
        &["run", "station", "s", "value", "uncertainty"],
        profiles.iter().flat_map(|pr| {
            (0..pr.s.len()).map(move |k| {
                vec![
                    pr.run.clone(),
                    pr.station.clone(),
                    num(pr.s[k]),
                    num(pr.value[k]),
                    num(pr.uncertainty[k]),
                ]
            })
        }),
    )?;
    res.tables.push(ctx.rel(&path));
    res.figures.extend(figures::profile_figure(
        p, sel, &profiles, ctx.dir, ctx.out,
    )?);
    Ok(())
}

/// The stations of a plan: its own, or three vertical lines at 25, 50 and
/// 75 % of the first run's x range.
pub(crate) fn stations(p: &ComparePlan, first: &RunResult) -> (Vec<f64>, Vec<f64>) {
    if !p.at_x.is_empty() || !p.at_y.is_empty() {
        return (p.at_x.clone(), p.at_y.clone());
    }
    let g = first.stats.ensemble.grid;
    let (x0, x1) = (g.x0, g.x(g.nx.saturating_sub(1)));
    (
        [0.25, 0.5, 0.75]
            .iter()
            .map(|f| x0 + f * (x1 - x0))
            .collect(),
        Vec::new(),
    )
}

/// Profiles of `p.profile` of every run at every station, sampled
/// bilinearly at the run's own nodes along the line.
pub(crate) fn profiles(p: &ComparePlan, sel: &[&RunResult]) -> Vec<Profile> {
    let (at_x, at_y) = stations(p, sel[0]);
    let uq = interp::uncertainty_column(&p.profile);
    let mut out = Vec::new();
    for r in sel {
        let t = &r.stats.ensemble;
        let Some(col) = t.get(&p.profile) else {
            continue;
        };
        let unc = t.get(&uq);
        let g = t.grid;
        let sample = |x: f64, y: f64| {
            (
                interp::sample(&g, col, x, y),
                unc.map_or(f64::NAN, |u| interp::sample(&g, u, x, y)),
            )
        };
        for &x in &at_x {
            let (v, u): (Vec<f64>, Vec<f64>) = (0..g.ny).map(|j| sample(x, g.y(j))).unzip();
            out.push(Profile {
                run: r.id.clone(),
                station: format!("x = {} mm", crate::describe::tick(x * 1e3)),
                s: (0..g.ny).map(|j| g.y(j)).collect(),
                value: v,
                uncertainty: u,
            });
        }
        for &y in &at_y {
            let (v, u): (Vec<f64>, Vec<f64>) = (0..g.nx).map(|i| sample(g.x(i), y)).unzip();
            out.push(Profile {
                run: r.id.clone(),
                station: format!("y = {} mm", crate::describe::tick(y * 1e3)),
                s: (0..g.nx).map(|i| g.x(i)).collect(),
                value: v,
                uncertainty: u,
            });
        }
    }
    out
}

/// A number for CSV: shortest round-trip form; empty for NaN.
fn num(x: f64) -> String {
    if x.is_finite() {
        format!("{x}")
    } else {
        String::new()
    }
}

/// Writes a CSV through the one CSV writer (`io::write_csv_rows`).
fn write_rows(path: &Path, header: &[&str], rows: impl Iterator<Item = Vec<String>>) -> Result<()> {
    crate::io::write_csv_rows(path, header, rows)
}

#[cfg(test)]
mod tests;
