//! The sections of the report page.

use std::fmt::Write;

use super::conditions::{run_frequency, FrequencySource};
use super::html::{anchor, esc, json, num, table, url};
use crate::compare::ComparisonResult;
use crate::field::Extra;
use crate::result::{CampaignResult, FigureRef, RunResult};

const CSS: &str = r#"
:root { --ink: #1d2430; --muted: #5b6472; --rule: #d8dde3; --accent: #1f5c7a; --warm: #9a4a22; --paper: #fbfaf7; }
* { box-sizing: border-box; }
body { margin: 0; font: 16px/1.5 system-ui, -apple-system, "Segoe UI", Roboto, "DejaVu Sans", sans-serif; color: var(--ink); background: var(--paper); }
header.top { padding: 28px 40px 18px; border-bottom: 4px solid var(--accent); background: #fff; }
header.top h1 { margin: 0 0 4px; font-size: 28px; letter-spacing: 0.01em; }
header.top p { margin: 2px 0; color: var(--muted); }
main { max-width: 1180px; margin: 0 auto; padding: 12px 40px 60px; }
nav.toc { background: #fff; border: 1px solid var(--rule); border-left: 4px solid var(--warm); padding: 10px 20px; margin: 20px 0; }
nav.toc ol { margin: 6px 0; padding-left: 22px; columns: 2; }
a { color: var(--accent); }
section { margin-top: 36px; }
h2 { font-size: 22px; border-bottom: 1px solid var(--rule); padding-bottom: 4px; }
h3 { font-size: 18px; margin-bottom: 6px; }
table { border-collapse: collapse; margin: 8px 0 16px; background: #fff; font-size: 14.5px; }
th, td { border: 1px solid var(--rule); padding: 4px 10px; text-align: left; vertical-align: top; }
th { background: #eef2f5; font-weight: 600; }
td.n { text-align: right; font-variant-numeric: tabular-nums; white-space: nowrap; }
.grid { display: grid; grid-template-columns: repeat(auto-fill, minmax(520px, 1fr)); gap: 18px; }
figure { margin: 0; background: #fff; border: 1px solid var(--rule); padding: 10px; break-inside: avoid; }
figure img { width: 100%; height: auto; display: block; }
figcaption { font-size: 14px; color: var(--muted); margin-top: 6px; }
figcaption b { color: var(--ink); }
.warn { background: #fff6e8; border-left: 4px solid #c77c1a; padding: 8px 14px; margin: 8px 0; }
.warn ul { margin: 4px 0; }
.note { color: var(--muted); font-size: 14px; }
.caution { background: #fff; border: 1px solid var(--rule); border-left: 4px solid #a33; padding: 8px 16px; margin-top: 30px; }
pre { background: #f3f4f2; border: 1px solid var(--rule); padding: 10px; overflow-x: auto; font-size: 13px; }
dl { margin: 4px 0; } dt { font-weight: 600; margin-top: 6px; } dd { margin-left: 18px; }
ul.plain { margin: 0; padding-left: 18px; }
@media print {
  body { background: #fff; font-size: 11pt; }
  nav.toc { display: none; }
  main { max-width: none; padding: 0 10mm; }
  header.top { border-bottom: 2px solid #000; padding: 0 10mm 6mm; }
  section.run, section.comparison { break-before: page; }
  .grid { display: block; }
  figure { border: none; padding: 0; margin: 0 0 8mm; }
  a { color: inherit; text-decoration: none; }
}
"#;

fn pct(x: f64) -> String {
    if x.is_finite() {
        format!("{:.2} %", 100.0 * x)
    } else {
        "–".into()
    }
}

fn figures(out: &mut String, figs: &[FigureRef]) {
    if figs.is_empty() {
        out.push_str("<p class=\"note\">No figures were drawn.</p>\n");
        return;
    }
    out.push_str("<div class=\"grid\">\n");
    for f in figs {
        let _ = writeln!(
            out,
            "<figure><a href=\"{svg}\"><img src=\"{png}\" alt=\"{t}\" loading=\"lazy\"></a>\
             <figcaption><b>{t}.</b> {c} <a href=\"{svg}\">SVG</a></figcaption></figure>",
            svg = url(&f.svg),
            png = url(&f.png),
            t = esc(&f.title),
            c = esc(&f.caption)
        );
    }
    out.push_str("</div>\n");
}

fn warnings(out: &mut String, w: &[String]) {
    if w.is_empty() {
        return;
    }
    out.push_str("<div class=\"warn\"><b>Warnings</b><ul>");
    for x in w {
        let _ = write!(out, "<li>{}</li>", esc(x));
    }
    out.push_str("</ul></div>\n");
}

/// Totals over a run's frames.
struct Totals {
    frames: usize,
    rejected: usize,
    vectors: usize,
    invalid: usize,
    outliers: usize,
    replaced: usize,
    filled: usize,
    unfilled: usize,
    noise: f64,
}

fn totals(r: &RunResult) -> Totals {
    let f = &r.frames;
    Totals {
        frames: f.len(),
        rejected: f.iter().filter(|x| x.rejected).count(),
        vectors: f.iter().map(|x| x.n_vectors).sum(),
        invalid: f.iter().map(|x| x.validation.invalid_input).sum(),
        outliers: f.iter().map(|x| x.validation.outliers()).sum(),
        replaced: f.iter().map(|x| x.fill.replaced).sum(),
        filled: f.iter().map(|x| x.fill.filled).sum(),
        unfilled: f.iter().map(|x| x.fill.unfilled).sum(),
        noise: crate::result::mean_noise(f).unwrap_or(f64::NAN),
    }
}

fn peak_vorticity(r: &RunResult) -> f64 {
    crate::stats::finish::peak_node(&r.stats.ensemble).map_or(f64::NAN, |(_, w)| w)
}

fn summary(out: &mut String, c: &CampaignResult) {
    let rows: Vec<Vec<String>> = c
        .runs
        .iter()
        .map(|r| {
            let t = totals(r);
            let frac = |n: usize| {
                if t.vectors > 0 {
                    n as f64 / t.vectors as f64
                } else {
                    f64::NAN
                }
            };
            let st = run_frequency(r).and_then(|(f, _)| r.conditions.strouhal(f));
            vec![
                format!("<a href=\"#{}\">{}</a>", anchor("run", &r.id), esc(&r.id)),
                format!("{} / {}", t.frames - t.rejected, t.frames),
                format!("{} × {}", r.grid.nx, r.grid.ny),
                r.conditions.reynolds().map_or("–".into(), |x| num(x, 4)),
                st.map_or("–".into(), |x| num(x, 3)),
                pct(frac(t.outliers)),
                pct(frac(t.invalid)),
                num(t.noise, 3),
                num(peak_vorticity(r), 4),
            ]
        })
        .collect();
    table(
        out,
        &[
            "run",
            "frames used",
            "grid",
            "Re",
            "St",
            "rejected by tests",
            "invalid in input",
            "noise (m/s)",
            "peak ω (1/s)",
        ],
        &rows,
    );
}

/// The section of one run: conditions, validation counts, results, budget,
/// structures, vortex cores, figures and table links.
fn run_section(out: &mut String, r: &RunResult) {
    run_heading(out, r);
    conditions_table(out, r);
    validation_table(out, r);
    results_table(out, r);
    super::budget::section(out, r);
    super::structures::section(out, r);
    cores_figures_and_tables(out, r);
    out.push_str("</section>\n");
}

/// Opens a run's section: its heading, description and warnings (the
/// run's, then the statistics' not already given).
fn run_heading(out: &mut String, r: &RunResult) {
    let _ = writeln!(
        out,
        "<section class=\"run\" id=\"{}\"><h2>Run {}</h2>",
        anchor("run", &r.id),
        esc(&r.id)
    );
    if let Some(d) = &r.description {
        let _ = writeln!(out, "<p>{}</p>", esc(d));
    }
    let mut all_w = r.warnings.clone();
    for w in &r.stats.warnings {
        if !all_w.contains(w) {
            all_w.push(w.clone());
        }
    }
    warnings(out, &all_w);
}

/// The run's flow conditions, with Re and St where they follow; nothing
/// when the run has none.
fn conditions_table(out: &mut String, r: &RunResult) {
    let cd = &r.conditions;
    let mut rows: Vec<Vec<String>> = Vec::new();
    let mut put = |k: &str, v: Option<f64>, unit: &str| {
        if let Some(v) = v {
            rows.push(vec![esc(k), num(v, 4), esc(unit)]);
        }
    };
    put("reference velocity U", cd.velocity, "m/s");
    put("reference length L", cd.length, "m");
    put("kinematic viscosity ν", cd.viscosity, "m²/s");
    put("Reynolds number Re = UL/ν", cd.reynolds(), "");
    if let Some((f, src)) = run_frequency(r) {
        let what = match src {
            FrequencySource::Given => "frequency f (given)",
            FrequencySource::Estimated => "frequency f (estimated from phases and times)",
        };
        put(what, Some(f), "Hz");
        put("Strouhal number St = fL/U", cd.strouhal(f), "");
    }
    for (k, v) in &cd.extra {
        match v {
            Extra::Number(x) => rows.push(vec![esc(k), num(*x, 6), String::new()]),
            Extra::Text(s) => rows.push(vec![esc(k), esc(s), String::new()]),
        }
    }
    if !rows.is_empty() {
        out.push_str("<h3>Flow conditions</h3>\n");
        table(out, &["condition", "value", "unit"], &rows);
    }
}

/// Counts of frames and vectors by what validation and filling did.
fn validation_table(out: &mut String, r: &RunResult) {
    let t = totals(r);
    let frac = |n: usize| {
        if t.vectors > 0 {
            pct(n as f64 / t.vectors as f64)
        } else {
            "–".into()
        }
    };
    out.push_str("<h3>Validation and filling</h3>\n");
    table(
        out,
        &["", "count", "fraction of vectors"],
        &[
            vec![
                "frames (rejected whole)".into(),
                format!("{} ({})", t.frames, t.rejected),
                String::new(),
            ],
            vec!["vectors".into(), t.vectors.to_string(), String::new()],
            vec![
                "invalid in the input".into(),
                t.invalid.to_string(),
                frac(t.invalid),
            ],
            vec![
                "rejected by the tests".into(),
                t.outliers.to_string(),
                frac(t.outliers),
            ],
            vec!["replaced".into(), t.replaced.to_string(), frac(t.replaced)],
            vec!["filled".into(), t.filled.to_string(), frac(t.filled)],
            vec![
                "left unfilled (masked)".into(),
                t.unfilled.to_string(),
                frac(t.unfilled),
            ],
        ],
    );
}

/// The run's summary numbers and effective sample count, if any.
fn results_table(out: &mut String, r: &RunResult) {
    let mut srows: Vec<Vec<String>> = r
        .stats
        .summary
        .iter()
        .map(|(k, v)| vec![esc(k), num(*v, 4)])
        .collect();
    if let Some(n) = r.stats.n_eff {
        srows.push(vec![
            "effective number of independent samples".into(),
            num(n, 4),
        ]);
    }
    if !srows.is_empty() {
        out.push_str("<h3>Results</h3>\n");
        table(out, &["quantity (SI)", "value"], &srows);
    }
}

/// The vortex-core words, the figures and the links to the run's tables.
fn cores_figures_and_tables(out: &mut String, r: &RunResult) {
    if let Some(v) = &r.vortices {
        let _ = writeln!(
            out,
            "<h3>Vortex cores</h3>\n<p>{}</p>",
            esc(&super::vortices::words(v))
        );
    }
    out.push_str("<h3>Figures</h3>\n");
    figures(out, &r.figures);
    let _ = writeln!(
        out,
        "<p class=\"note\">Tables: <a href=\"{0}/ensemble.csv\">ensemble.csv</a>, <a href=\"{0}/frames.csv\">frames.csv</a>{1}.</p>",
        url(std::path::Path::new(&r.id)),
        if r.stats.phase.is_empty() { String::new() } else { format!(", <a href=\"{}/phase.csv\">phase.csv</a>", url(std::path::Path::new(&r.id))) }
    );
}

fn comparison_section(out: &mut String, c: &ComparisonResult) {
    let _ = writeln!(
        out,
        "<section class=\"comparison\" id=\"{}\"><h2>Comparison: {}</h2>",
        anchor("cmp", &c.slug),
        esc(&c.title)
    );
    if c.automatic {
        out.push_str("<p class=\"note\">Added automatically (no <code>[[compare]]</code> in the pipeline): the first two runs.</p>\n");
    }
    warnings(out, &c.warnings);
    if let Some(f) = c.significant_fraction {
        let _ = writeln!(
            out,
            "<p>Difference of <code>{q}</code> ({b} − {a}): <b>{ns}</b> of {nc} nodes ({p}) differ by more than \
             k·sqrt(u₁² + u₂²) with k = {k}.</p>",
            q = esc(&c.quantity),
            a = esc(c.runs.first().map_or("", |s| s.as_str())),
            b = esc(c.runs.get(1).map_or("", |s| s.as_str())),
            ns = c.n_significant,
            nc = c.n_compared,
            p = pct(f),
            k = c.coverage
        );
    }
    if !c.scalars.is_empty() {
        out.push_str("<h3>Scalars across conditions</h3>\n");
        let rows: Vec<Vec<String>> = c
            .scalars
            .iter()
            .map(|s| {
                vec![
                    esc(&s.run),
                    esc(&s.name),
                    num(s.value, 4),
                    num(s.uncertainty, 2),
                    esc(&s.unit),
                ]
            })
            .collect();
        table(
            out,
            &["run", "quantity", "value", "standard uncertainty", "unit"],
            &rows,
        );
        out.push_str(
            "<p class=\"note\">Circulation uncertainty assumes independent node errors and is a lower estimate \
             (neighbouring vorticity errors are correlated through the stencil).</p>\n",
        );
    }
    figures(out, &c.figures);
    if !c.tables.is_empty() {
        out.push_str("<p class=\"note\">Tables: ");
        let links: Vec<String> = c
            .tables
            .iter()
            .map(|t| {
                format!(
                    "<a href=\"{}\">{}</a>",
                    url(t),
                    esc(&t.file_name().unwrap_or_default().to_string_lossy())
                )
            })
            .collect();
        out.push_str(&links.join(", "));
        out.push_str(".</p>\n");
    }
    out.push_str("</section>\n");
}

fn provenance(out: &mut String, m: &serde_json::Value) {
    use serde_json::Value as V;
    out.push_str("<section id=\"provenance\"><h2>Provenance</h2>\n");
    out.push_str("<p class=\"note\">From <a href=\"manifest.json\">manifest.json</a>: how every number on this page was made.</p>\n");
    let V::Object(map) = m else {
        out.push_str("<p class=\"note\">No manifest was recorded.</p>\n</section>\n");
        return;
    };
    let mut rest = serde_json::Map::new();
    for (k, v) in map {
        match (k.as_str(), v) {
            ("pipeline", V::Object(p)) => {
                out.push_str("<h3>Pipeline</h3>\n");
                for key in ["path", "sha256"] {
                    if let Some(x) = p.get(key).and_then(|x| x.as_str()) {
                        let _ =
                            writeln!(out, "<p class=\"note\">{key}: <code>{}</code></p>", esc(x));
                    }
                }
                if let Some(t) = p.get("text").and_then(|x| x.as_str()) {
                    let _ = writeln!(out, "<pre>{}</pre>", esc(t));
                }
            }
            ("pipeline", V::String(t)) => {
                let _ = writeln!(out, "<h3>Pipeline</h3>\n<pre>{}</pre>", esc(t));
            }
            ("inputs", V::Array(a)) => {
                // Thousands of frames: show the first files, count the rest.
                let bytes: f64 = a
                    .iter()
                    .filter_map(|x| {
                        x.get("bytes")
                            .or_else(|| x.get("size"))
                            .and_then(|b| b.as_f64())
                    })
                    .sum();
                let _ =
                    writeln!(
                    out,
                    "<h3>Input files</h3>\n<p>{} files{}, each with its hash in manifest.json.</p>",
                    a.len(),
                    if bytes > 0.0 { format!(", {:.1} MB", bytes / 1e6) } else { String::new() }
                );
                let shown: Vec<V> = a.iter().take(20).cloned().collect();
                out.push_str("<details><summary>first files</summary>\n");
                json(out, &V::Array(shown), 0);
                out.push_str("</details>\n");
            }
            ("warnings", _) => {}
            _ => {
                rest.insert(k.clone(), v.clone());
            }
        }
    }
    if !rest.is_empty() {
        out.push_str("<h3>Run record</h3>\n");
        json(out, &V::Object(rest), 0);
    }
    out.push_str("</section>\n");
}

/// The whole page.
pub(crate) fn page(c: &CampaignResult) -> String {
    let mut o = String::with_capacity(64 * 1024);
    let version = c
        .manifest
        .get("tool_version")
        .or_else(|| c.manifest.get("version"))
        .and_then(|v| v.as_str())
        .unwrap_or(crate::VERSION);
    let _ = write!(
        o,
        "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n\
         <meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n\
         <title>{name}: campaign report</title>\n<style>{CSS}</style>\n</head>\n<body>\n\
         <header class=\"top\"><h1>{name}</h1><p>Campaign report: {n} run(s), {m} comparison(s). Made by curlew {ver}.</p></header>\n<main>\n",
        name = esc(&c.name),
        n = c.runs.len(),
        m = c.comparisons.len(),
        ver = esc(version)
    );
    o.push_str(
        "<nav class=\"toc\"><b>Contents</b><ol>\n<li><a href=\"#summary\">Summary</a></li>\n",
    );
    for r in &c.runs {
        let _ = writeln!(
            o,
            "<li><a href=\"#{}\">Run {}</a></li>",
            anchor("run", &r.id),
            esc(&r.id)
        );
    }
    for cmp in &c.comparisons {
        let _ = writeln!(
            o,
            "<li><a href=\"#{}\">Comparison: {}</a></li>",
            anchor("cmp", &cmp.slug),
            esc(&cmp.title)
        );
    }
    o.push_str("<li><a href=\"#provenance\">Provenance</a></li>\n</ol></nav>\n");
    o.push_str("<section id=\"summary\"><h2>Summary</h2>\n");
    // Campaign warnings that no run section shows already.
    let in_runs = |w: &String| {
        c.runs
            .iter()
            .any(|r| r.warnings.contains(w) || r.stats.warnings.contains(w))
    };
    let own: Vec<String> = c.warnings.iter().filter(|w| !in_runs(w)).cloned().collect();
    warnings(&mut o, &own);
    let n_run_w: usize = c.runs.iter().map(|r| r.warnings.len()).sum();
    if n_run_w > 0 {
        let _ = writeln!(
            o,
            "<p class=\"note\">{n_run_w} warning(s) in the run sections below.</p>"
        );
    }
    summary(&mut o, c);
    o.push_str(
        "<p class=\"note\">Per-run table: <a href=\"campaign.csv\">campaign.csv</a>. All values SI; uncertainties are standard \
         uncertainties (k = 1) unless a coverage factor is named.</p>\n</section>\n",
    );
    for r in &c.runs {
        run_section(&mut o, r);
    }
    for cmp in &c.comparisons {
        comparison_section(&mut o, cmp);
    }
    provenance(&mut o, &c.manifest);
    o.push_str(
        "<div class=\"caution\"><b>Cautions.</b> Uncertainties on this page are estimates propagated from the \
         measurement model, not guarantees; check them against repeated runs before they decide a design. \
         PIV uses class 3B/4 lasers: follow your laboratory's laser-safety rules and local regulations.</div>\n",
    );
    o.push_str("</main>\n</body>\n</html>\n");
    o
}
