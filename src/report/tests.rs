use super::*;
use crate::plan::report::resolve_compare;
use crate::plot::fixtures::{grid, run, Vortex, VORTEX};
use crate::plot::tests::png_size;

/// Checks well-formedness with python's html.parser (a stack of open
/// elements; void elements excepted) and prints every src/href.
const CHECK: &str = r##"
import sys
from html.parser import HTMLParser
VOID = {"meta", "img", "br", "hr", "link", "input", "source", "wbr"}
class P(HTMLParser):
    def __init__(self):
        super().__init__(convert_charrefs=True)
        self.stack, self.refs, self.errors, self.ids = [], [], [], set()
    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        if "id" in a:
            if a["id"] in self.ids: self.errors.append("duplicate id " + a["id"])
            self.ids.add(a["id"])
        for k in ("src", "href"):
            if k in a: self.refs.append(a[k])
        if tag not in VOID: self.stack.append(tag)
    def handle_endtag(self, tag):
        if not self.stack or self.stack[-1] != tag:
            self.errors.append("unexpected </%s> at %s, open: %s" % (tag, self.getpos(), self.stack[-3:]))
        else:
            self.stack.pop()
p = P(); p.feed(sys.stdin.read()); p.close()
if p.stack: p.errors.append("unclosed: %s" % p.stack)
for r in p.refs:
    if r.startswith("#") and r[1:] not in p.ids: p.errors.append("dangling anchor " + r)
for e in p.errors: print("ERROR", e)
for r in p.refs: print("REF", r)
"##;

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
    let res = crate::testutil::python(CHECK, &page);
    let errors: Vec<&str> = res.lines().filter(|l| l.starts_with("ERROR")).collect();
    assert!(errors.is_empty(), "{errors:#?}");
    let refs: Vec<&str> = res.lines().filter_map(|l| l.strip_prefix("REF ")).collect();
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
