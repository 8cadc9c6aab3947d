use super::*;
use crate::plan::report::resolve_compare;
use crate::plot::fixtures::{grid, run, Vortex, VORTEX};
use crate::plot::tests::png_size;

/// Void elements: no end tag (HTML living standard, "void elements").
const VOID: [&str; 8] = ["meta", "img", "br", "hr", "link", "input", "source", "wbr"];

/// Undoes the five character references the report writes in attributes.
fn unescape(s: &str) -> String {
    s.replace("&lt;", "<")
        .replace("&gt;", ">")
        .replace("&quot;", "\"")
        .replace("&#39;", "'")
        .replace("&amp;", "&")
}

/// The value of attribute `name` in the inside of a start tag.
fn attr(tag: &str, name: &str) -> Option<String> {
    let key = format!(" {name}=\"");
    let at = tag.find(&key)? + key.len();
    let end = tag[at..].find('"')?;
    Some(unescape(&tag[at..at + end]))
}

/// Checks well-formedness of `page` (a stack of open elements, void
/// elements excepted; comments, the doctype and the text of `<style>`
/// skipped; ids unique; every `#anchor` names an id) and returns
/// (errors, every src/href in order).
fn check_html(page: &str) -> (Vec<String>, Vec<String>) {
    let (mut stack, mut refs, mut errors) = (Vec::<String>::new(), vec![], vec![]);
    let mut ids = std::collections::HashSet::new();
    let mut rest = page;
    while let Some(lt) = rest.find('<') {
        rest = &rest[lt..];
        if rest.starts_with("<!--") {
            rest = &rest[rest.find("-->").expect("unclosed comment") + 3..];
            continue;
        }
        let gt = rest.find('>').expect("unclosed tag");
        let tag = &rest[1..gt];
        rest = &rest[gt + 1..];
        if tag.starts_with('!') {
            continue;
        }
        if let Some(name) = tag.strip_prefix('/') {
            match stack.pop() {
                Some(open) if open == name.trim() => {}
                open => errors.push(format!("unexpected </{name}>, open: {open:?}")),
            }
            continue;
        }
        let name: String = tag
            .chars()
            .take_while(|c| c.is_ascii_alphanumeric())
            .collect::<String>()
            .to_ascii_lowercase();
        if let Some(id) = attr(tag, "id") {
            if !ids.insert(id.clone()) {
                errors.push(format!("duplicate id {id}"));
            }
        }
        refs.extend(["src", "href"].iter().filter_map(|k| attr(tag, k)));
        if name == "style" {
            rest = &rest[rest.find("</style>").expect("unclosed style")..];
        }
        if !VOID.contains(&name.as_str()) && !tag.ends_with('/') {
            stack.push(name);
        }
    }
    if !stack.is_empty() {
        errors.push(format!("unclosed: {stack:?}"));
    }
    for r in &refs {
        if let Some(a) = r.strip_prefix('#') {
            if !ids.contains(a) {
                errors.push(format!("dangling anchor {r}"));
            }
        }
    }
    (errors, refs)
}

#[test]
fn the_html_check_finds_what_it_should() {
    let (e, r) =
        check_html("<!DOCTYPE html><p id=\"a\"><a href=\"#a\">x</a><img src=\"f.png\"></p>");
    assert!(e.is_empty(), "{e:?}");
    assert_eq!(r, ["#a", "f.png"]);
    let (e, _) = check_html("<div><p>x</div><a href=\"#none\" id=\"q\"></a><b id=\"q\"></b>");
    assert_eq!(e.len(), 4, "{e:?}");
}

fn campaign(out: &Path) -> CampaignResult {
    let strong = Vortex {
        gamma: 0.006,
        ..VORTEX
    };
    let mut runs = vec![
        run("re 3000", &VORTEX, grid(64, 48)),
        run("re4500", &strong, grid(64, 48)),
    ];
    runs[1].conditions.velocity = Some(0.45);
    for r in runs.iter_mut() {
        r.figures = crate::plot::run_figures(&crate::plot::Params::default(), r, out).unwrap();
    }
    let ids: Vec<String> = runs.iter().map(|r| r.id.clone()).collect();
    let plans = resolve_compare(&[], &ids).unwrap();
    let comparisons = crate::compare::run_comparisons(&plans, &runs, out).unwrap();
    CampaignResult {
        name: "tank <vortex> & wake".into(),
        runs,
        manifest: serde_json::json!({
            "tool_version": "0.1.0",
            "version": "0.1.0",
            "pipeline": {"path": "p.toml", "sha256": "ffee", "text": "[campaign]\nname = \"x\"\n"},
            "inputs": [{"path": "a/f0001.csv", "bytes": 1024, "sha256": "ab12"}],
            "timings_s": {"read": 1.5, "derive": 0.25},
        }),
        warnings: vec!["run 're4500' has 2 frames rejected".into()],
        comparisons,
    }
}

#[test]
fn report_parses_and_every_reference_exists() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path();
    let c = campaign(out);
    // Files the report links but other stages write.
    std::fs::write(out.join("campaign.csv"), "id\n").unwrap();
    std::fs::write(out.join("manifest.json"), "{}").unwrap();
    for r in &c.runs {
        for f in ["ensemble.csv", "frames.csv", "phase.csv"] {
            std::fs::write(out.join(&r.id).join(f), "x\n").unwrap();
        }
    }
    write_report(&c, out).unwrap();
    if let Ok(keep) = std::env::var("CURLEW_FIGURE_PREVIEW") {
        let k = Path::new(&keep);
        let c2 = campaign(k);
        write_report(&c2, k).unwrap();
    }
    assert!(!out.join("index.html.partial").exists());
    let page = std::fs::read_to_string(out.join("index.html")).unwrap();
    let (errors, refs) = check_html(&page);
    assert!(errors.is_empty(), "{errors:#?}");
    let mut n_png = 0;
    for r in &refs {
        if r.starts_with('#') {
            continue;
        }
        assert!(!r.contains("://"), "external reference {r}");
        // Undo the percent-encoding of the one space in a run id.
        let p = out.join(r.replace("%20", " "));
        assert!(p.is_file(), "{r} does not exist");
        if r.ends_with(".png") {
            n_png += 1;
            let (w, h) = png_size(&p);
            assert!(w >= 900 && h >= 300, "{r}: {w} x {h}");
            let svg = p.with_extension("svg");
            assert!(
                std::fs::metadata(&svg).unwrap().len() > 1000,
                "{} missing or empty",
                svg.display()
            );
        }
    }
    // 9 figures per run, 4 for the comparison.
    assert_eq!(n_png, 9 * 2 + 4, "{refs:?}");
    // Text is escaped, sections exist, tables carry real values.
    assert!(page.contains("tank &lt;vortex&gt; &amp; wake"));
    assert!(page.contains("id=\"run-re-3000\"") && page.contains("id=\"cmp-re-3000-vs-re4500\""));
    assert!(page.contains("<style>") && !page.contains("<script"));
    // Re of the second run: 0.45 · 0.01 / 1e-6 = 4500 (hand-computed).
    assert!(
        page.contains("<td class=\"n\">4500</td>"),
        "Re 4500 missing"
    );
    assert!(page.contains("a/f0001.csv") && page.contains("ab12"));
}
