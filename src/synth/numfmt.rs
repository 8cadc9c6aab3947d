//! Fast printing of floats with a fixed number of decimals.
//!
//! Method: the value is scaled by `10^decimals`, rounded to the nearest
//! integer (ties away from zero, `f64::round`) and printed as an integer
//! with the decimal point inserted; trailing zeros of the fraction (and a
//! bare point) are dropped, and a value that rounds to zero prints as `0`.
//! No allocation per value. Values whose scaled magnitude exceeds 2^53, and
//! `decimals = None`, fall back to Rust's shortest round-trip `Display`.
//! Non-finite values print nothing (an empty cell).

/// Decimals that give `digits` significant digits for values of magnitude
/// `scale` (e.g. scale 0.15, 5 digits → 5 decimals), or `None` (shortest
/// exact output) when `digits >= 16`.
pub(crate) fn decimals_for(scale: f64, digits: u32) -> Option<u32> {
    if digits >= 16 {
        return None;
    }
    let e = if scale.is_finite() && scale > 0.0 {
        scale.log10().floor() as i32
    } else {
        0
    };
    Some((digits as i32 - 1 - e).clamp(0, 15) as u32)
}

const POW10: [f64; 16] = [
    1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10, 1e11, 1e12, 1e13, 1e14, 1e15,
];

/// Appends `v` with `decimals` decimals (see the module doc) to `out`.
pub(crate) fn push(out: &mut Vec<u8>, v: f64, decimals: Option<u32>) {
    if !v.is_finite() {
        return;
    }
    let Some(d) = decimals else {
        use std::io::Write;
        let _ = write!(out, "{v}");
        return;
    };
    let scaled = (v * POW10[d as usize]).round();
    if scaled.abs() >= 9.007_199_254_740_992e15 {
        use std::io::Write;
        let _ = write!(out, "{v}");
        return;
    }
    let mut n = scaled as i64;
    if n == 0 {
        out.push(b'0');
        return;
    }
    if n < 0 {
        out.push(b'-');
        n = -n;
    }
    let mut buf = [0u8; 24];
    let mut len = 0;
    let mut m = n as u64;
    while m > 0 {
        buf[len] = b'0' + (m % 10) as u8;
        m /= 10;
        len += 1;
    }
    let d = d as usize;
    // digits are in buf[0..len], least significant first
    let mut skip = 0; // trailing fraction zeros to drop
    while skip < d && skip < len && buf[skip] == b'0' {
        skip += 1;
    }
    if len <= d {
        out.extend_from_slice(b"0.");
        out.extend(std::iter::repeat_n(b'0', d - len));
        out.extend(buf[skip..len].iter().rev());
        return;
    }
    out.extend(buf[d..len].iter().rev());
    if skip < d {
        out.push(b'.');
        out.extend(buf[skip..d].iter().rev());
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn s(v: f64, d: Option<u32>) -> String {
        let mut o = Vec::new();
        push(&mut o, v, d);
        String::from_utf8(o).unwrap()
    }

    #[test]
    fn fixed_decimals_print_like_rounded_decimal_text() {
        assert_eq!(s(0.150123456, Some(5)), "0.15012");
        assert_eq!(s(-0.0012345, Some(5)), "-0.00123");
        assert_eq!(s(20.000000000000004, Some(3)), "20");
        assert_eq!(s(17.5, Some(3)), "17.5");
        assert_eq!(s(-0.000001, Some(3)), "0");
        assert_eq!(s(0.000_05, Some(5)), "0.00005");
        assert_eq!(s(123456.0, Some(0)), "123456");
        assert_eq!(s(f64::NAN, Some(3)), "");
        assert_eq!(s(0.1 + 0.2, None), "0.30000000000000004");
        assert_eq!(s(1e300, Some(5)), format!("{}", 1e300));
        assert_eq!(decimals_for(0.15, 5), Some(5));
        assert_eq!(decimals_for(98.0, 5), Some(3));
        assert_eq!(decimals_for(8.0, 4), Some(3));
        assert_eq!(decimals_for(1.0, 17), None);
    }

    #[test]
    fn printed_values_agree_with_std_formatting() {
        // reference: Rust's own `{:.d$}` (correctly rounded decimal), which
        // may differ from scale-and-round only at exact ties; compare parsed.
        let mut rng = crate::testutil::rng(7);
        use rand::Rng;
        for _ in 0..20000 {
            let v: f64 = (rng.random::<f64>() - 0.5) * 10f64.powi(rng.random_range(-4..4));
            let d = rng.random_range(0..9u32);
            let ours: f64 = s(v, Some(d)).parse().unwrap();
            let theirs: f64 = format!("{v:.*}", d as usize).parse().unwrap();
            let unit = 10f64.powi(-(d as i32));
            let diff = (ours - theirs).abs();
            // equal, or one unit apart at a (binary) tie
            assert!(
                diff <= 1e-9 * unit || (diff - unit).abs() <= 1e-6 * unit,
                "{v} d={d}: {ours} vs {theirs}"
            );
            assert!((ours - v).abs() <= 0.5 * 10f64.powi(-(d as i32)) * (1.0 + 1e-9) + 1e-15);
        }
    }
}
