//! Recordings of several traces and axes: the kind 8 records of a recording
//! ([`recording::kind::TRACES_AXES`], layout in the table of [`recording`]).
//!
//! A scan of cuts records its first trace as ordinary sweep records (kind 2) and its first
//! axis as ordinary position records (kind 3), so that every reader of recordings still
//! reads them; the rest travels in kind 8 records beside them:
//!
//! - names (sub-kind 0, once, after the header): the trace names, the first being the
//!   sweep records' (e.g. `["S21", "S31"]`), and the axis names, the first being the
//!   position records' (e.g. `["azimuth", "elevation"]`);
//! - further traces (sub-kind 1, after each sweep record): the other traces of sweep
//!   `index`, each of the grid's K points;
//! - further axes (sub-kind 2, after each position record): the other axes' angles at the
//!   same instant.
//!
//! [`Traces::collect`] gathers them from a read recording.

use std::collections::BTreeMap;

use num_complex::Complex32;
use serde::{Deserialize, Serialize};

use crate::formats::recording::{self, Fault, Record};

/// Sub-kind of the names record.
pub const SUB_NAMES: u8 = 0;
/// Sub-kind of a further-traces record.
pub const SUB_TRACES: u8 = 1;
/// Sub-kind of a further-axes record.
pub const SUB_AXES: u8 = 2;

/// The names of a recording's traces and axes, the first of each being those of the
/// ordinary sweep and position records.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
pub struct Names {
    /// Trace names, e.g. `["S21", "S31"]` or `["co", "cross"]`.
    pub traces: Vec<String>,
    /// Axis names, e.g. `["azimuth", "elevation"]`.
    pub axes: Vec<String>,
}

/// One kind 8 record.
#[derive(Debug, Clone, PartialEq)]
pub enum TracesRecord {
    /// The names.
    Names(Names),
    /// The further traces of sweep `index`.
    Traces {
        /// The sweep record's index.
        index: u32,
        /// Each further trace's K values.
        traces: Vec<Vec<Complex32>>,
    },
    /// The further axes of the position sample at `t_us`.
    Axes {
        /// The position record's instant, µs.
        t_us: u64,
        /// Axis 2, 3, … in degrees.
        angles_deg: Vec<f64>,
    },
}

fn bad(msg: String) -> Fault {
    Fault::BadPayload(msg)
}

struct Take<'a> {
    p: &'a [u8],
    at: usize,
}

impl Take<'_> {
    fn bytes<const N: usize>(&mut self) -> Result<[u8; N], Fault> {
        let b = self
            .p
            .get(self.at..self.at + N)
            .ok_or_else(|| bad("traces-and-axes record too short".into()))?;
        self.at += N;
        let mut a = [0u8; N];
        a.copy_from_slice(b);
        Ok(a)
    }
    fn left(&self) -> usize {
        self.p.len() - self.at
    }
}

impl TracesRecord {
    /// As a recording record (kind 8).
    pub fn to_record(&self) -> Record {
        let mut p = Vec::new();
        match self {
            Self::Names(n) => {
                p.push(SUB_NAMES);
                p.extend_from_slice(&serde_json::to_vec(n).unwrap_or_default());
            }
            Self::Traces { index, traces } => {
                p.push(SUB_TRACES);
                p.extend_from_slice(&index.to_le_bytes());
                p.push(traces.len().min(255) as u8);
                for t in traces.iter().take(255) {
                    p.extend_from_slice(&(t.len() as u32).to_le_bytes());
                    for v in t {
                        p.extend_from_slice(&v.re.to_le_bytes());
                        p.extend_from_slice(&v.im.to_le_bytes());
                    }
                }
            }
            Self::Axes { t_us, angles_deg } => {
                p.push(SUB_AXES);
                p.extend_from_slice(&t_us.to_le_bytes());
                p.push(angles_deg.len().min(255) as u8);
                for a in angles_deg.iter().take(255) {
                    p.extend_from_slice(&a.to_le_bytes());
                }
            }
        }
        Record::Unknown {
            kind: recording::kind::TRACES_AXES,
            payload: p,
        }
    }

    /// Reads a kind 8 record; `None` for any other record.
    pub fn from_record(r: &Record) -> Option<Result<Self, Fault>> {
        match r {
            Record::Unknown { kind, payload } if *kind == recording::kind::TRACES_AXES => {
                Some(Self::decode(payload))
            }
            _ => None,
        }
    }

    /// Decodes a kind 8 payload.
    pub fn decode(p: &[u8]) -> Result<Self, Fault> {
        let (&sub, rest) = p
            .split_first()
            .ok_or_else(|| bad("empty traces-and-axes record".into()))?;
        let mut c = Take { p: rest, at: 0 };
        let r = match sub {
            SUB_NAMES => {
                let n: Names = serde_json::from_slice(rest)
                    .map_err(|e| bad(format!("traces-and-axes names JSON: {e}")))?;
                return Ok(Self::Names(n));
            }
            SUB_TRACES => {
                let index = u32::from_le_bytes(c.bytes()?);
                let [t] = c.bytes::<1>()?;
                let mut traces = Vec::with_capacity(usize::from(t));
                for _ in 0..t {
                    let k = u32::from_le_bytes(c.bytes()?) as usize;
                    if k.saturating_mul(8) > c.left() {
                        return Err(bad(format!(
                            "further trace says {k} points but {} bytes are left",
                            c.left()
                        )));
                    }
                    let mut v = Vec::with_capacity(k);
                    for _ in 0..k {
                        let re = f32::from_le_bytes(c.bytes()?);
                        v.push(Complex32::new(re, f32::from_le_bytes(c.bytes()?)));
                    }
                    traces.push(v);
                }
                Self::Traces { index, traces }
            }
            SUB_AXES => {
                let t_us = u64::from_le_bytes(c.bytes()?);
                let [n] = c.bytes::<1>()?;
                let mut angles_deg = Vec::with_capacity(usize::from(n));
                for _ in 0..n {
                    angles_deg.push(f64::from_le_bytes(c.bytes()?));
                }
                Self::Axes { t_us, angles_deg }
            }
            s => return Err(bad(format!("unknown traces-and-axes sub-kind {s}"))),
        };
        if c.left() != 0 {
            return Err(bad(format!(
                "{} bytes left over after a traces-and-axes record",
                c.left()
            )));
        }
        Ok(r)
    }
}

/// The kind 8 content of a recording, gathered.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Traces {
    /// The names, if a names record was read.
    pub names: Option<Names>,
    /// Further traces by sweep index.
    pub further: BTreeMap<u32, Vec<Vec<Complex32>>>,
    /// Further axes by instant, µs.
    pub axes: BTreeMap<u64, Vec<f64>>,
    /// Kind 8 records whose payload did not read, with their byte offsets.
    pub faults: Vec<(u64, Fault)>,
}

impl Traces {
    /// Gathers the kind 8 records of `records` (as read by [`recording::recover`]).
    pub fn collect(records: &[(u64, Record)]) -> Self {
        let mut out = Self::default();
        for (at, r) in records {
            match TracesRecord::from_record(r) {
                None => {}
                Some(Err(f)) => out.faults.push((*at, f)),
                Some(Ok(TracesRecord::Names(n))) => out.names = Some(n),
                Some(Ok(TracesRecord::Traces { index, traces })) => {
                    out.further.insert(index, traces);
                }
                Some(Ok(TracesRecord::Axes { t_us, angles_deg })) => {
                    out.axes.insert(t_us, angles_deg);
                }
            }
        }
        out
    }

    /// Whether the recording holds any further trace or axis.
    pub fn is_empty(&self) -> bool {
        self.names.is_none() && self.further.is_empty() && self.axes.is_empty()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn each_sub_kind_reads_back_and_bad_payloads_are_faults() {
        let recs = [
            TracesRecord::Names(Names {
                traces: vec!["S21".into(), "S31".into()],
                axes: vec!["azimuth".into(), "elevation".into()],
            }),
            TracesRecord::Traces {
                index: 7,
                traces: vec![vec![Complex32::new(0.5, -0.25), Complex32::new(1.0, 2.0)]],
            },
            TracesRecord::Axes {
                t_us: 123_456,
                angles_deg: vec![45.0, -3.5],
            },
        ];
        for r in &recs {
            let rec = r.to_record();
            assert_eq!(rec.kind(), 8);
            // Through the recording's own framing and decoding.
            let frame = rec.frame();
            let (back, used) = recording::read_record(&frame, 0).unwrap();
            assert_eq!(used, frame.len());
            assert_eq!(TracesRecord::from_record(&back).unwrap().unwrap(), *r);
        }
        // Byte layout of a further-traces record (table in formats::recording).
        let p = recs[1].to_record().payload();
        assert_eq!(p[0], SUB_TRACES);
        assert_eq!(&p[1..5], &7u32.to_le_bytes());
        assert_eq!(p[5], 1);
        assert_eq!(&p[6..10], &2u32.to_le_bytes());
        assert_eq!(&p[10..14], &0.5f32.to_le_bytes());
        assert_eq!(p.len(), 1 + 4 + 1 + 4 + 16);
        for bad in [
            vec![],
            vec![9],
            vec![SUB_TRACES, 0, 0, 0, 0, 1, 9, 0, 0, 0],
            vec![SUB_AXES, 0, 0, 0, 0, 0, 0, 0, 0, 1, 0],
            vec![SUB_NAMES, b'{'],
        ] {
            assert!(
                matches!(TracesRecord::decode(&bad), Err(Fault::BadPayload(_))),
                "{bad:?}"
            );
        }
        let mut extra = recs[2].to_record().payload();
        extra.push(0);
        assert!(TracesRecord::decode(&extra).is_err());
    }
}
