//! Small HTML helpers: escaping, relative URLs, tables, and a generic
//! rendering of JSON values (for the manifest, whose layout is the io
//! stage's).

use std::fmt::Write;

/// Escapes text for HTML element content and attribute values.
pub(crate) fn esc(s: &str) -> String {
    let mut o = String::with_capacity(s.len());
    for c in s.chars() {
        match c {
            '&' => o.push_str("&amp;"),
            '<' => o.push_str("&lt;"),
            '>' => o.push_str("&gt;"),
            '"' => o.push_str("&quot;"),
            '\'' => o.push_str("&#39;"),
            _ => o.push(c),
        }
    }
    o
}

/// A relative path as a URL: '/'-separated, every byte outside the
/// unreserved set (RFC 3986 §2.3) percent-encoded.
pub(crate) fn url(p: &std::path::Path) -> String {
    let parts: Vec<String> = p
        .components()
        .map(|c| c.as_os_str().to_string_lossy().into_owned())
        .collect();
    let mut o = String::new();
    for (n, part) in parts.iter().enumerate() {
        if n > 0 {
            o.push('/');
        }
        for b in part.bytes() {
            if b.is_ascii_alphanumeric() || b"-._~".contains(&b) {
                o.push(b as char);
            } else {
                let _ = write!(o, "%{b:02X}");
            }
        }
    }
    o
}

/// An id for anchors: letters, digits and '-'.
pub(crate) fn anchor(prefix: &str, s: &str) -> String {
    let mut o = format!("{prefix}-");
    for c in s.chars() {
        if c.is_ascii_alphanumeric() {
            o.push(c.to_ascii_lowercase());
        } else {
            o.push('-');
        }
    }
    o
}

/// A table with a header row; cells are already HTML. Cells whose text
/// starts with a digit, sign or NaN are right-aligned (class `n`).
pub(crate) fn table(out: &mut String, header: &[&str], rows: &[Vec<String>]) {
    out.push_str("<table>\n<thead><tr>");
    for h in header {
        let _ = write!(out, "<th>{}</th>", esc(h));
    }
    out.push_str("</tr></thead>\n<tbody>\n");
    for r in rows {
        out.push_str("<tr>");
        for c in r {
            let numeric = c
                .chars()
                .next()
                .is_some_and(|ch| ch.is_ascii_digit() || ch == '-' || ch == '−' || ch == '+');
            if numeric {
                let _ = write!(out, "<td class=\"n\">{c}</td>");
            } else {
                let _ = write!(out, "<td>{c}</td>");
            }
        }
        out.push_str("</tr>\n");
    }
    out.push_str("</tbody>\n</table>\n");
}

/// A number with `digits` significant digits, or an en dash when unknown.
pub(crate) fn num(x: f64, digits: usize) -> String {
    if !x.is_finite() {
        return "–".into();
    }
    if x == 0.0 {
        return "0".into();
    }
    if x.fract() == 0.0 && x.abs() < 1e6 {
        return format!("{x:.0}");
    }
    let e = x.abs().log10().floor() as i32;
    if !(-3..6).contains(&e) {
        return format!("{x:.prec$e}", prec = digits.saturating_sub(1));
    }
    let d = (digits as i32 - 1 - e).max(0) as usize;
    format!("{x:.d$}")
}

/// Renders any JSON value: objects as definition lists, arrays of objects
/// as tables, long strings with newlines as preformatted text.
pub(crate) fn json(out: &mut String, v: &serde_json::Value, depth: usize) {
    use serde_json::Value as V;
    match v {
        V::Null => out.push('–'),
        V::Bool(b) => out.push_str(if *b { "yes" } else { "no" }),
        V::Number(n) => out.push_str(&esc(&n.to_string())),
        V::String(s) if s.contains('\n') => {
            let _ = write!(out, "<pre>{}</pre>", esc(s));
        }
        V::String(s) => out.push_str(&esc(s)),
        V::Array(a) if !a.is_empty() && a.iter().all(|x| x.is_object()) && depth < 4 => {
            let mut keys: Vec<String> = Vec::new();
            for x in a {
                for k in x.as_object().unwrap().keys() {
                    if !keys.contains(k) {
                        keys.push(k.clone());
                    }
                }
            }
            let rows: Vec<Vec<String>> = a
                .iter()
                .map(|x| {
                    keys.iter()
                        .map(|k| {
                            let mut c = String::new();
                            json(&mut c, x.get(k).unwrap_or(&V::Null), depth + 1);
                            c
                        })
                        .collect()
                })
                .collect();
            let hk: Vec<&str> = keys.iter().map(|s| s.as_str()).collect();
            table(out, &hk, &rows);
        }
        V::Array(a) => {
            out.push_str("<ul class=\"plain\">");
            for x in a {
                out.push_str("<li>");
                json(out, x, depth + 1);
                out.push_str("</li>");
            }
            out.push_str("</ul>");
        }
        V::Object(m) => {
            out.push_str("<dl>");
            for (k, x) in m {
                let _ = write!(out, "<dt>{}</dt><dd>", esc(k));
                json(out, x, depth + 1);
                out.push_str("</dd>");
            }
            out.push_str("</dl>");
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn escaping_and_urls() {
        assert_eq!(esc("a<b & \"c\""), "a&lt;b &amp; &quot;c&quot;");
        assert_eq!(
            url(std::path::Path::new("run 1/figures/ω.png")),
            "run%201/figures/%CF%89.png"
        );
        assert_eq!(num(0.0123456, 3), "0.0123");
        assert_eq!(num(1234.4, 3), "1234");
        assert_eq!(num(100.0, 4), "100");
        assert_eq!(num(f64::NAN, 3), "–");
        assert_eq!(num(1.5e-7, 3), "1.50e-7");
    }
}
