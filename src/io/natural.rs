//! Natural sort order for frame file names: runs of digits compare as
//! numbers, so `frame_2` comes before `frame_10` (common practice in file
//! managers). Ties (`f01` vs `f1`) fall back to plain byte order, so the
//! order is total and deterministic.

use std::cmp::Ordering;

fn chunks(s: &str) -> impl Iterator<Item = (bool, &str)> {
    let b = s.as_bytes();
    let mut start = 0;
    std::iter::from_fn(move || {
        if start >= b.len() {
            return None;
        }
        let digit = b[start].is_ascii_digit();
        let mut end = start + 1;
        while end < b.len() && b[end].is_ascii_digit() == digit {
            end += 1;
        }
        let c = &s[start..end];
        start = end;
        Some((digit, c))
    })
}

/// Compares two names in natural order.
pub(crate) fn compare(a: &str, b: &str) -> Ordering {
    let mut ia = chunks(a);
    let mut ib = chunks(b);
    loop {
        match (ia.next(), ib.next()) {
            (None, None) => return a.cmp(b),
            (None, Some(_)) => return Ordering::Less,
            (Some(_), None) => return Ordering::Greater,
            (Some((da, ca)), Some((db, cb))) => {
                let o = if da && db {
                    let ta = ca.trim_start_matches('0');
                    let tb = cb.trim_start_matches('0');
                    ta.len().cmp(&tb.len()).then_with(|| ta.cmp(tb))
                } else {
                    ca.cmp(cb)
                };
                if o != Ordering::Equal {
                    return o;
                }
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::compare;

    #[test]
    fn numbers_sort_by_value() {
        let mut v = vec![
            "frame_10.csv",
            "frame_2.csv",
            "frame_1.csv",
            "frame_02.csv",
            "a.csv",
        ];
        v.sort_by(|a, b| compare(a, b));
        assert_eq!(
            v,
            [
                "a.csv",
                "frame_1.csv",
                "frame_02.csv",
                "frame_2.csv",
                "frame_10.csv"
            ]
        );
    }
}
