//! MATLAB MAT files of level 5 (what MATLAB calls versions 5 and 7, and
//! what `scipy.io.savemat` writes): the numeric arrays of a file, decoded
//! in pure Rust. Version 7 differs from 5 only in that each variable may
//! be one zlib stream (`miCOMPRESSED`), inflated here with `flate2` (its
//! pure-Rust backend; already built for the PNG and parquet writers).
//!
//! Owns: the byte layout. Does not own: what the variables mean (`gridded`
//! maps them to columns).
//!
//! # Format
//!
//! MathWorks, "MAT-File Format" (the level 5 chapter; from memory of the
//! published layout): a 128-byte header — 116 bytes of text starting
//! `MATLAB 5.0 MAT-file`, 8 bytes of subsystem offset, the version
//! `0x0100` and the endian indicator `IM` (little-endian writer) or `MI`
//! (big-endian) — then data elements. Each element has an 8-byte tag
//! (type, byte count) and its data padded to 8 bytes; a "small" element
//! packs a count of at most 4 bytes into the tag's upper half and its data
//! into the tag's second word. A variable is a `miMATRIX` element holding,
//! in order, the array flags (class in the low byte, `0x0800` complex,
//! `0x0200` logical), the dimensions (`miINT32`), the name (`miINT8`) and,
//! for a numeric class, the real part (stored in any numeric type, often a
//! smaller one than the class: MATLAB writes a double array of small
//! integers as `miUINT8`) and, when complex, the imaginary part. Values are
//! in column-major order (the first dimension fastest).
//!
//! Read: numeric and logical arrays of any dimension count (every numeric
//! storage type converted to f64 exactly, 64-bit integers beyond 2^53
//! rounded), either byte order, compressed or not. Other classes (cell,
//! struct, char, sparse, object) are listed by name and class but carry no
//! values. Not read: complex arrays (an error naming the variable), the
//! HDF5-based version 7.3 (recognised and refused by name), version 4.
//!
//! Edge behaviour: a truncated element, a count past the end, a corrupt
//! zlib stream are errors saying which variable or offset; never a panic.

use std::io::Read;

/// One variable of a MAT file.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct MatVar {
    pub name: String,
    /// The MATLAB class number (6 double, 7 single, 8..15 integers, 1 cell,
    /// 2 struct, 4 char, 5 sparse, ...).
    pub class: u8,
    /// Dimensions as MATLAB gives them (rows first).
    pub dims: Vec<usize>,
    /// Values in column-major order (empty for non-numeric classes).
    pub data: Vec<f64>,
}

impl MatVar {
    /// Whether the class is numeric (or logical, stored as uint8).
    pub(crate) fn is_numeric(&self) -> bool {
        (6..=15).contains(&self.class)
    }

    /// The class's MATLAB name, for messages.
    pub(crate) fn class_name(&self) -> &'static str {
        const NAMES: [&str; 16] = [
            "unknown", "cell", "struct", "object", "char", "sparse", "double", "single", "int8",
            "uint8", "int16", "uint16", "int32", "uint32", "int64", "uint64",
        ];
        NAMES.get(self.class as usize).copied().unwrap_or("unknown")
    }
}

const MI_INT8: u32 = 1;
const MI_UINT8: u32 = 2;
const MI_INT16: u32 = 3;
const MI_UINT16: u32 = 4;
const MI_INT32: u32 = 5;
const MI_UINT32: u32 = 6;
const MI_SINGLE: u32 = 7;
const MI_DOUBLE: u32 = 9;
const MI_INT64: u32 = 12;
const MI_UINT64: u32 = 13;
const MI_MATRIX: u32 = 14;
const MI_COMPRESSED: u32 = 15;
const HDF5_MAGIC: &[u8] = b"\x89HDF\r\n\x1a\n";

/// Decodes every variable of a level-5 MAT file whose name `want` accepts
/// (others are listed with their class and dimensions but no values, and
/// compressed ones are inflated only as far as their name). The error says
/// what is wrong; the caller adds the file's name.
pub(crate) fn parse(bytes: &[u8], want: &dyn Fn(&str) -> bool) -> Result<Vec<MatVar>, String> {
    let le = check_header(bytes)?;
    let mut vars = Vec::new();
    let mut p = 128;
    let mut inflated = Vec::new();
    while p < bytes.len() {
        let e = element(bytes, p, le).map_err(|m| format!("at byte {p}: {m}"))?;
        match e.ty {
            MI_MATRIX => vars.push(matrix(e.data, le, want)?),
            MI_COMPRESSED => {
                inflated.clear();
                let whole = inflate(e.data, &mut inflated, le, want)
                    .map_err(|m| format!("at byte {p}: {m}"))?;
                if !whole {
                    // not wanted: listed from its head alone
                    vars.extend(head(&inflated[8..], le).ok().map(|h| h.var));
                } else {
                    let inner = element(&inflated, 0, le)
                        .map_err(|m| format!("in the compressed element at byte {p}: {m}"))?;
                    if inner.ty == MI_MATRIX {
                        vars.push(matrix(inner.data, le, want)?);
                    }
                }
            }
            _ => {} // other top-level elements carry no variable
        }
        p = e.next;
    }
    Ok(vars)
}

/// Checks the 128-byte header; returns whether the file is little-endian.
fn check_header(bytes: &[u8]) -> Result<bool, String> {
    if bytes.len() >= 520 && &bytes[512..520] == HDF5_MAGIC || bytes.starts_with(b"MATLAB 7.3") {
        return Err(
            "this is a MAT version 7.3 file (HDF5 inside), which curlew does not read; \
             save it with -v7 (or -v6) in MATLAB, or use scipy.io.savemat"
                .into(),
        );
    }
    if bytes.starts_with(HDF5_MAGIC) {
        return Err("this is an HDF5 file, not a MAT file of version 5 or 7".into());
    }
    if bytes.len() < 128 || !bytes.starts_with(b"MATLAB 5.0") {
        return Err(
            "not a MAT file of version 5 or 7 (it does not start with 'MATLAB 5.0 MAT-file'; \
             version 4 files are not read)"
                .into(),
        );
    }
    match &bytes[126..128] {
        b"IM" => Ok(true),
        b"MI" => Ok(false),
        other => Err(format!(
            "the MAT header's endian indicator is {:?}, not 'IM' or 'MI'",
            String::from_utf8_lossy(other)
        )),
    }
}

/// A data element: its type, its data and where the next one starts.
struct Element<'a> {
    ty: u32,
    data: &'a [u8],
    next: usize,
}

fn u32_at(b: &[u8], p: usize, le: bool) -> Result<u32, String> {
    let w: [u8; 4] = b
        .get(p..p + 4)
        .and_then(|s| s.try_into().ok())
        .ok_or("the file ends inside an element's tag")?;
    Ok(if le {
        u32::from_le_bytes(w)
    } else {
        u32::from_be_bytes(w)
    })
}

/// The element at `p`: small (count in the tag's upper half, data in its
/// second word) or normal (data padded to 8 bytes; a compressed element's
/// data is not padded).
fn element(b: &[u8], p: usize, le: bool) -> Result<Element<'_>, String> {
    let w0 = u32_at(b, p, le)?;
    if w0 >> 16 != 0 {
        let n = (w0 >> 16) as usize;
        if n > 4 {
            return Err(format!("a small element claims {n} bytes"));
        }
        let data = b
            .get(p + 4..p + 4 + n)
            .ok_or("the file ends inside an element")?;
        return Ok(Element {
            ty: w0 & 0xffff,
            data,
            next: p + 8,
        });
    }
    let n = u32_at(b, p + 4, le)? as usize;
    let data = b.get(p + 8..p + 8 + n).ok_or_else(|| {
        format!(
            "an element of {n} bytes runs past the end ({} bytes)",
            b.len()
        )
    })?;
    let next = if w0 == MI_COMPRESSED {
        p + 8 + n
    } else {
        p + 8 + n.div_ceil(8) * 8
    };
    Ok(Element { ty: w0, data, next })
}

/// Inflates a compressed element into `out`: all of it when the variable
/// is wanted (returns true), else only its first 256 bytes (flags,
/// dimensions and name; returns false).
fn inflate(
    data: &[u8],
    out: &mut Vec<u8>,
    le: bool,
    want: &dyn Fn(&str) -> bool,
) -> Result<bool, String> {
    let mut z = flate2::bufread::ZlibDecoder::new(data);
    let zerr = |e: std::io::Error| format!("the compressed element is corrupt ({e})");
    (&mut z).take(256).read_to_end(out).map_err(zerr)?;
    let is_matrix = out.len() >= 8 && u32_at(out, 0, le)? == MI_MATRIX;
    let skip = is_matrix && head(&out[8..], le).is_ok_and(|h| !want(&h.var.name));
    if skip {
        return Ok(false);
    }
    z.read_to_end(out).map_err(zerr)?;
    Ok(true)
}

/// A matrix's head: the variable without values, its flags word and where
/// its values start.
struct Head {
    var: MatVar,
    flags: u32,
    next: usize,
}

/// Decodes a `miMATRIX` element's flags, dimensions and name.
fn head(b: &[u8], le: bool) -> Result<Head, String> {
    let flags = element(b, 0, le).map_err(|m| format!("a variable's flags: {m}"))?;
    let f = decode_u32(flags.data, le).first().copied().unwrap_or(0);
    let dims_e = element(b, flags.next, le).map_err(|m| format!("a variable's dimensions: {m}"))?;
    let dims = decode(MI_INT32, dims_e.data, le)
        .iter()
        .map(|&d| d.max(0.0) as usize)
        .collect();
    let name_e = element(b, dims_e.next, le).map_err(|m| format!("a variable's name: {m}"))?;
    Ok(Head {
        var: MatVar {
            name: String::from_utf8_lossy(name_e.data).into_owned(),
            class: (f & 0xff) as u8,
            dims,
            data: Vec::new(),
        },
        flags: f,
        next: name_e.next,
    })
}

/// Decodes a `miMATRIX` element's data (values only when `want`ed and
/// numeric).
fn matrix(b: &[u8], le: bool, want: &dyn Fn(&str) -> bool) -> Result<MatVar, String> {
    if b.is_empty() {
        return Ok(MatVar {
            name: String::new(),
            class: 0,
            dims: vec![0, 0],
            data: Vec::new(),
        });
    }
    let Head {
        mut var,
        flags,
        next,
    } = head(b, le)?;
    if !var.is_numeric() || !want(&var.name) {
        return Ok(var);
    }
    if flags & 0x0800 != 0 {
        return Err(format!(
            "variable '{}' is complex; velocity components must be real",
            var.name
        ));
    }
    let real =
        element(b, next, le).map_err(|m| format!("variable '{}': its values: {m}", var.name))?;
    var.data = decode(real.ty, real.data, le);
    let n: usize = var.dims.iter().product();
    if var.data.len() != n {
        return Err(format!(
            "variable '{}' has dimensions {:?} but {} values (storage type {})",
            var.name,
            var.dims,
            var.data.len(),
            real.ty
        ));
    }
    Ok(var)
}

fn decode_u32(raw: &[u8], le: bool) -> Vec<u32> {
    raw.chunks_exact(4)
        .map(|c| {
            let w = c.try_into().unwrap();
            if le {
                u32::from_le_bytes(w)
            } else {
                u32::from_be_bytes(w)
            }
        })
        .collect()
}

/// Decodes `raw` of storage type `ty` into f64 (an unknown type gives no
/// values, which the caller reports as a count mismatch).
fn decode(ty: u32, raw: &[u8], le: bool) -> Vec<f64> {
    macro_rules! conv {
        ($t:ty, $n:expr) => {
            raw.chunks_exact($n)
                .map(|c| {
                    let w = c.try_into().unwrap();
                    (if le {
                        <$t>::from_le_bytes(w)
                    } else {
                        <$t>::from_be_bytes(w)
                    }) as f64
                })
                .collect()
        };
    }
    match ty {
        MI_INT8 => raw.iter().map(|&b| b as i8 as f64).collect(),
        MI_UINT8 => raw.iter().map(|&b| b as f64).collect(),
        MI_INT16 => conv!(i16, 2),
        MI_UINT16 => conv!(u16, 2),
        MI_INT32 => conv!(i32, 4),
        MI_UINT32 => conv!(u32, 4),
        MI_SINGLE => conv!(f32, 4),
        MI_DOUBLE => conv!(f64, 8),
        MI_INT64 => conv!(i64, 8),
        MI_UINT64 => conv!(u64, 8),
        _ => Vec::new(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn header(ind: &[u8; 2]) -> Vec<u8> {
        let mut h = b"MATLAB 5.0 MAT-file, test".to_vec();
        h.resize(124, b' ');
        h.extend_from_slice(&[0, 1]);
        h.extend_from_slice(ind);
        h
    }

    /// A big-endian file written by hand: one 2x3 double matrix `a` with
    /// values stored as uint8 (as MATLAB stores small integers), with a
    /// small-element name.
    #[test]
    fn big_endian_small_elements_and_narrow_storage_decode() {
        let mut m = Vec::new();
        let put = |m: &mut Vec<u8>, x: u32| m.extend_from_slice(&x.to_be_bytes());
        put(&mut m, MI_UINT32);
        put(&mut m, 8);
        put(&mut m, 6); // double
        put(&mut m, 0);
        put(&mut m, MI_INT32);
        put(&mut m, 8);
        put(&mut m, 2);
        put(&mut m, 3);
        put(&mut m, (1 << 16) | MI_INT8); // small: 1 byte
        m.extend_from_slice(b"a\0\0\0");
        put(&mut m, MI_UINT8);
        put(&mut m, 6);
        m.extend_from_slice(&[1, 2, 3, 4, 5, 250, 0, 0]);
        let mut f = header(b"MI");
        put(&mut f, MI_MATRIX);
        put(&mut f, m.len() as u32);
        f.extend_from_slice(&m);
        let v = parse(&f, &|_| true).unwrap();
        assert_eq!(v.len(), 1);
        assert_eq!((v[0].name.as_str(), v[0].dims.clone()), ("a", vec![2, 3]));
        assert_eq!(v[0].data, vec![1.0, 2.0, 3.0, 4.0, 5.0, 250.0]);
    }

    #[test]
    fn hdf5_and_other_files_are_named_for_what_they_are() {
        let mut f = b"MATLAB 7.3 MAT-file, Platform: GLNXA64".to_vec();
        f.resize(512, 0);
        f.extend_from_slice(HDF5_MAGIC);
        let e = parse(&f, &|_| true).unwrap_err();
        assert!(e.contains("7.3") && e.contains("HDF5"), "{e}");
        let e = parse(b"x,y,u,v\n1,2,3,4\n", &|_| true).unwrap_err();
        assert!(e.contains("not a MAT file"), "{e}");
        let mut t = header(b"IM");
        t.extend_from_slice(&MI_MATRIX.to_le_bytes());
        t.extend_from_slice(&1000u32.to_le_bytes());
        let e = parse(&t, &|_| true).unwrap_err();
        assert!(e.contains("runs past the end"), "{e}");
    }
}
