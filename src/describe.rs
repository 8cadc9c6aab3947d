//! Plain words for resolved parameters: the number formatting shared by
//! the stages' `describe` functions (`curlew check`, the report), and the
//! tick labels of figures (`tick`), which the stages' messages use too.
//!
//! Owns no parameters: each stage describes its own `Params` beside their
//! definition, in SI with the unit written out.

/// `x` with at most `digits` significant digits (at least 1) and no
/// trailing zeros: 0.005000000000000001 → "0.005", 2.0 → "2", 1.25e-7 →
/// "1.25e-7". Magnitudes below 1e-3 or from 1e6 up use an exponent. NaN
/// and infinities print as Rust does ("NaN", "inf", "-inf"); never panics.
pub fn num(x: f64, digits: usize) -> String {
    let digits = digits.max(1);
    if !x.is_finite() {
        return format!("{x}");
    }
    if x == 0.0 {
        return "0".into();
    }
    let e = x.abs().log10().floor() as i32;
    if !(-3..6).contains(&e) {
        let s = format!("{x:.prec$e}", prec = digits - 1);
        return match s.split_once('e') {
            Some((m, exp)) => format!("{}e{exp}", trim(m)),
            None => s,
        };
    }
    let d = (digits as i32 - 1 - e).max(0) as usize;
    trim(&format!("{x:.d$}")).to_string()
}

/// A fraction as a percentage: 0.95 → "95 %".
pub(crate) fn percent(f: f64) -> String {
    format!("{} %", num(100.0 * f, 3))
}

/// Drops trailing zeros of a decimal fraction, and a bare point.
fn trim(s: &str) -> &str {
    if s.contains('.') {
        s.trim_end_matches('0').trim_end_matches('.')
    } else {
        s
    }
}

/// A tick label: at most six decimals, trailing zeros dropped; scientific
/// notation outside 1e-3..1e5.
pub(crate) fn tick(v: f64) -> String {
    tick_in(v, 0.0)
}

/// `tick` on an axis spanning `span`: values below 1e-9·span print as 0
/// (the floating-point residue of a tick at zero).
pub(crate) fn tick_in(v: f64, span: f64) -> String {
    if v == 0.0 || !v.is_finite() || v.abs() < 1e-9 * span.abs() {
        return "0".into();
    }
    if !(1e-3..1e5).contains(&v.abs()) {
        return format!("{v:.1e}");
    }
    let s = format!("{v:.6}");
    let s = s.trim_end_matches('0').trim_end_matches('.');
    if s == "-0" {
        "0".into()
    } else {
        s.to_string()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn numbers_read_as_written_by_hand() {
        assert_eq!(num(0.1 * 2e-5 / 4e-4, 3), "0.005");
        assert_eq!(num(2.0, 3), "2");
        assert_eq!(num(-1.5, 3), "-1.5");
        assert_eq!(num(1.25e-7, 3), "1.25e-7");
        assert_eq!(num(1.0e-7, 3), "1e-7");
        assert_eq!(num(0.004_999_99, 3), "0.005");
        assert_eq!(num(9.9996, 3), "10");
        assert_eq!(num(123_456.0, 3), "123456");
        assert_eq!(num(2.5e6, 3), "2.5e6");
        assert_eq!(num(0.0, 3), "0");
        assert_eq!(num(f64::NAN, 3), "NaN");
        assert_eq!(num(f64::INFINITY, 3), "inf");
        assert_eq!(percent(0.95), "95 %");
        assert_eq!(percent(0.025), "2.5 %");
    }
}
