//! Finding the line of a key in the pipeline text, for errors raised after
//! the TOML was read (range checks name the key, `[section] key = value`,
//! and this adds where it is written).
//!
//! Method: the message's first `[section] key` (or `[section] a.b`) gives
//! the section and the key's last part; the key's line is the first line
//! `key = ...` (or `key=`, or inside an inline table `{ key = ... }`) after
//! a header `[section...]` or `[[section...]]` and before the next header
//! of another section. Without a key, the section's header line. Nothing
//! found: no line (the message still names the key).

/// The 1-based line the message's key is written on, if found.
pub(crate) fn line_of(text: &str, message: &str) -> Option<usize> {
    let open = message.find('[')?;
    let close = open + message[open..].find(']')?;
    let section = message[open + 1..close].trim_matches(['[', ']']).trim();
    let after = message[close..].trim_start_matches(']').trim_start();
    let key_path: String = after
        .chars()
        .take_while(|c| c.is_ascii_alphanumeric() || *c == '_' || *c == '.')
        .collect();
    let key = key_path.rsplit('.').next().unwrap_or("");
    // The value the message quotes (`key = 'v'` or `key = v`), if any.
    let value: String = after[key_path.len()..]
        .trim_start()
        .strip_prefix('=')
        .map(|v| {
            v.trim_start()
                .trim_start_matches(['\'', '"'])
                .chars()
                .take_while(|c| !matches!(c, '\'' | '"' | ' ' | ':' | ';' | ','))
                .collect()
        })
        .unwrap_or_default();
    let with_value = find(text, section, key, &value);
    with_value.or_else(|| find(text, section, key, ""))
}

/// The line of `key` (holding `value`, when not empty) in `section`, else
/// the section's first header line.
fn find(text: &str, section: &str, key: &str, value: &str) -> Option<usize> {
    let mut in_section = false;
    let mut header_line = None;
    for (k, line) in text.lines().enumerate() {
        let t = line.trim_start();
        if t.starts_with('[') {
            let name = t.trim_start_matches('[');
            let name = name.split(']').next().unwrap_or("").trim();
            in_section = name == section || name.starts_with(&format!("{section}."));
            if in_section && header_line.is_none() {
                header_line = Some(k + 1);
            }
            continue;
        }
        if in_section && !key.is_empty() && has_key(t, key) && t.contains(value) {
            return Some(k + 1);
        }
    }
    if value.is_empty() {
        header_line
    } else {
        None
    }
}

/// Whether `line` assigns `key` (at its start or inside an inline table).
fn has_key(line: &str, key: &str) -> bool {
    let mut rest = line;
    while let Some(p) = rest.find(key) {
        let before = rest[..p].chars().last();
        let after = rest[p + key.len()..].trim_start();
        let starts = before.is_none_or(|c| c == '{' || c == ',' || c == '.' || c == ' ');
        if starts && after.starts_with('=') {
            return true;
        }
        rest = &rest[p + key.len()..];
    }
    false
}

#[cfg(test)]
mod tests {
    use super::line_of;

    const TEXT: &str = "[campaign]\nname = \"t\"\n\n[smoothing]\nmethod = \"gaussian\"\nsigma = 1e4\n\n\
                        [validation]\nmedian = { eps = -1, threshold = 2 }\n\n[figures]\nvorticity_limit = 1\n";

    #[test]
    fn keys_are_found_in_their_section() {
        assert_eq!(
            line_of(TEXT, "[smoothing] sigma = 10000 is larger"),
            Some(6)
        );
        assert_eq!(line_of(TEXT, "[validation] median.eps = -1 must"), Some(9));
        assert_eq!(line_of(TEXT, "[figures] vorticity_limit = 1e300"), Some(12));
        // a key not written (a default) gives the section's header
        assert_eq!(line_of(TEXT, "[smoothing] half_width = 3"), Some(4));
        assert_eq!(line_of(TEXT, "no section named"), None);
        let runs = "[[run]]\nid = \"a\"\n[[run]]\nid = \"b/c\"\n";
        assert_eq!(line_of(runs, "[[run]] id = 'b/c' must be"), Some(4));
    }
}
