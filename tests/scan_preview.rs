//! Preview records: CRC-32 and COBS against published values, record round trips, and a
//! damaged byte stream from which every intact record is recovered and every damaged frame
//! counted.

use proptest::prelude::*;
use sweepgate::wire::preview::{
    cobs_decode_in_place, cobs_encode, crc32, encode_frame, write_frame, BinRecord, Decoder,
    FreqValue, PositionerState, PreviewRecord, StatusRecord, MAX_FRAME,
};
use sweepgate::Complex32;

type Dec = Decoder<8, MAX_FRAME>;

#[test]
fn crc32_check_value() {
    // CRC-32/ISO-HDLC (the IEEE 802.3 / zlib CRC-32) check value over "123456789":
    // 0xCBF43926 (Greg Cook's CRC catalogue; zlib `crc32`).
    assert_eq!(crc32(b"123456789"), 0xCBF4_3926);
    // zlib crc32 of the empty string is 0 (zlib).
    assert_eq!(crc32(b""), 0);
}

#[test]
fn cobs_published_examples() {
    // Examples from Cheshire & Baker, "Consistent Overhead Byte Stuffing", IEEE/ACM Trans.
    // Networking 7(2), 1999, as tabulated in the Wikipedia article on COBS.
    let mut long = [0u8; 254];
    for (i, b) in long.iter_mut().enumerate() {
        *b = i as u8 + 1;
    }
    let mut long_enc = vec![0xFF];
    long_enc.extend_from_slice(&long);
    let cases: [(&[u8], &[u8]); 6] = [
        (&[0x00], &[0x01, 0x01]),
        (&[0x00, 0x00], &[0x01, 0x01, 0x01]),
        (&[0x00, 0x11, 0x00], &[0x01, 0x02, 0x11, 0x01]),
        (&[0x11, 0x22, 0x00, 0x33], &[0x03, 0x11, 0x22, 0x02, 0x33]),
        (&[0x11, 0x22, 0x33, 0x44], &[0x05, 0x11, 0x22, 0x33, 0x44]),
        (&[0x11, 0x00, 0x00, 0x00], &[0x02, 0x11, 0x01, 0x01, 0x01]),
    ];
    for (src, want) in cases.iter().chain([(&long[..], &long_enc[..])].iter()) {
        let mut out = [0u8; 300];
        let n = cobs_encode(src, &mut out).unwrap();
        assert_eq!(&out[..n], *want);
        let m = cobs_decode_in_place(&mut out[..n]).unwrap();
        assert_eq!(&out[..m], *src);
    }
}

fn bin_record(i: u32) -> BinRecord<8> {
    let mut values = heapless::Vec::new();
    for f in 0..(i % 9) {
        let x = (i * 8 + f) as f32;
        values
            .push(FreqValue {
                index: (f * 100) as u16,
                raw: Complex32::new(x * 0.01, -x * 0.02),
                gated: Complex32::new(x * 0.003, x * 1e-5),
                angle_offset_deg: x * 1e-3 - 0.2,
            })
            .unwrap();
    }
    BinRecord {
        bin: (i % 361) as u16,
        flags: (i % 128) as u16,
        sweeps: i * 3 + 1,
        nominal_deg: (i % 361) as f32,
        mean_deg: (i % 361) as f32 + 0.013,
        max_smear_deg: 0.21,
        echo_db: -37.5 - i as f32 * 0.1,
        values,
    }
}

fn status_record(i: u32) -> StatusRecord {
    StatusRecord {
        time_us: 1_000_000 + u64::from(i) * 50_000,
        angle_deg: i as f32 * 0.5,
        speed_deg_s: 10.0,
        state: [
            PositionerState::NoAngle,
            PositionerState::Moving,
            PositionerState::Settled,
            PositionerState::Stalled,
            PositionerState::Finished,
        ][(i % 5) as usize],
        open_bin: if i % 4 == 0 { None } else { Some(i as u16) },
        bins_closed: i as u16,
        sweeps_pushed: i * 2,
        sweeps_binned: i * 2 - i / 3,
        sweeps_rejected: i / 3,
        angles_pushed: i * 20,
        angles_rejected: i % 3,
    }
}

fn record(i: u32) -> PreviewRecord<8> {
    if i % 3 == 2 {
        PreviewRecord::Status(status_record(i))
    } else {
        PreviewRecord::Bin(bin_record(i))
    }
}

#[test]
fn round_trip_and_writer() {
    for i in 0..60u32 {
        let rec = record(i);
        let mut frame = [0u8; MAX_FRAME];
        let n = encode_frame(&rec, i as u16, &mut frame).unwrap();
        assert_eq!(frame[n - 1], 0);
        assert!(!frame[..n - 1].contains(&0));
        // The same bytes through embedded_io::Write (impl for &mut [u8]).
        let mut out = [0u8; MAX_FRAME];
        let mut w: &mut [u8] = &mut out;
        assert_eq!(write_frame(&mut w, &rec, i as u16).unwrap(), n);
        assert_eq!(&out[..n], &frame[..n]);
        let mut dec = Dec::new();
        let mut got = Vec::new();
        assert_eq!(dec.feed(&frame[..n], |s, r| got.push((s, r))), 1);
        assert_eq!(got, vec![(i as u16, rec)]);
    }
    // NaN echo level ("not computed") survives bit for bit.
    let mut b = bin_record(5);
    b.echo_db = f32::NAN;
    let mut frame = [0u8; MAX_FRAME];
    let n = encode_frame(&PreviewRecord::Bin(b), 0, &mut frame).unwrap();
    let mut dec = Dec::new();
    let mut got = None;
    dec.feed(&frame[..n], |_, r| got = Some(r));
    let Some(PreviewRecord::Bin(r)) = got else {
        panic!()
    };
    assert!(r.echo_db.is_nan());
    // A receiver holding fewer frequencies refuses the record as a bad field, counted.
    let mut small: Decoder<2, MAX_FRAME> = Decoder::new();
    let n = encode_frame(&record(7), 0, &mut frame).unwrap(); // 7 frequencies
    assert_eq!(small.feed(&frame[..n], |_, _| ()), 0);
    assert_eq!(small.counters().bad_body, 1);
}

/// Small deterministic generator (xorshift64, Marsaglia 2003), so the test is repeatable.
struct Rng(u64);
impl Rng {
    fn next(&mut self) -> u64 {
        self.0 ^= self.0 << 13;
        self.0 ^= self.0 >> 7;
        self.0 ^= self.0 << 17;
        self.0
    }
    fn below(&mut self, n: usize) -> usize {
        (self.next() % n as u64) as usize
    }
}

#[test]
fn damaged_stream_recovers_every_intact_record() {
    let mut rng = Rng(0x9E37_79B9_7F4A_7C15);
    let mut stream: Vec<u8> = Vec::new();
    let mut intact: Vec<(u16, PreviewRecord<8>)> = Vec::new();
    let mut expect_damaged = 0u32;
    // The receiver joins mid-frame: the tail of a frame runs into frame 0, one damaged count.
    stream.extend_from_slice(&[0x05, 0x11, 0x22]);
    expect_damaged += 1;
    let total = 300u32;
    let mut pending_merge = true;
    for i in 0..total {
        let rec = record(i);
        let mut frame = [0u8; MAX_FRAME];
        let n = encode_frame(&rec, i as u16, &mut frame).unwrap();
        let mut f = frame[..n].to_vec();
        let body = n - 1; // bytes before the delimiter
        let kind = if pending_merge { 99 } else { rng.below(10) };
        match kind {
            0 => {
                // Flip bits of one byte, never to 0x00.
                let at = rng.below(body);
                let mut mask = (rng.next() as u8) | 1;
                if f[at] ^ mask == 0 {
                    mask = 0x80;
                }
                f[at] ^= mask;
                expect_damaged += 1;
            }
            1 => {
                f.remove(rng.below(body));
                expect_damaged += 1;
            }
            2 => {
                f.insert(rng.below(body + 1), (rng.next() as u8) | 1);
                expect_damaged += 1;
            }
            3 if body >= 4 => {
                // A 0x00 inserted inside the frame splits it in two damaged parts.
                f.insert(1 + rng.below(body - 2), 0);
                expect_damaged += 2;
            }
            4 => {
                // The delimiter is lost: this frame and the next merge into one damaged.
                f.pop();
                pending_merge = true;
                expect_damaged += 1;
            }
            99 => pending_merge = false, // second half of a merge, already counted
            _ => intact.push((i as u16, rec)),
        }
        stream.extend_from_slice(&f);
    }
    assert!(!pending_merge || stream.last() != Some(&0));
    // Feed in chunks of random sizes.
    let mut dec = Dec::new();
    let mut got = Vec::new();
    let mut pos = 0;
    while pos < stream.len() {
        let len = 1 + rng.below(97);
        let end = (pos + len).min(stream.len());
        dec.feed(&stream[pos..end], |s, r| got.push((s, r)));
        pos = end;
    }
    let c = *dec.counters();
    assert_eq!(got.len(), intact.len());
    assert_eq!(got, intact);
    assert_eq!(c.good, intact.len() as u32);
    assert_eq!(c.damaged(), expect_damaged, "{c:?}");
    assert!(
        intact.len() > 100 && expect_damaged > 60,
        "both kinds exercised"
    );
    // Every 0x00 ends exactly one counted frame.
    let zeros = stream.iter().filter(|&&b| b == 0).count() as u32;
    assert_eq!(c.good + c.damaged() + c.empty, zeros);
    // Records lost between good frames show as sequence gaps.
    let span = u32::from(intact.last().unwrap().0 - intact[0].0) + 1;
    assert_eq!(c.seq_gaps, span - intact.len() as u32);
}

proptest! {
    #[test]
    fn decoder_never_panics_and_counts_each_delimiter(bytes in prop::collection::vec(any::<u8>(), 0..3000)) {
        let mut dec: Decoder<8, 256> = Decoder::new();
        let _ = dec.feed(&bytes, |_, _| ());
        let c = *dec.counters();
        let zeros = bytes.iter().filter(|&&b| b == 0).count() as u32;
        prop_assert_eq!(c.good + c.damaged() + c.empty, zeros);
        prop_assert_eq!(c.bytes as usize, bytes.len());
    }

    #[test]
    fn bin_records_round_trip(
        bin in any::<u16>(), flags in any::<u16>(), sweeps in any::<u32>(),
        angles in prop::array::uniform4(-1e4f32..1e4),
        vals in prop::collection::vec((any::<u16>(), prop::array::uniform4(-1e6f32..1e6), -1.0f32..1.0), 0..=8),
        seq in any::<u16>(),
    ) {
        let mut values = heapless::Vec::<FreqValue, 8>::new();
        for (index, v, angle_offset_deg) in vals {
            values.push(FreqValue { index, raw: Complex32::new(v[0], v[1]), gated: Complex32::new(v[2], v[3]), angle_offset_deg }).unwrap();
        }
        let rec: PreviewRecord<8> = PreviewRecord::Bin(BinRecord {
            bin, flags, sweeps, nominal_deg: angles[0], mean_deg: angles[1],
            max_smear_deg: angles[2], echo_db: angles[3], values,
        });
        let mut frame = [0u8; MAX_FRAME];
        let n = encode_frame(&rec, seq, &mut frame).unwrap();
        let mut dec = Dec::new();
        let mut got = None;
        dec.feed(&frame[..n], |s, r| got = Some((s, r)));
        prop_assert_eq!(got, Some((seq, rec)));
    }
}

/// A bin body in the layout from before the angle offsets (25 + 18·n bytes: the values
/// block alone) is still read, with every offset 0; the current layout appends one f32 per
/// frequency (25 + 22·n), and any other length is refused.
#[test]
fn bin_bodies_without_angle_offsets_are_read() {
    let rec = bin_record(5); // 5 frequencies, offsets −0.16 … −0.156
    let mut body = [0u8; 512];
    let n = rec.emit(&mut body).unwrap();
    assert_eq!(n, 25 + 22 * 5);
    assert_eq!(BinRecord::<8>::parse(&body[..n]).unwrap(), rec);
    // The older sender stops after the values block.
    let old = BinRecord::<8>::parse(&body[..25 + 18 * 5]).unwrap();
    let mut want = rec.clone();
    for v in want.values.iter_mut() {
        v.angle_offset_deg = 0.0;
    }
    assert_eq!(old, want);
    assert!(rec.values.iter().all(|v| v.angle_offset_deg != 0.0));
    for len in [25 + 18 * 5 + 4, 25 + 22 * 5 - 1, 25 + 22 * 5 + 1] {
        assert!(BinRecord::<8>::parse(&body[..len]).is_err(), "{len}");
    }
}
