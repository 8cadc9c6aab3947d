//! Numbers parsed straight from a cell's bytes: the plain-decimal fast
//! path (Clinger 1990) with SWAR digit runs, and `fast-float2` for the
//! rest (the method is in the parent module's doc).

/// Powers of ten that are exact doubles (10^0 ..= 10^22).
const POW10: [f64; 23] = [
    1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10, 1e11, 1e12, 1e13, 1e14, 1e15, 1e16,
    1e17, 1e18, 1e19, 1e20, 1e21, 1e22,
];

/// Powers of ten as integers (10^0 ..= 10^19).
const POW10_U64: [u64; 20] = {
    let mut t = [1u64; 20];
    let mut k = 1;
    while k < 20 {
        t[k] = t[k - 1] * 10;
        k += 1;
    }
    t
};

/// The run of ASCII digits starting at `b[p]`: its value (wrapping when
/// longer than 19 digits, which the caller rejects), its length and the
/// index after it. Eight bytes at a time where eight are left (SWAR: the
/// first non-digit byte is found from a mask, and the digits before it are
/// combined by three multiplications, as in Lemire's "parse eight digits";
/// common practice), byte by byte otherwise.
#[inline(always)]
pub(super) fn digit_run(b: &[u8], mut p: usize) -> (u64, usize, usize) {
    let start = p;
    let mut m: u64 = 0;
    while p + 8 <= b.len() {
        let x = u64::from_le_bytes(b[p..p + 8].try_into().expect("eight bytes"));
        let a = x ^ 0x3030_3030_3030_3030; // digits -> 0..9 in their byte
                                           // high bit of a byte set iff that byte is not a digit; carries only
                                           // leave bytes that are already non-digits, so the lowest flagged
                                           // byte is exact
        let non = (a.wrapping_add(0x7676_7676_7676_7676) | a) & 0x8080_8080_8080_8080;
        let c = (non.trailing_zeros() / 8) as usize; // digits in this word
        if c == 0 {
            return (m, p - start, p);
        }
        // the c digits to the top bytes (low bytes become leading zeros)
        let mut v = a << (8 * (8 - c));
        v = (v & 0x0F0F_0F0F_0F0F_0F0F).wrapping_mul(2561) >> 8;
        v = (v & 0x00FF_00FF_00FF_00FF).wrapping_mul(6_553_601) >> 16;
        v = (v & 0x0000_FFFF_0000_FFFF).wrapping_mul(42_949_672_960_001) >> 32;
        m = m.wrapping_mul(POW10_U64[c]).wrapping_add(v);
        p += c;
        if c < 8 {
            return (m, p - start, p);
        }
    }
    while p < b.len() {
        let c = b[p].wrapping_sub(b'0');
        if c >= 10 {
            break;
        }
        m = m.wrapping_mul(10).wrapping_add(c as u64);
        p += 1;
    }
    (m, p - start, p)
}

/// The number at the start of `b` and how many bytes it used, or `None`.
///
/// Fast path for the plain decimals PIV exports are made of, `[+-]digits
/// [.digits]` with at most 19 digits and no exponent: the digits are read
/// into an integer `m` and, when `m <= 2^53` and there are at most 22
/// fraction digits `f`, the value is `m / 10^f`. Both operands are exact
/// doubles and IEEE division rounds correctly, so this is the correctly
/// rounded value of the decimal string (Clinger 1990, "How to read floating
/// point numbers accurately", PLDI, the "fast path"), bit for bit what the
/// general parser gives. Everything else (exponents, long digit strings,
/// inf, nan) goes to `fast-float2`.
#[inline]
pub(super) fn parse_partial(b: &[u8]) -> Option<(f64, usize)> {
    parse_number(b).map(|(x, used, _)| (x, used))
}

/// `parse_partial`, and whether the value came from the plain-decimal fast
/// path (then it is finite).
#[inline(always)]
pub(super) fn parse_number(b: &[u8]) -> Option<(f64, usize, bool)> {
    let n = b.len();
    let mut p = 0;
    let neg = match b.first() {
        Some(b'-') => {
            p = 1;
            true
        }
        Some(b'+') => {
            p = 1;
            false
        }
        _ => false,
    };
    // Digits accumulate with wrapping arithmetic; more than 19 of them (where
    // it could wrap) leave the fast path below.
    let (int, int_digits, q) = digit_run(b, p);
    let mut m = int;
    let mut digits = int_digits;
    p = q;
    let mut frac = 0usize;
    if p < n && b[p] == b'.' {
        let (f, fd, q) = digit_run(b, p + 1);
        // 10^fd fits u64 exactly for fd <= 19; more digits leave the fast path
        m = m.wrapping_mul(POW10_U64[fd.min(19)]).wrapping_add(f);
        frac = fd;
        digits += fd;
        p = q;
    }
    let simple = digits > 0
        && digits <= 19
        && m <= 1 << 53
        && frac <= 22
        && (p == n || !matches!(b[p], b'e' | b'E' | b'.'));
    if simple {
        let x = m as f64 / POW10[frac];
        return Some((if neg { -x } else { x }, p, true));
    }
    fast_float2::parse_partial::<f64, _>(b)
        .ok()
        .map(|(x, used)| (x, used, false))
}
