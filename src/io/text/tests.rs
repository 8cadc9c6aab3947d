//! Tests of `text` (moved out of text.rs to keep it under 600 lines).

use super::number::digit_run;
use super::*;

type Row = std::result::Result<(usize, Vec<Option<f64>>), (usize, String)>;

fn row(line: &str, format: Format, ncells: usize) -> Row {
    let role_of: Vec<u8> = (0..ncells as u8)
        .map(|k| if k < 7 { k } else { NONE })
        .collect();
    let mut vals = [Some(-99.0); 8];
    let n = scan_row(line.as_bytes(), format, &role_of, &mut vals)?;
    Ok((n, vals[..ncells.min(7)].to_vec()))
}

#[test]
fn rows_split_into_cells_with_quotes_blanks_and_empties() {
    let r = row(" 1.5 ,\"2\", ,nan,-3e2,", Format::Csv, 6).unwrap();
    assert_eq!(
        r,
        (
            6,
            vec![Some(1.5), Some(2.0), None, None, Some(-300.0), None]
        )
    );
    let r = row("1\t\t2.25\t", Format::Tsv, 4).unwrap();
    assert_eq!(r, (4, vec![Some(1.0), None, Some(2.25), None]));
    let r = row("\t 1  2\t\t-0.5 NaN  ", Format::Text, 4).unwrap();
    assert_eq!(r, (4, vec![Some(1.0), Some(2.0), Some(-0.5), None]));
    // A number followed by text is not a number; nor is a decimal comma.
    assert_eq!(
        row("1,1.5abc", Format::Csv, 2).unwrap_err(),
        (1, "'1.5abc' is not a number".into())
    );
    assert_eq!(
        row("1 2,5", Format::Text, 2).unwrap_err(),
        (1, "'2,5' is not a number".into())
    );
    assert_eq!(
        row("1,inf", Format::Csv, 2).unwrap_err(),
        (1, "'inf' is not a finite number".into())
    );
    // Cells without a role are counted, not parsed.
    assert_eq!(
        row("1,2,x,y,z,w,v,junk,more", Format::Csv, 9)
            .unwrap_err()
            .0,
        2
    );
    let role_of = [0u8, NONE, 1];
    let mut vals = [None; 8];
    assert_eq!(
        scan_row(b"4,junk,5,extra", Format::Csv, &role_of, &mut vals),
        Ok(4)
    );
    assert_eq!((vals[0], vals[1]), (Some(4.0), Some(5.0)));
}

#[test]
fn digit_runs_of_every_length_and_position() {
    let mut r = crate::testutil::rng(8);
    for _ in 0..20_000 {
        let len = rand::Rng::random_range(&mut r, 0..30usize);
        let alphabet = b"0123456789.,-e /:";
        let s: Vec<u8> = (0..len)
            .map(|_| alphabet[rand::Rng::random_range(&mut r, 0..alphabet.len())])
            .collect();
        for p in 0..=len {
            let mut q = p;
            let mut want = 0u64;
            while q < len && s[q].is_ascii_digit() {
                want = want.wrapping_mul(10).wrapping_add((s[q] - b'0') as u64);
                q += 1;
            }
            let (got, n, end) = digit_run(&s, p);
            assert_eq!(
                (n, end),
                (q - p, q),
                "{:?} at {p}",
                String::from_utf8_lossy(&s)
            );
            if n <= 19 {
                assert_eq!(got, want, "{:?} at {p}", String::from_utf8_lossy(&s));
            }
        }
    }
}

#[test]
fn numbers_parse_bit_for_bit_like_std() {
    // Reference: the standard library's correctly rounded `str::parse`.
    use rand::Rng;
    let mut rng = crate::testutil::rng(7);
    for _ in 0..20_000 {
        let v = f64::from_bits(rng.random::<u64>());
        if !v.is_finite() {
            continue;
        }
        for s in [format!("{v}"), format!("{v:e}"), format!("{v:.7}")] {
            let want = s.parse::<f64>().unwrap();
            assert_eq!(
                number(s.as_bytes()).unwrap().unwrap().to_bits(),
                want.to_bits(),
                "{s}"
            );
        }
    }
    // The plain-decimal fast path: fixed-point strings of every length
    // against std (which rounds correctly).
    for _ in 0..20_000 {
        let v: f64 = rng.random_range(-200.0..200.0);
        let digits = rng.random_range(0..18usize);
        for s in [format!("{v:.digits$}"), format!("{:.digits$}", v * 1e-3)] {
            let want = s.parse::<f64>().unwrap();
            assert_eq!(
                number(s.as_bytes()).unwrap().unwrap().to_bits(),
                want.to_bits(),
                "{s}"
            );
            let (got, used) = parse_partial(s.as_bytes()).unwrap();
            assert_eq!((got.to_bits(), used), (want.to_bits(), s.len()), "{s}");
        }
    }
    for (s, want) in [
        ("9007199254740993", 9007199254740992.0),
        ("0.1000000000000000055511151231257827", 0.1),
        ("12345678901234567890.5", 12345678901234567890.5),
        ("1.5e3", 1500.0),
        ("+1.5", 1.5),
        ("-.5", -0.5),
        ("5.", 5.0),
        ("1E-5", 1e-5),
        ("-0", -0.0),
    ] {
        assert_eq!(number(s.as_bytes()).unwrap(), Some(want), "{s}");
    }
    for s in ["", "nan", "NaN", "NAN", "-nan"] {
        assert_eq!(number(s.as_bytes()).unwrap(), None, "{s}");
    }
    for s in [
        "abc",
        "1,5",
        "1.5.5",
        "0x10",
        "1e",
        "1_0",
        "1d0",
        "inf",
        "-Infinity",
        "1e400",
    ] {
        assert!(number(s.as_bytes()).is_err(), "{s}");
    }
}
