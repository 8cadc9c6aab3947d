//! The partial-state format: a `RunAccumulator` as bytes, for shards.
//!
//! Layout (all integers and floats little-endian; f64 as IEEE-754 bits, so
//! a round trip is exact):
//!
//! ```text
//! offset  size  content
//! 0       8     magic b"CURLEWPS" (curlew partial statistics)
//! 8       4     format version, u32 (FORMAT_VERSION)
//! 12      8     payload length L, u64
//! 20      L     payload
//! 20+L    32    SHA-256 of the payload
//! ```
//!
//! Payload, in order (str = u64 byte length + UTF-8; vec = u64 count +
//! f64s; opt = u8 0/1 then the value):
//! 1. the accumulation `Params` as JSON (str);
//! 2. grid: nx, ny (u64), x0, y0, dx, dy (f64);
//! 3. quantities: u64 count, names (str), then their units (str);
//! 4. span: opt(u64 first index, u64 last index); unphased, outside (u64);
//! 5. clock: frames, timed (u64), opt(u64, f64) first, opt(u64, f64) last,
//!    u8 irregular, u64 cluster count, each f64 step and u64 count;
//! 6. ensemble moments (below); 7. phase bins: u64 count, each opt(moments);
//! 8. lags: opt(max_lag, len (u64), shift vec, u64 block count, each block
//!    s, p, q, c vecs, head then tail: u64 count, each u64 index + vec);
//! 9. probe traces: u64 count, each u64 node, u64 rows, each u64 index and
//!    3 f64 (u, v, omega).
//!
//! Moments: frames (f64); u and v scalars; cuv, n_valid, n_replaced,
//! n_filled vecs; u64 quantity count and each scalar. A scalar is fifteen
//! vecs: n, mean, m2, m3, m4, unc2, unc_n, bias2, bias_n, tb_n, tb_mean,
//! tb_m2, tb_var, shift, shift_n (version 1: the first nine).
//!
//! Reading checks the magic, the version (another version is an error
//! naming both), the length (truncation is an error), the checksum, and
//! every vector length against the grid; no partially read state escapes.

use sha2::{Digest, Sha256};

use super::lags::{Clock, LagFrame, LagSums, Lags};
use super::moments::{Moments, Scalar, PARTS_V1};
use super::{Params, RunAccumulator, Trace};
use crate::error::{Error, Result};
use crate::field::Grid;

/// The first eight bytes of a partial-state file.
pub(crate) const FORMAT_MAGIC: &[u8; 8] = b"CURLEWPS";
/// The version this build writes. It reads this one and every earlier one
/// (`READS`): version 1 lacks the signed-truncation and noise-shift sums of
/// a scalar (read as zeros: such a state finishes with the version-1 rule
/// for the systematic part, the RMS of the per-frame truncation estimates).
pub(crate) const FORMAT_VERSION: u32 = 2;
/// The versions this build reads.
const READS: [u32; 2] = [1, 2];

/// The payload writer; `.1` is the number of vectors per scalar.
struct W(Vec<u8>, usize);

impl W {
    fn u8(&mut self, x: u8) {
        self.0.push(x);
    }
    fn u64(&mut self, x: u64) {
        self.0.extend_from_slice(&x.to_le_bytes());
    }
    fn f64(&mut self, x: f64) {
        self.0.extend_from_slice(&x.to_le_bytes());
    }
    fn str(&mut self, s: &str) {
        self.u64(s.len() as u64);
        self.0.extend_from_slice(s.as_bytes());
    }
    fn vec(&mut self, v: &[f64]) {
        self.u64(v.len() as u64);
        v.iter().for_each(|&x| self.f64(x));
    }
    fn opt_pair(&mut self, p: Option<(u64, f64)>) {
        match p {
            Some((a, b)) => {
                self.u8(1);
                self.u64(a);
                self.f64(b);
            }
            None => self.u8(0),
        }
    }
    fn scalar(&mut self, s: &Scalar) {
        s.parts().iter().take(self.1).for_each(|v| self.vec(v));
    }
    fn moments(&mut self, m: &Moments) {
        self.f64(m.frames);
        self.scalar(&m.u);
        self.scalar(&m.v);
        for v in [&m.cuv, &m.n_valid, &m.n_replaced, &m.n_filled] {
            self.vec(v);
        }
        self.u64(m.q.len() as u64);
        m.q.iter().for_each(|q| self.scalar(q));
    }
    fn frames<'a>(&mut self, fs: impl ExactSizeIterator<Item = &'a LagFrame>) {
        self.u64(fs.len() as u64);
        for f in fs {
            self.u64(f.index);
            self.vec(&f.values);
        }
    }
    /// The frame clock (record 5).
    fn clock(&mut self, c: &Clock) {
        self.u64(c.frames);
        self.u64(c.timed);
        self.opt_pair(c.first);
        self.opt_pair(c.last);
        self.u8(u8::from(c.irregular));
        self.u64(c.steps.len() as u64);
        for &(s, n) in &c.steps {
            self.f64(s);
            self.u64(n);
        }
    }
    /// The lag sums (record 8), when there are any.
    fn lags(&mut self, lags: Option<&Lags>) {
        match lags {
            Some(l) => {
                self.u8(1);
                self.u64(l.max_lag as u64);
                self.u64(l.len as u64);
                self.vec(&l.shift);
                self.u64(l.sums.len() as u64);
                for s in &l.sums {
                    [&s.s, &s.p, &s.q, &s.c].iter().for_each(|v| self.vec(v));
                }
                self.frames(l.head.iter());
                self.frames(l.tail.iter());
            }
            None => self.u8(0),
        }
    }
    /// The probe traces (record 9).
    fn traces(&mut self, traces: &[Trace]) {
        self.u64(traces.len() as u64);
        for t in traces {
            self.u64(t.node as u64);
            self.u64(t.rows.len() as u64);
            for (i, r) in &t.rows {
                self.u64(*i);
                r.iter().for_each(|&x| self.f64(x));
            }
        }
    }
}

struct R<'a> {
    b: &'a [u8],
    at: usize,
    /// Vectors per scalar in this file's version.
    parts: usize,
}

fn bad(what: impl Into<String>) -> Error {
    Error::data(format!("partial statistics: {}", what.into()))
}

impl R<'_> {
    fn take(&mut self, n: usize) -> Result<&[u8]> {
        if self.b.len() - self.at < n {
            return Err(bad("payload ends early (damaged file)"));
        }
        let s = &self.b[self.at..self.at + n];
        self.at += n;
        Ok(s)
    }
    fn u8(&mut self) -> Result<u8> {
        Ok(self.take(1)?[0])
    }
    fn u64(&mut self) -> Result<u64> {
        Ok(u64::from_le_bytes(self.take(8)?.try_into().unwrap()))
    }
    fn count(&mut self, elem: usize) -> Result<usize> {
        let n = self.u64()? as usize;
        if n.checked_mul(elem)
            .is_none_or(|b| b > self.b.len() - self.at)
        {
            return Err(bad(format!("count {n} exceeds the remaining payload")));
        }
        Ok(n)
    }
    fn f64(&mut self) -> Result<f64> {
        Ok(f64::from_le_bytes(self.take(8)?.try_into().unwrap()))
    }
    fn str(&mut self) -> Result<String> {
        let n = self.count(1)?;
        String::from_utf8(self.take(n)?.to_vec()).map_err(|_| bad("a name is not UTF-8"))
    }
    fn vec(&mut self, len: usize, what: &str) -> Result<Vec<f64>> {
        let n = self.count(8)?;
        if n != len {
            return Err(bad(format!("{what} has {n} values, expected {len}")));
        }
        (0..n).map(|_| self.f64()).collect()
    }
    fn flag(&mut self) -> Result<bool> {
        match self.u8()? {
            0 => Ok(false),
            1 => Ok(true),
            x => Err(bad(format!("flag byte {x}, expected 0 or 1"))),
        }
    }
    fn opt_pair(&mut self) -> Result<Option<(u64, f64)>> {
        Ok(if self.flag()? {
            Some((self.u64()?, self.f64()?))
        } else {
            None
        })
    }
    fn scalar(&mut self, nodes: usize) -> Result<Scalar> {
        let mut s = Scalar::new(nodes);
        for v in s.parts_mut().into_iter().take(self.parts) {
            *v = self.vec(nodes, "a moment vector")?;
        }
        Ok(s)
    }
    fn moments(&mut self, nodes: usize, nq: usize) -> Result<Moments> {
        let mut m = Moments::new(nodes, 0);
        m.frames = self.f64()?;
        m.u = self.scalar(nodes)?;
        m.v = self.scalar(nodes)?;
        for v in [
            &mut m.cuv,
            &mut m.n_valid,
            &mut m.n_replaced,
            &mut m.n_filled,
        ] {
            *v = self.vec(nodes, "a count vector")?;
        }
        let n = self.count(8)?;
        if n != nq {
            return Err(bad(format!("{n} quantity moments, expected {nq}")));
        }
        m.q = (0..n).map(|_| self.scalar(nodes)).collect::<Result<_>>()?;
        Ok(m)
    }
    fn frames(&mut self, len: usize) -> Result<Vec<LagFrame>> {
        let n = self.count(16)?;
        (0..n)
            .map(|_| {
                Ok(LagFrame {
                    index: self.u64()?,
                    values: self.vec(len, "a lag frame")?,
                })
            })
            .collect()
    }
}

impl RunAccumulator {
    /// The partial state in the documented format (module `codec`).
    pub(crate) fn to_bytes(&self) -> Vec<u8> {
        self.to_bytes_as(FORMAT_VERSION)
    }

    /// The partial state as format `version` wrote it (1 drops the sums
    /// version 1 did not have; for the compatibility tests).
    pub(crate) fn to_bytes_as(&self, version: u32) -> Vec<u8> {
        let parts = if version == 1 {
            PARTS_V1
        } else {
            Scalar::new(0).parts().len()
        };
        let mut w = W(Vec::new(), parts);
        w.str(&serde_json::to_string(&self.params).expect("params serialise"));
        let g = &self.grid;
        w.u64(g.nx as u64);
        w.u64(g.ny as u64);
        [g.x0, g.y0, g.dx, g.dy].iter().for_each(|&x| w.f64(x));
        w.u64(self.quantities.len() as u64);
        self.quantities.iter().for_each(|q| w.str(q));
        self.units.iter().for_each(|u| w.str(u));
        match self.span {
            Some((a, b)) => {
                w.u8(1);
                w.u64(a);
                w.u64(b);
            }
            None => w.u8(0),
        }
        w.u64(self.unphased);
        w.u64(self.outside);
        w.clock(&self.clock);
        w.moments(&self.ens);
        w.u64(self.bins.len() as u64);
        for b in &self.bins {
            match b {
                Some(m) => {
                    w.u8(1);
                    w.moments(m);
                }
                None => w.u8(0),
            }
        }
        w.lags(self.lags.as_ref());
        w.traces(&self.traces);
        let payload = w.0;
        let mut out = Vec::with_capacity(payload.len() + 52);
        out.extend_from_slice(FORMAT_MAGIC);
        out.extend_from_slice(&version.to_le_bytes());
        out.extend_from_slice(&(payload.len() as u64).to_le_bytes());
        out.extend_from_slice(&payload);
        out.extend_from_slice(&Sha256::digest(&payload));
        out
    }

    /// Reads a partial state written by `to_bytes`; an error (kind Data) on
    /// another format, another version, truncation or damage.
    pub(crate) fn from_bytes(b: &[u8]) -> Result<Self> {
        let (version, payload) = open_payload(b)?;
        let parts = if version == 1 {
            PARTS_V1
        } else {
            Scalar::new(0).parts().len()
        };
        let mut r = R {
            b: payload,
            at: 0,
            parts,
        };
        let params: Params =
            serde_json::from_str(&r.str()?).map_err(|e| bad(format!("parameters: {e}")))?;
        let (grid, nodes) = r.grid()?;
        let nq = r.count(8)?;
        let quantities = (0..nq).map(|_| r.str()).collect::<Result<Vec<_>>>()?;
        let units = (0..nq).map(|_| r.str()).collect::<Result<Vec<_>>>()?;
        let span = if r.flag()? {
            Some((r.u64()?, r.u64()?))
        } else {
            None
        };
        let (unphased, outside) = (r.u64()?, r.u64()?);
        let clock = r.clock()?;
        let ens = r.moments(nodes, nq)?;
        let bins = r.bins(&params, nodes, nq)?;
        let lags = r.lags(&params, nodes)?;
        let traces = r.traces(&params, nodes)?;
        if r.at != payload.len() {
            return Err(bad(format!(
                "{} unread bytes after the last record",
                payload.len() - r.at
            )));
        }
        Ok(RunAccumulator {
            grid,
            params,
            quantities,
            units,
            ens,
            bins,
            unphased,
            outside,
            lags,
            clock,
            traces,
            span,
        })
    }
}

/// The format version and the payload of a partial-state file, after
/// checking its magic bytes, version, length and checksum.
fn open_payload(b: &[u8]) -> Result<(u32, &[u8])> {
    if b.len() < 8 || &b[..8] != FORMAT_MAGIC {
        return Err(bad(
            "not a curlew partial-statistics file (wrong magic bytes)",
        ));
    }
    if b.len() < 20 {
        return Err(bad(format!(
            "truncated: {} bytes, the header alone is 20",
            b.len()
        )));
    }
    let version = u32::from_le_bytes(b[8..12].try_into().unwrap());
    if !READS.contains(&version) {
        return Err(bad(format!(
            "format version {version}, but this curlew ({}) reads versions 1 to {FORMAT_VERSION}; merge with the curlew that wrote it",
            crate::VERSION
        )));
    }
    let len = u64::from_le_bytes(b[12..20].try_into().unwrap());
    let want = (len as u128) + 52;
    if (b.len() as u128) != want {
        return Err(bad(format!(
            "truncated or padded: {} bytes, expected {want}",
            b.len()
        )));
    }
    let payload = &b[20..20 + len as usize];
    if Sha256::digest(payload).as_slice() != &b[20 + len as usize..] {
        return Err(bad("checksum mismatch (damaged file)"));
    }
    Ok((version, payload))
}

impl R<'_> {
    /// The grid (record 2) and its number of nodes.
    fn grid(&mut self) -> Result<(Grid, usize)> {
        let (nx, ny) = (self.u64()? as usize, self.u64()? as usize);
        let grid = Grid {
            nx,
            ny,
            x0: self.f64()?,
            y0: self.f64()?,
            dx: self.f64()?,
            dy: self.f64()?,
        };
        let nodes = nx
            .checked_mul(ny)
            .ok_or_else(|| bad("grid size overflows"))?;
        Ok((grid, nodes))
    }

    /// The frame clock (record 5).
    fn clock(&mut self) -> Result<Clock> {
        Ok(Clock {
            frames: self.u64()?,
            timed: self.u64()?,
            first: self.opt_pair()?,
            last: self.opt_pair()?,
            irregular: self.flag()?,
            steps: {
                let n = self.count(16)?;
                (0..n)
                    .map(|_| Ok((self.f64()?, self.u64()?)))
                    .collect::<Result<Vec<_>>>()?
            },
        })
    }

    /// The phase bins' moments (record 7), as many as `params` asks for.
    fn bins(&mut self, params: &Params, nodes: usize, nq: usize) -> Result<Vec<Option<Moments>>> {
        let nb = self.count(1)?;
        if nb != params.phase_bins {
            return Err(bad(format!(
                "{nb} phase bins, expected {}",
                params.phase_bins
            )));
        }
        (0..nb)
            .map(|_| {
                if self.flag()? {
                    self.moments(nodes, nq).map(Some)
                } else {
                    Ok(None)
                }
            })
            .collect::<Result<Vec<_>>>()
    }

    /// The lag sums (record 8), when present; checked against the grid and
    /// `params.max_lag`.
    fn lags(&mut self, params: &Params, nodes: usize) -> Result<Option<Lags>> {
        if !self.flag()? {
            return Ok(None);
        }
        let max_lag = self.u64()? as usize;
        let len = self.u64()? as usize;
        if len % nodes.max(1) != 0 || max_lag != params.max_lag {
            return Err(bad("lag sums do not match the grid or max_lag"));
        }
        let shift = self.vec(len, "the lag shifts")?;
        let ns = self.count(32)?;
        let sums = (0..ns)
            .map(|_| {
                Ok(LagSums {
                    s: self.vec(len, "lag sums")?,
                    p: self.vec(len, "lag sums")?,
                    q: self.vec(len, "lag sums")?,
                    c: self.vec(len, "lag sums")?,
                })
            })
            .collect::<Result<Vec<_>>>()?;
        let head = self.frames(len)?;
        let tail = self.frames(len)?.into();
        Ok(Some(Lags {
            max_lag,
            len,
            shift,
            sums,
            head,
            tail,
        }))
    }

    /// The probe traces (record 9), one per probe of `params`, each on a
    /// node of the grid.
    fn traces(&mut self, params: &Params, nodes: usize) -> Result<Vec<Trace>> {
        let nt = self.count(16)?;
        if nt != params.probes.len() {
            return Err(bad(format!(
                "{nt} probe traces, expected {}",
                params.probes.len()
            )));
        }
        let mut traces = Vec::with_capacity(nt);
        for _ in 0..nt {
            let node = self.u64()? as usize;
            if node >= nodes {
                return Err(bad(format!(
                    "probe node {node} outside a grid of {nodes} nodes"
                )));
            }
            let n = self.count(32)?;
            let rows = (0..n)
                .map(|_| Ok((self.u64()?, [self.f64()?, self.f64()?, self.f64()?])))
                .collect::<Result<Vec<_>>>()?;
            traces.push(Trace { node, rows });
        }
        Ok(traces)
    }
}
