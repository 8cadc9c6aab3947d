//! NetCDF-3 files (the classic and the 64-bit offset formats): an
//! in-memory dataset, its encoding and its decoding, in pure Rust.
//!
//! Owns: the byte layout. Does not own: what the variables mean (`cf`
//! builds curlew's outputs; readers map variables to columns).
//!
//! # Format
//!
//! The NetCDF Classic Format Specification (Unidata, "NetCDF Users Guide",
//! appendix "File Format Specifications"; from memory of the published
//! grammar): a header — magic `CDF` and a version byte (1 classic, 2
//! 64-bit offset), the record count, the dimension list, the global
//! attributes, the variable list (name, dimension ids, attributes, type,
//! size, data offset) — then the data of each fixed-size variable,
//! big-endian, each padded to 4 bytes, then the records (the variables
//! whose first dimension is the unlimited one, interleaved record by
//! record). Names and attribute values are padded to 4 bytes with zeros.
//!
//! Written: version 2 (64-bit offsets, so no size limit matters for a
//! grid), fixed-size variables of doubles and 32-bit ints, text and double
//! attributes; no record dimension. Read: versions 1 and 2, every numeric
//! type (byte, short, int, float, double, as f64), text, fixed and record
//! variables. The streaming form (record count `-1`) reads as the records
//! the file holds.
//!
//! Edge behaviour: a truncated or inconsistent header is an error saying
//! which part; a value past the file's end is an error, never a panic.

/// One attribute value: text, or numbers (stored as doubles).
#[derive(Debug, Clone, PartialEq)]
pub enum Attr {
    /// A text (`NC_CHAR`) attribute such as `units`.
    Text(String),
    /// A numeric attribute of any type, converted to f64 (written as
    /// `NC_DOUBLE`).
    Num(Vec<f64>),
}

/// A variable's values.
#[derive(Debug, Clone, PartialEq)]
pub enum Data {
    /// Doubles (`NC_DOUBLE`); what the reader returns for every numeric
    /// type.
    F64(Vec<f64>),
    /// 32-bit integers (`NC_INT`), for writing integer columns such as
    /// counts.
    I32(Vec<i32>),
}

impl Data {
    fn len(&self) -> usize {
        match self {
            Data::F64(v) => v.len(),
            Data::I32(v) => v.len(),
        }
    }
    /// The values as f64.
    pub fn to_f64(&self) -> Vec<f64> {
        match self {
            Data::F64(v) => v.clone(),
            Data::I32(v) => v.iter().map(|&x| x as f64).collect(),
        }
    }
}

/// One variable: its dimensions (indices into `Dataset::dims`, slowest
/// first), attributes and values (row-major over the dimensions).
#[derive(Debug, Clone, PartialEq)]
pub struct Var {
    /// The variable's name (an output column, or the name an input's
    /// `columns` refers to).
    pub name: String,
    /// Its dimensions as indices into `Dataset::dims`, slowest first.
    pub dims: Vec<usize>,
    /// Its attributes (name, value), in file order.
    pub attrs: Vec<(String, Attr)>,
    /// Its values, row-major over `dims`.
    pub data: Data,
}

impl Var {
    /// The attribute called `name`; `None` when the variable has none.
    pub fn attr(&self, name: &str) -> Option<&Attr> {
        self.attrs.iter().find(|(n, _)| n == name).map(|(_, a)| a)
    }
    /// A text attribute.
    pub fn text(&self, name: &str) -> Option<&str> {
        match self.attr(name) {
            Some(Attr::Text(s)) => Some(s),
            _ => None,
        }
    }
}

/// A NetCDF-3 dataset in memory. `unlimited` is the index of the record
/// dimension, if any (its length in `dims` is the record count).
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Dataset {
    /// The dimensions (name, length), in file order.
    pub dims: Vec<(String, usize)>,
    /// Index into `dims` of the record (unlimited) dimension; `None`: the
    /// file has none.
    pub unlimited: Option<usize>,
    /// The global attributes (name, value), in file order.
    pub attrs: Vec<(String, Attr)>,
    /// The variables, in file order.
    pub vars: Vec<Var>,
}

const NC_DIMENSION: u32 = 10;
const NC_VARIABLE: u32 = 11;
const NC_ATTRIBUTE: u32 = 12;
const NC_BYTE: u32 = 1;
const NC_CHAR: u32 = 2;
const NC_SHORT: u32 = 3;
const NC_INT: u32 = 4;
const NC_FLOAT: u32 = 5;
const NC_DOUBLE: u32 = 6;

fn pad4(n: usize) -> usize {
    n.div_ceil(4) * 4
}

impl Dataset {
    /// The variable called `name`; `None` when there is none.
    pub fn var(&self, name: &str) -> Option<&Var> {
        self.vars.iter().find(|v| v.name == name)
    }
    /// The index into `dims` of the dimension called `name`; `None` when
    /// there is none.
    pub fn dim_index(&self, name: &str) -> Option<usize> {
        self.dims.iter().position(|(n, _)| n == name)
    }
    /// The shape of a variable (lengths of its dimensions).
    pub(crate) fn shape(&self, v: &Var) -> Vec<usize> {
        v.dims.iter().map(|&d| self.dims[d].1).collect()
    }

    /// Encodes the dataset (version 2, fixed-size variables only). Panics
    /// if a variable's length is not the product of its dimensions (a
    /// programming error).
    pub(crate) fn to_bytes(&self) -> Vec<u8> {
        assert!(
            self.unlimited.is_none(),
            "the writer has no record dimension"
        );
        for v in &self.vars {
            let n: usize = self.shape(v).iter().product();
            assert_eq!(n, v.data.len(), "variable '{}' length", v.name);
        }
        let zeros = vec![0u64; self.vars.len()];
        let mut at = self.encode_header(&zeros).len() as u64;
        let mut begins = Vec::with_capacity(self.vars.len());
        for v in &self.vars {
            begins.push(at);
            let size = match v.data {
                Data::F64(_) => 8,
                Data::I32(_) => 4,
            };
            at += pad4(v.data.len() * size) as u64;
        }
        let mut b = self.encode_header(&begins);
        b.reserve(at as usize - b.len());
        for v in &self.vars {
            match &v.data {
                Data::F64(d) => d.iter().for_each(|x| b.extend_from_slice(&x.to_be_bytes())),
                Data::I32(d) => d.iter().for_each(|x| b.extend_from_slice(&x.to_be_bytes())),
            }
            b.resize(pad4(b.len()), 0);
        }
        b
    }

    /// The encoded header (magic, dimensions, global attributes and
    /// variables) with variable `k`'s data starting at byte `begins[k]`.
    fn encode_header(&self, begins: &[u64]) -> Vec<u8> {
        let mut b = Vec::new();
        b.extend_from_slice(b"CDF\x02");
        put_u32(&mut b, 0);
        if self.dims.is_empty() {
            put_u32(&mut b, 0);
            put_u32(&mut b, 0);
        } else {
            put_u32(&mut b, NC_DIMENSION);
            put_u32(&mut b, self.dims.len() as u32);
            for (name, len) in &self.dims {
                put_name(&mut b, name);
                put_u32(&mut b, *len as u32);
            }
        }
        put_attrs(&mut b, &self.attrs);
        if self.vars.is_empty() {
            put_u32(&mut b, 0);
            put_u32(&mut b, 0);
        } else {
            put_u32(&mut b, NC_VARIABLE);
            put_u32(&mut b, self.vars.len() as u32);
            for (v, &begin) in self.vars.iter().zip(begins) {
                put_name(&mut b, &v.name);
                put_u32(&mut b, v.dims.len() as u32);
                for &d in &v.dims {
                    put_u32(&mut b, d as u32);
                }
                put_attrs(&mut b, &v.attrs);
                let (ty, size) = match v.data {
                    Data::F64(_) => (NC_DOUBLE, 8),
                    Data::I32(_) => (NC_INT, 4),
                };
                put_u32(&mut b, ty);
                put_u32(&mut b, pad4(v.data.len() * size) as u32);
                b.extend_from_slice(&begin.to_be_bytes());
            }
        }
        b
    }

    /// Decodes a NetCDF-3 file. The error says what is wrong; the caller
    /// adds the file's name.
    pub fn from_bytes(bytes: &[u8]) -> Result<Dataset, String> {
        let (mut ds, layout) = Self::header(bytes, bytes.len())?;
        for (k, l) in layout.iter().enumerate() {
            let n = if l.rec { ds.shape(&ds.vars[k])[0] } else { 1 };
            let mut out = Vec::with_capacity(l.per * n);
            for rec in 0..n {
                let raw = bytes.get(l.range(rec)).ok_or_else(|| {
                    format!(
                        "variable '{}' runs past the end of the file",
                        ds.vars[k].name
                    )
                })?;
                decode(l.ty, raw, &mut out);
            }
            if l.ty == NC_CHAR {
                out.clear();
            }
            ds.vars[k].data = Data::F64(out);
        }
        Ok(ds)
    }

    /// Decodes the header at the start of `bytes` (a prefix of a file of
    /// `file_len` bytes): the dataset without values, and where each
    /// variable's values lie. A prefix too short is an error saying the
    /// header is truncated.
    pub(crate) fn header(bytes: &[u8], file_len: usize) -> Result<(Dataset, Vec<Layout>), String> {
        let mut r = Reader { b: bytes, p: 0 };
        let wide = read_magic(&mut r, bytes)?;
        let numrecs = r.u32()?;
        let mut ds = Dataset::default();
        read_dims(&mut r, &mut ds)?;
        ds.attrs = r.attrs()?;
        let layout = read_vars(&mut r, &mut ds, wide)?;
        // The record count: as stated, or (streaming, -1) as the file holds.
        let rec_size: usize = ds
            .vars
            .iter()
            .zip(&layout)
            .filter(|(v, _)| ds.is_rec(v))
            .map(|(_, l)| l.1)
            .sum();
        let n_rec_vars = ds.vars.iter().filter(|v| ds.is_rec(v)).count();
        if let Some(u) = ds.unlimited {
            let recs = if numrecs == u32::MAX {
                let first = ds
                    .vars
                    .iter()
                    .zip(&layout)
                    .filter(|(v, _)| ds.is_rec(v))
                    .map(|(_, l)| l.2)
                    .min();
                match first {
                    Some(b) if rec_size > 0 => file_len.saturating_sub(b) / rec_size,
                    _ => 0,
                }
            } else {
                numrecs as usize
            };
            ds.dims[u].1 = recs;
        }
        let out = ds.layouts(&layout, rec_size, n_rec_vars)?;
        Ok((ds, out))
    }

    /// True when `v`'s first dimension is the record (unlimited) one.
    fn is_rec(&self, v: &Var) -> bool {
        v.dims.first().is_some_and(|&d| Some(d) == self.unlimited)
    }

    /// Where each variable's values lie, from its (type, vsize, begin) in
    /// the header; `rec_size` is the bytes of one record, `n_rec_vars` the
    /// record variables.
    fn layouts(
        &self,
        layout: &[(u32, usize, usize)],
        rec_size: usize,
        n_rec_vars: usize,
    ) -> Result<Vec<Layout>, String> {
        let mut out = Vec::with_capacity(layout.len());
        for (k, &(ty, _, begin)) in layout.iter().enumerate() {
            let v = &self.vars[k];
            let shape = self.shape(v);
            let size = type_size(ty)
                .ok_or_else(|| format!("variable '{}' has unknown type {ty}", v.name))?;
            let rec = self.is_rec(v);
            let per: usize = if rec {
                shape[1..].iter().product()
            } else {
                shape.iter().product()
            };
            // a lone record variable is not padded between records
            let stride = match (rec, n_rec_vars) {
                (false, _) => 0,
                (true, 1) => per * size,
                (true, _) => rec_size,
            };
            out.push(Layout {
                ty,
                size,
                begin,
                per,
                rec,
                stride,
            });
        }
        Ok(out)
    }
}

/// Checks the magic `CDF` and the version byte; true for the 64-bit offset
/// format (version 2).
fn read_magic(r: &mut Reader<'_>, bytes: &[u8]) -> Result<bool, String> {
    let magic = r
        .take(4)
        .map_err(|_| "not a NetCDF file: too short".to_string())?;
    if &magic[..3] != b"CDF" {
        let hdf5 = bytes.starts_with(b"\x89HDF");
        return Err(if hdf5 {
            "this is an HDF5 file (NetCDF-4 or MAT 7.3), not NetCDF-3".into()
        } else {
            "not a NetCDF-3 file (it does not start with 'CDF')".into()
        });
    }
    match magic[3] {
        1 => Ok(false),
        2 => Ok(true),
        v => Err(format!("NetCDF-3 version byte {v} is not 1 or 2")),
    }
}

/// Reads the dimension list into `ds` (a length 0 is the record dimension).
fn read_dims(r: &mut Reader<'_>, ds: &mut Dataset) -> Result<(), String> {
    let (tag, n) = (r.u32()?, r.u32()? as usize);
    if tag == NC_DIMENSION {
        for k in 0..n {
            let name = r.name()?;
            let len = r.u32()? as usize;
            if len == 0 {
                ds.unlimited = Some(k);
            }
            ds.dims.push((name, len));
        }
    } else if tag != 0 || n != 0 {
        return Err("the dimension list is malformed".into());
    }
    Ok(())
}

/// Reads the variable list into `ds` (without values); returns each
/// variable's (type, vsize, begin).
fn read_vars(
    r: &mut Reader<'_>,
    ds: &mut Dataset,
    wide: bool,
) -> Result<Vec<(u32, usize, usize)>, String> {
    let (tag, n) = (r.u32()?, r.u32()? as usize);
    if tag != NC_VARIABLE && (tag != 0 || n != 0) {
        return Err("the variable list is malformed".into());
    }
    let mut layout = Vec::with_capacity(n);
    for _ in 0..if tag == NC_VARIABLE { n } else { 0 } {
        let name = r.name()?;
        let nd = r.u32()? as usize;
        let mut dims = Vec::with_capacity(nd.min(64));
        for _ in 0..nd {
            let d = r.u32()? as usize;
            if d >= ds.dims.len() {
                return Err(format!(
                    "variable '{name}' names dimension {d}, which does not exist"
                ));
            }
            dims.push(d);
        }
        let attrs = r.attrs()?;
        let ty = r.u32()?;
        let vsize = r.u32()? as usize;
        let begin = if wide { r.u64()? } else { r.u32()? as u64 };
        layout.push((ty, vsize, begin as usize));
        ds.vars.push(Var {
            name,
            dims,
            attrs,
            data: Data::F64(Vec::new()),
        });
    }
    Ok(layout)
}

/// Where a variable's values lie in the file.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct Layout {
    ty: u32,
    size: usize,
    begin: usize,
    /// Values per record (record variables) or in all (fixed ones).
    pub per: usize,
    /// Whether the variable's first dimension is the record dimension.
    pub rec: bool,
    stride: usize,
}

impl Layout {
    /// The bytes of record `rec` (of the whole variable when fixed: `rec`
    /// 0).
    pub(crate) fn range(&self, rec: usize) -> std::ops::Range<usize> {
        let at = self.begin + rec * self.stride;
        at..at + self.per * self.size
    }

    /// The bytes of values `first..first + n` of a fixed variable (in
    /// row-major order), or of record `rec`'s values `first..first + n`.
    pub(crate) fn values(&self, rec: usize, first: usize, n: usize) -> std::ops::Range<usize> {
        let at = self.begin + rec * self.stride + first * self.size;
        at..at + n * self.size
    }

    /// Decodes raw bytes of this variable's type into `out`.
    pub(crate) fn decode(&self, raw: &[u8], out: &mut Vec<f64>) {
        decode(self.ty, raw, out)
    }
}

fn type_size(ty: u32) -> Option<usize> {
    match ty {
        NC_BYTE | NC_CHAR => Some(1),
        NC_SHORT => Some(2),
        NC_INT | NC_FLOAT => Some(4),
        NC_DOUBLE => Some(8),
        _ => None,
    }
}

fn decode(ty: u32, raw: &[u8], out: &mut Vec<f64>) {
    match ty {
        NC_BYTE => out.extend(raw.iter().map(|&b| b as i8 as f64)),
        NC_SHORT => out.extend(
            raw.chunks_exact(2)
                .map(|c| i16::from_be_bytes([c[0], c[1]]) as f64),
        ),
        NC_INT => out.extend(
            raw.chunks_exact(4)
                .map(|c| i32::from_be_bytes(c.try_into().unwrap()) as f64),
        ),
        NC_FLOAT => out.extend(
            raw.chunks_exact(4)
                .map(|c| f32::from_be_bytes(c.try_into().unwrap()) as f64),
        ),
        NC_DOUBLE => out.extend(
            raw.chunks_exact(8)
                .map(|c| f64::from_be_bytes(c.try_into().unwrap())),
        ),
        _ => {}
    }
}

fn put_u32(b: &mut Vec<u8>, x: u32) {
    b.extend_from_slice(&x.to_be_bytes());
}

fn put_name(b: &mut Vec<u8>, s: &str) {
    put_u32(b, s.len() as u32);
    b.extend_from_slice(s.as_bytes());
    b.resize(pad4(b.len()), 0);
}

fn put_attrs(b: &mut Vec<u8>, attrs: &[(String, Attr)]) {
    if attrs.is_empty() {
        put_u32(b, 0);
        put_u32(b, 0);
        return;
    }
    put_u32(b, NC_ATTRIBUTE);
    put_u32(b, attrs.len() as u32);
    for (name, a) in attrs {
        put_name(b, name);
        match a {
            Attr::Text(s) => {
                put_u32(b, NC_CHAR);
                put_u32(b, s.len() as u32);
                b.extend_from_slice(s.as_bytes());
            }
            Attr::Num(v) => {
                put_u32(b, NC_DOUBLE);
                put_u32(b, v.len() as u32);
                v.iter().for_each(|x| b.extend_from_slice(&x.to_be_bytes()));
            }
        }
        b.resize(pad4(b.len()), 0);
    }
}

struct Reader<'a> {
    b: &'a [u8],
    p: usize,
}

impl<'a> Reader<'a> {
    fn take(&mut self, n: usize) -> Result<&'a [u8], String> {
        let s = self
            .b
            .get(self.p..self.p.saturating_add(n))
            .ok_or_else(|| "the NetCDF header is truncated".to_string())?;
        self.p += n;
        Ok(s)
    }
    fn u32(&mut self) -> Result<u32, String> {
        Ok(u32::from_be_bytes(self.take(4)?.try_into().unwrap()))
    }
    fn u64(&mut self) -> Result<u64, String> {
        Ok(u64::from_be_bytes(self.take(8)?.try_into().unwrap()))
    }
    fn name(&mut self) -> Result<String, String> {
        let n = self.u32()? as usize;
        let s = String::from_utf8_lossy(self.take(n)?).into_owned();
        self.take(pad4(n) - n)?;
        Ok(s)
    }
    fn attrs(&mut self) -> Result<Vec<(String, Attr)>, String> {
        let (tag, n) = (self.u32()?, self.u32()? as usize);
        if tag != NC_ATTRIBUTE {
            return if tag == 0 && n == 0 {
                Ok(Vec::new())
            } else {
                Err("an attribute list is malformed".into())
            };
        }
        let mut out = Vec::with_capacity(n.min(1024));
        for _ in 0..n {
            let name = self.name()?;
            let ty = self.u32()?;
            let len = self.u32()? as usize;
            let size =
                type_size(ty).ok_or_else(|| format!("attribute '{name}' has unknown type {ty}"))?;
            let raw = self.take(len.saturating_mul(size))?;
            self.take(pad4(len * size) - len * size)?;
            let a = if ty == NC_CHAR {
                Attr::Text(
                    String::from_utf8_lossy(raw)
                        .trim_end_matches('\0')
                        .to_string(),
                )
            } else {
                let mut v = Vec::with_capacity(len);
                decode(ty, raw, &mut v);
                Attr::Num(v)
            };
            out.push((name, a));
        }
        Ok(out)
    }
}

#[cfg(test)]
mod tests;
