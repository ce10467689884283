//! The preview record of a closed bin of a scan of cuts (kind 4, [`CutRecord`]): its cut,
//! both axes and every trace's raw and gated values. Framing, CRC and version are those of
//! [`super::preview`]; the layout is in its module docs.

use super::preview::{BinRecord, FreqValue, BIN_FIXED_LEN, BIN_PER_FREQ_LEN, MAX_FREQUENCIES};
use crate::error::{EmitError, FrameError};
use crate::Complex32;

/// Most traces a cut record carries.
pub const MAX_TRACES: usize = 4;
/// Fixed part of a cut record body.
pub const CUT_FIXED_LEN: usize = 28;
/// Longest cut record body: that of the longest bin record, so that every frame still fits
/// [`super::preview::MAX_FRAME`] (e.g. two traces of up to 21 frequencies).
pub const CUT_MAX_BODY: usize = BIN_FIXED_LEN + BIN_PER_FREQ_LEN * MAX_FREQUENCIES;

/// One trace of a cut record.
#[derive(Debug, Clone, PartialEq)]
pub struct TraceRecord<const F: usize> {
    /// Averaged raw values at the pattern frequencies.
    pub raw: heapless::Vec<Complex32, F>,
    /// Gated values at the pattern frequencies.
    pub gated: heapless::Vec<Complex32, F>,
    /// Echo level, dB; NaN when not computed.
    pub echo_db: f32,
}

// `Complex32` has no `defmt::Format`: print the echo level and the count.
#[cfg(feature = "defmt")]
impl<const F: usize> defmt::Format for TraceRecord<F> {
    fn format(&self, f: defmt::Formatter) {
        defmt::write!(
            f,
            "TraceRecord {{ values: {}, echo_db: {} }}",
            self.gated.len(),
            self.echo_db
        )
    }
}

/// A closed bin of a scan of cuts, up to `F` pattern frequencies and [`MAX_TRACES`] traces.
#[derive(Debug, Clone, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct CutRecord<const F: usize> {
    /// Cut index.
    pub cut: u16,
    /// The cut's nominal second-axis value, deg.
    pub cut_nominal_deg: f32,
    /// Mean second-axis angle of the bin's sweeps, deg.
    pub axis2_deg: f32,
    /// Bin index of the first axis.
    pub bin: u16,
    /// [`crate::bins::BinFlags`] bits (the first trace's gate checks).
    pub flags: u16,
    /// Sweeps averaged into the bin.
    pub sweeps: u32,
    /// The bin's nominal first-axis angle, deg.
    pub nominal_deg: f32,
    /// Mean measured first-axis angle of its sweeps, deg.
    pub mean_deg: f32,
    /// Grid indices of the pattern frequencies.
    pub indices: heapless::Vec<u16, F>,
    /// The traces, the first first; each has one value per pattern frequency.
    pub traces: heapless::Vec<TraceRecord<F>, MAX_TRACES>,
}

fn put(buf: &mut [u8], at: usize, bytes: &[u8]) -> Result<(), EmitError> {
    buf.get_mut(at..at + bytes.len())
        .ok_or(EmitError::BufferFull)?
        .copy_from_slice(bytes);
    Ok(())
}

fn get4(b: &[u8], at: usize) -> Result<[u8; 4], FrameError> {
    let s = b.get(at..at + 4).ok_or(FrameError::BadLength)?;
    Ok([s[0], s[1], s[2], s[3]])
}

fn get_f32(b: &[u8], at: usize) -> Result<f32, FrameError> {
    get4(b, at).map(f32::from_le_bytes)
}

fn get_u16(b: &[u8], at: usize) -> Result<u16, FrameError> {
    let s = b.get(at..at + 2).ok_or(FrameError::BadLength)?;
    Ok(u16::from_le_bytes([s[0], s[1]]))
}

/// Body length for `t` traces of `n` frequencies.
pub const fn cut_body_len(t: usize, n: usize) -> usize {
    CUT_FIXED_LEN + 2 * n + 16 * t * n + 4 * t
}

impl<const F: usize> CutRecord<F> {
    /// Body length on the wire.
    pub fn body_len(&self) -> usize {
        cut_body_len(self.traces.len(), self.indices.len())
    }

    /// Writes the body (layout in [`super::preview`]'s docs) into `buf`, returning its
    /// length. Traces whose value count differs from the index count, no trace, or a body
    /// over [`CUT_MAX_BODY`] is [`EmitError::TooManyFrequencies`].
    pub fn emit(&self, buf: &mut [u8]) -> Result<usize, EmitError> {
        let (t, n) = (self.traces.len(), self.indices.len());
        let uneven = self
            .traces
            .iter()
            .any(|tr| tr.raw.len() != n || tr.gated.len() != n);
        if t == 0 || uneven || self.body_len() > CUT_MAX_BODY {
            return Err(EmitError::TooManyFrequencies);
        }
        if buf.len() < self.body_len() {
            return Err(EmitError::BufferFull);
        }
        put(buf, 0, &self.cut.to_le_bytes())?;
        put(buf, 2, &self.cut_nominal_deg.to_le_bytes())?;
        put(buf, 6, &self.axis2_deg.to_le_bytes())?;
        put(buf, 10, &self.bin.to_le_bytes())?;
        put(buf, 12, &self.flags.to_le_bytes())?;
        put(buf, 14, &self.sweeps.to_le_bytes())?;
        put(buf, 18, &self.nominal_deg.to_le_bytes())?;
        put(buf, 22, &self.mean_deg.to_le_bytes())?;
        put(buf, 26, &[t as u8, n as u8])?;
        for (i, ix) in self.indices.iter().enumerate() {
            put(buf, CUT_FIXED_LEN + 2 * i, &ix.to_le_bytes())?;
        }
        let values = CUT_FIXED_LEN + 2 * n;
        for (j, tr) in self.traces.iter().enumerate() {
            for (i, (r, g)) in tr.raw.iter().zip(&tr.gated).enumerate() {
                let at = values + 16 * (j * n + i);
                put(buf, at, &r.re.to_le_bytes())?;
                put(buf, at + 4, &r.im.to_le_bytes())?;
                put(buf, at + 8, &g.re.to_le_bytes())?;
                put(buf, at + 12, &g.im.to_le_bytes())?;
            }
            put(buf, values + 16 * t * n + 4 * j, &tr.echo_db.to_le_bytes())?;
        }
        Ok(self.body_len())
    }

    /// Reads a body written by [`emit`](Self::emit). More than `F` frequencies or
    /// [`MAX_TRACES`] traces, or no trace, is [`FrameError::BadField`].
    pub fn parse(body: &[u8]) -> Result<Self, FrameError> {
        let t = usize::from(*body.get(26).ok_or(FrameError::BadLength)?);
        let n = usize::from(*body.get(27).ok_or(FrameError::BadLength)?);
        if body.len() != cut_body_len(t, n) {
            return Err(FrameError::BadLength);
        }
        if t == 0 || t > MAX_TRACES || n > F {
            return Err(FrameError::BadField);
        }
        let mut indices = heapless::Vec::new();
        for i in 0..n {
            let ix = get_u16(body, CUT_FIXED_LEN + 2 * i)?;
            indices.push(ix).map_err(|_| FrameError::BadField)?;
        }
        let values = CUT_FIXED_LEN + 2 * n;
        let mut traces = heapless::Vec::new();
        for j in 0..t {
            let mut tr = TraceRecord {
                raw: heapless::Vec::new(),
                gated: heapless::Vec::new(),
                echo_db: get_f32(body, values + 16 * t * n + 4 * j)?,
            };
            for i in 0..n {
                let at = values + 16 * (j * n + i);
                let r = Complex32::new(get_f32(body, at)?, get_f32(body, at + 4)?);
                let g = Complex32::new(get_f32(body, at + 8)?, get_f32(body, at + 12)?);
                tr.raw.push(r).map_err(|_| FrameError::BadField)?;
                tr.gated.push(g).map_err(|_| FrameError::BadField)?;
            }
            traces.push(tr).map_err(|_| FrameError::BadField)?;
        }
        Ok(Self {
            cut: get_u16(body, 0)?,
            cut_nominal_deg: get_f32(body, 2)?,
            axis2_deg: get_f32(body, 6)?,
            bin: get_u16(body, 10)?,
            flags: get_u16(body, 12)?,
            sweeps: get4(body, 14).map(u32::from_le_bytes)?,
            nominal_deg: get_f32(body, 18)?,
            mean_deg: get_f32(body, 22)?,
            indices,
            traces,
        })
    }

    /// The first trace as a one-trace bin record (no angle offsets: a cut record does not
    /// carry them), for a view that shows one trace of one cut.
    pub fn first_trace_bin(&self) -> BinRecord<F> {
        let mut values = heapless::Vec::new();
        let (echo_db, raw, gated) = match self.traces.first() {
            Some(t) => (t.echo_db, &t.raw[..], &t.gated[..]),
            None => (f32::NAN, &[][..], &[][..]),
        };
        for ((&index, &raw), &gated) in self.indices.iter().zip(raw).zip(gated) {
            // Cannot fail: at most F indices into a Vec of capacity F.
            let _ = values.push(FreqValue {
                index,
                raw,
                gated,
                angle_offset_deg: 0.0,
            });
        }
        BinRecord {
            bin: self.bin,
            flags: self.flags,
            sweeps: self.sweeps,
            nominal_deg: self.nominal_deg,
            mean_deg: self.mean_deg,
            max_smear_deg: f32::NAN,
            echo_db,
            values,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::wire::preview::{encode_frame, Decoder, PreviewRecord, MAX_FRAME};

    fn record(t: usize, n: usize) -> CutRecord<8> {
        let c = |a: f32| Complex32::new(a, -a);
        let mut traces = heapless::Vec::new();
        for j in 0..t {
            let raw = (0..n).map(|i| c((j * 10 + i) as f32)).collect();
            let gated = (0..n).map(|i| c(0.5 + (j * 10 + i) as f32)).collect();
            traces
                .push(TraceRecord {
                    raw,
                    gated,
                    echo_db: -30.0 - j as f32,
                })
                .unwrap();
        }
        CutRecord {
            cut: 3,
            cut_nominal_deg: 135.0,
            axis2_deg: 135.2,
            bin: 17,
            flags: 0x21,
            sweeps: 4,
            nominal_deg: 17.0,
            mean_deg: 17.1,
            indices: (0..n as u16).map(|i| i * 7).collect(),
            traces,
        }
    }

    #[test]
    fn a_cut_record_goes_through_a_frame_and_back() {
        for (t, n) in [(1, 1), (2, 8), (4, 8)] {
            let rec = PreviewRecord::Cut(record(t, n));
            let mut frame = [0u8; MAX_FRAME];
            let len = encode_frame(&rec, 9, &mut frame).unwrap();
            let mut dec: Decoder<8, 1024> = Decoder::new();
            let mut got = None;
            dec.feed(&frame[..len], |seq, r| got = Some((seq, r)));
            assert_eq!(got, Some((9, rec)));
        }
        // Byte positions of the table in the preview docs (two traces, two frequencies).
        let r = record(2, 2);
        let mut body = [0u8; 128];
        let len = r.emit(&mut body).unwrap();
        assert_eq!(len, 28 + 4 + 64 + 8);
        assert_eq!(u16::from_le_bytes([body[0], body[1]]), 3);
        assert_eq!(&body[26..28], &[2, 2]);
        assert_eq!(u16::from_le_bytes([body[30], body[31]]), 7);
        // Trace 1, frequency 1: gated real part at 32 + 16·3 + 8.
        let g = f32::from_le_bytes(body[88..92].try_into().unwrap());
        assert_eq!(g, 11.5);
        let echo1 = f32::from_le_bytes(body[100..104].try_into().unwrap());
        assert_eq!(echo1, -31.0);
    }

    #[test]
    fn bad_cut_records_are_refused() {
        let r = record(2, 2);
        let mut body = [0u8; 128];
        let len = r.emit(&mut body).unwrap();
        assert_eq!(
            CutRecord::<8>::parse(&body[..len - 1]),
            Err(FrameError::BadLength)
        );
        let mut zero = body;
        zero[26] = 0;
        zero[27] = 0;
        assert_eq!(
            CutRecord::<8>::parse(&zero[..CUT_FIXED_LEN]),
            Err(FrameError::BadField)
        );
        assert_eq!(
            CutRecord::<1>::parse(&body[..len]),
            Err(FrameError::BadField)
        );
        let mut uneven = r.clone();
        uneven.traces[1].gated.pop();
        assert_eq!(uneven.emit(&mut body), Err(EmitError::TooManyFrequencies));
        let empty = CutRecord::<8> {
            traces: heapless::Vec::new(),
            ..r
        };
        assert_eq!(empty.emit(&mut body), Err(EmitError::TooManyFrequencies));
    }
}
