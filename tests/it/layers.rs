//! The library's top-level modules form layers: no module depends, through
//! any chain of `crate::` paths, on itself (DEVELOPERS.md, "The house"),
//! and every dependency points to the module's own layer or one below it,
//! in the order DEVELOPERS.md lists.
//!
//! Reads `src/**/*.rs` as text. Counted: every `crate::<module>` path
//! (plain, or inside `crate::{...}` use groups) outside comments, in files
//! that are compiled into the library outside tests. Skipped: `src/main.rs`
//! and the binary's `src/cli/`, files named `tests*.rs` or under a `tests/`
//! folder, files declared under `#[cfg(test)]` (`#[cfg(test)] mod bench;`),
//! and inline `#[cfg(test)] mod name { ... }` blocks.

use std::collections::{BTreeMap, BTreeSet};
use std::path::{Path, PathBuf};

/// module → (module it uses → the first file, relative to `src/`, that uses it).
type Graph = BTreeMap<String, BTreeMap<String, String>>;

fn src_dir() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("src")
}

/// The top-level modules `src/lib.rs` declares.
fn modules(lib: &str) -> BTreeSet<String> {
    let mut out = BTreeSet::new();
    for line in code_lines(lib) {
        let l = line.trim();
        let l = l.strip_prefix("pub ").unwrap_or(l);
        if let Some(name) = l.strip_prefix("mod ").and_then(|r| r.strip_suffix(';')) {
            out.insert(name.trim().to_string());
        }
    }
    out
}

/// The text with `//` comments (doc comments too) blanked out; string
/// literals holding `//` are rare enough in `src/` not to matter.
fn code_lines(text: &str) -> impl Iterator<Item = &str> {
    text.lines().map(|l| l.find("//").map_or(l, |k| &l[..k]))
}

fn strip_comments(text: &str) -> String {
    code_lines(text).collect::<Vec<_>>().join("\n")
}

/// The text without its inline `#[cfg(test)] mod name { ... }` blocks, and
/// the names of the modules declared `#[cfg(test)] mod name;` (their files
/// are test-only).
fn strip_test_modules(text: &str) -> (String, Vec<String>) {
    let mut out = String::new();
    let mut test_files = Vec::new();
    let mut rest = text;
    while let Some(k) = rest.find("#[cfg(test)]") {
        out.push_str(&rest[..k]);
        let after = &rest[k + "#[cfg(test)]".len()..];
        let t = after.trim_start();
        let t = t
            .strip_prefix("pub(crate) ")
            .or_else(|| t.strip_prefix("pub "))
            .unwrap_or(t);
        let Some(decl) = t.strip_prefix("mod ") else {
            rest = after;
            continue;
        };
        let name = ident(decl);
        let tail = decl[name.len()..].trim_start();
        if let Some(after_decl) = tail.strip_prefix(';') {
            test_files.push(name);
            rest = after_decl;
        } else if tail.starts_with('{') {
            let mut depth = 0usize;
            let mut end = tail.len();
            for (i, c) in tail.char_indices() {
                match c {
                    '{' => depth += 1,
                    '}' => {
                        depth -= 1;
                        if depth == 0 {
                            end = i + 1;
                            break;
                        }
                    }
                    _ => {}
                }
            }
            rest = &tail[end..];
        } else {
            rest = after;
        }
    }
    out.push_str(rest);
    (out, test_files)
}

/// The first names of a use tree's branches: `a::b, c::{d}, e` → a, c, e.
fn group_heads(inner: &str) -> Vec<String> {
    let mut parts = vec![String::new()];
    let mut depth = 0usize;
    for c in inner.chars() {
        match c {
            '{' => depth += 1,
            '}' => depth = depth.saturating_sub(1),
            ',' if depth == 0 => {
                parts.push(String::new());
                continue;
            }
            _ => {}
        }
        parts.last_mut().unwrap().push(c);
    }
    parts
        .iter()
        .map(|p| ident(p.trim_start()))
        .filter(|h| !h.is_empty())
        .collect()
}

/// The identifier `text` starts with.
fn ident(text: &str) -> String {
    text.chars()
        .take_while(|c| c.is_alphanumeric() || *c == '_')
        .collect()
}

/// The top-level modules a piece of code names through `crate::`.
fn used_modules(code: &str) -> BTreeSet<String> {
    let mut out = BTreeSet::new();
    let mut rest = code;
    while let Some(k) = rest.find("crate::") {
        let before = rest[..k].chars().last();
        rest = &rest[k + "crate::".len()..];
        if before.is_some_and(|c| c.is_alphanumeric() || c == '_') {
            continue; // `curlew_crate::`, not ours
        }
        if let Some(group) = rest.strip_prefix('{') {
            let mut depth = 1usize;
            let end = group
                .char_indices()
                .find(|&(_, c)| {
                    match c {
                        '{' => depth += 1,
                        '}' => depth -= 1,
                        _ => {}
                    }
                    depth == 0
                })
                .map_or(group.len(), |(i, _)| i);
            out.extend(group_heads(&group[..end]));
        } else {
            out.insert(ident(rest));
        }
    }
    out
}

/// Is `rel` (relative to `src/`, `/`-separated) a test file by its name?
fn test_file_by_name(rel: &str) -> bool {
    let name = rel.rsplit('/').next().unwrap_or(rel);
    name.starts_with("tests") || rel.split('/').any(|d| d == "tests")
}

/// The folder in which `file`'s `mod x;` declarations live.
fn module_dir(file: &Path) -> PathBuf {
    let dir = file.parent().unwrap().to_path_buf();
    match file.file_name().and_then(|n| n.to_str()) {
        Some("mod.rs") | Some("lib.rs") => dir,
        _ => dir.join(file.file_stem().unwrap()),
    }
}

fn rust_files(dir: &Path, out: &mut Vec<PathBuf>) {
    let mut entries: Vec<_> = std::fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap().path())
        .collect();
    entries.sort();
    for p in entries {
        if p.is_dir() {
            rust_files(&p, out);
        } else if p.extension().is_some_and(|e| e == "rs") {
            out.push(p);
        }
    }
}

/// The library's dependency graph between its top-level modules.
fn graph(src: &Path) -> Graph {
    let lib = std::fs::read_to_string(src.join("lib.rs")).unwrap();
    let mods = modules(&strip_test_modules(&lib).0);
    let mut files = Vec::new();
    rust_files(src, &mut files);
    // files declared `#[cfg(test)] mod x;` anywhere (and what lies below them)
    let mut test_only: Vec<PathBuf> = Vec::new();
    for f in &files {
        let (_, names) = strip_test_modules(&strip_comments(&std::fs::read_to_string(f).unwrap()));
        let dir = module_dir(f);
        for n in names {
            test_only.push(dir.join(format!("{n}.rs")));
            test_only.push(dir.join(&n));
        }
    }
    let mut g = Graph::new();
    for f in &files {
        let rel = f
            .strip_prefix(src)
            .unwrap()
            .to_string_lossy()
            .replace('\\', "/");
        let top = rel
            .split('/')
            .next()
            .unwrap()
            .trim_end_matches(".rs")
            .to_string();
        if !mods.contains(&top)
            || test_file_by_name(&rel)
            || test_only.iter().any(|t| f.starts_with(t))
        {
            continue;
        }
        let text = std::fs::read_to_string(f).unwrap();
        let (code, _) = strip_test_modules(&strip_comments(&text));
        for m in used_modules(&code) {
            if m != top && mods.contains(&m) {
                g.entry(top.clone())
                    .or_default()
                    .entry(m)
                    .or_insert_with(|| rel.clone());
            }
        }
    }
    g
}

/// A cycle of `g` as its modules in order (first = last), if there is one.
fn find_cycle(g: &Graph) -> Option<Vec<String>> {
    // 0 = unseen, 1 = on the current path, 2 = done
    fn visit(
        n: &str,
        g: &Graph,
        state: &mut BTreeMap<String, u8>,
        path: &mut Vec<String>,
    ) -> Option<Vec<String>> {
        state.insert(n.to_string(), 1);
        path.push(n.to_string());
        for m in g.get(n).into_iter().flat_map(|e| e.keys()) {
            match state.get(m.as_str()).copied().unwrap_or(0) {
                1 => {
                    let k = path.iter().position(|p| p == m).unwrap();
                    let mut c = path[k..].to_vec();
                    c.push(m.clone());
                    return Some(c);
                }
                0 => {
                    if let Some(c) = visit(m, g, state, path) {
                        return Some(c);
                    }
                }
                _ => {}
            }
        }
        path.pop();
        state.insert(n.to_string(), 2);
        None
    }
    let mut state = BTreeMap::new();
    for n in g.keys() {
        if state.get(n.as_str()).copied().unwrap_or(0) == 0 {
            if let Some(c) = visit(n, g, &mut state, &mut Vec::new()) {
                return Some(c);
            }
        }
    }
    None
}

/// A cycle in words, with the file that makes each step.
fn describe(c: &[String], g: &Graph) -> String {
    c.windows(2)
        .map(|w| format!("{} -> {} ({})", w[0], w[1], g[&w[0]][&w[1]]))
        .collect::<Vec<_>>()
        .join(", ")
}

/// The layers DEVELOPERS.md lists, bottom first: the lines of the fenced
/// block after the line `Layers, bottom to top`, each `name: module module ...`.
fn documented_layers() -> Vec<(String, Vec<String>)> {
    let text = std::fs::read_to_string(Path::new(env!("CARGO_MANIFEST_DIR")).join("DEVELOPERS.md"))
        .unwrap();
    let start = text
        .find("Layers, bottom to top")
        .expect("DEVELOPERS.md lists its layers");
    let block = text[start..]
        .split("```")
        .nth(1)
        .expect("a fenced block of layers");
    block
        .lines()
        .filter_map(|l| l.split_once(':'))
        .map(|(name, mods)| {
            (
                name.trim().to_string(),
                mods.split_whitespace().map(String::from).collect(),
            )
        })
        .collect()
}

#[test]
fn cycle_finder_finds_a_three_module_cycle_and_accepts_a_chain() {
    let edge = |a: &str, b: &str, g: &mut Graph| {
        g.entry(a.into())
            .or_default()
            .insert(b.into(), format!("{a}.rs"));
    };
    let mut g = Graph::new();
    edge("plan", "plot", &mut g);
    edge("plot", "result", &mut g);
    edge("result", "field", &mut g);
    assert_eq!(find_cycle(&g), None);
    edge("result", "plan", &mut g);
    let c = find_cycle(&g).expect("plan -> plot -> result -> plan");
    assert_eq!(c, ["plan", "plot", "result", "plan"]);
    assert_eq!(
        describe(&c, &g),
        "plan -> plot (plan.rs), plot -> result (plot.rs), result -> plan (result.rs)"
    );
}

#[test]
fn use_paths_are_read_through_groups_comments_and_test_modules() {
    let code = "use crate::{fill, stats::{A, B}, io::Table};\n\
                // crate::plan in a comment\n\
                let x = crate::robust::median(&mut v);\n\
                #[cfg(test)]\nmod tests { use crate::derive::derive; }\n\
                #[cfg(test)]\nmod bench;\n";
    let (code, test_files) = strip_test_modules(&strip_comments(code));
    assert_eq!(test_files, ["bench"]);
    let used: Vec<String> = used_modules(&code).into_iter().collect();
    assert_eq!(used, ["fill", "io", "robust", "stats"]);
}

#[test]
fn top_level_modules_form_no_cycle() {
    let g = graph(&src_dir());
    assert!(
        g.len() > 10,
        "read the dependencies of {} modules only",
        g.len()
    );
    if let Some(c) = find_cycle(&g) {
        panic!(
            "the modules depend on each other in a circle: {}",
            describe(&c, &g)
        );
    }
}

#[test]
fn every_dependency_points_down_the_documented_layers() {
    let g = graph(&src_dir());
    let layers = documented_layers();
    let lib = std::fs::read_to_string(src_dir().join("lib.rs")).unwrap();
    let mods = modules(&strip_test_modules(&lib).0);
    let level: BTreeMap<&str, usize> = layers
        .iter()
        .enumerate()
        .flat_map(|(k, (_, ms))| ms.iter().map(move |m| (m.as_str(), k)))
        .collect();
    let missing: Vec<&String> = mods
        .iter()
        .filter(|m| !level.contains_key(m.as_str()))
        .collect();
    assert!(
        missing.is_empty(),
        "DEVELOPERS.md's layers leave out {missing:?}"
    );
    let mut upward = Vec::new();
    for (a, deps) in &g {
        for (b, file) in deps {
            if level[b.as_str()] > level[a.as_str()] {
                upward.push(format!(
                    "{a} ({}) -> {b} ({}) in {file}",
                    layers[level[a.as_str()]].0,
                    layers[level[b.as_str()]].0
                ));
            }
        }
    }
    assert!(
        upward.is_empty(),
        "dependencies pointing up the layers of DEVELOPERS.md: {upward:#?}"
    );
}
