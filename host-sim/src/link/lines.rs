//! The positioner's sample lines (`<t_us> <angle_deg> [<axis2_deg> …]`, see
//! [`crate::link::acquire`]; up to [`MAX_FURTHER_AXES`] further axes of a positioner of
//! several axes, e.g. elevation or roll, each a finite angle) read
//! on their own thread with every input bounded: a line is at most
//! [`MAX_POSITIONER_LINE_BYTES`] (a longer one is read to its newline in chunks, thrown
//! away and counted), a line that is not UTF-8 is counted, never taken for the end of the
//! stream, and samples wait in a queue of fixed depth (a sample arriving when it is full is
//! dropped and counted). Only the connection closing ends the stream; an I/O error ends
//! it with its reason.

use std::io::{BufRead, BufReader, Read};
use std::sync::atomic::{AtomicU64, Ordering};
use std::sync::mpsc::{self, Receiver, SyncSender, TrySendError};
use std::sync::Arc;
use std::time::Instant;

use crate::limits::MAX_POSITIONER_LINE_BYTES;
use crate::link::clock::ClockFit;

/// One message from the positioner thread.
#[derive(Debug, Clone, PartialEq)]
pub enum PosMsg {
    /// A sample, on our clock.
    Sample(AngleSample),
    /// A line that is not `<t_us> <angle_deg>` (why).
    Malformed(String),
    /// A line holding bytes that are not UTF-8.
    BadBytes,
    /// A line longer than [`MAX_POSITIONER_LINE_BYTES`].
    TooLong,
    /// The stream ended: `None` when the positioner closed the connection, else the error.
    Ended(Option<String>),
}

/// One angle sample from the positioner.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct AngleSample {
    /// On our clock, µs from the start of the acquisition.
    pub t_us: u64,
    /// Angle, degrees.
    pub angle_deg: f64,
    /// The further axes' angles, degrees (the first `further` are given).
    pub further_deg: [f64; MAX_FURTHER_AXES],
    /// How many further axes the line gave.
    pub further: u8,
}

impl AngleSample {
    /// The further axes the line gave, degrees.
    pub fn further_axes(&self) -> &[f64] {
        &self.further_deg[..usize::from(self.further).min(MAX_FURTHER_AXES)]
    }
}

/// Most further axes a positioner line may give after the first.
pub const MAX_FURTHER_AXES: usize = 3;

/// Parses one line of the positioner protocol with optional further axes,
/// `<t_us> <angle_deg> [<axis2_deg> …]`: `Ok(None)` for blank and comment lines, else the
/// time, the first axis and the further ones (at most [`MAX_FURTHER_AXES`]).
pub fn parse_axes_line(line: &str) -> Result<Option<(u64, f64, Vec<f64>)>, String> {
    let line = line.trim_end_matches('\r').trim();
    if line.is_empty() || line.starts_with('#') {
        return Ok(None);
    }
    let mut it = line.split_whitespace();
    let (Some(t), Some(a)) = (it.next(), it.next()) else {
        return Err(format!(
            "expected `<t_us> <angle_deg> [<axis2_deg> …]`, got {line:?}"
        ));
    };
    let t: u64 = t.parse().map_err(|_| format!("bad t_us in {line:?}"))?;
    let angle = |a: &str, what: &str| -> Result<f64, String> {
        let v: f64 = a.parse().map_err(|_| format!("bad {what} in {line:?}"))?;
        if v.is_finite() {
            Ok(v)
        } else {
            Err(format!("{what} not finite in {line:?}"))
        }
    };
    let first = angle(a, "angle_deg")?;
    let further = it
        .enumerate()
        .map(|(i, a)| angle(a, &format!("axis{}_deg", i + 2)))
        .collect::<Result<Vec<f64>, String>>()?;
    if further.len() > MAX_FURTHER_AXES {
        return Err(format!(
            "{} axes in {line:?}; at most {}",
            further.len() + 1,
            MAX_FURTHER_AXES + 1
        ));
    }
    Ok(Some((t, first, further)))
}

/// Parses one line of the positioner protocol: `Ok(None)` for blank and comment lines.
pub fn parse_angle_line(line: &str) -> Result<Option<(u64, f64)>, String> {
    let line = line.trim_end_matches('\r').trim();
    if line.is_empty() || line.starts_with('#') {
        return Ok(None);
    }
    let mut it = line.split_whitespace();
    let (Some(t), Some(a), None) = (it.next(), it.next(), it.next()) else {
        return Err(format!("expected `<t_us> <angle_deg>`, got {line:?}"));
    };
    let t: u64 = t.parse().map_err(|_| format!("bad t_us in {line:?}"))?;
    let a: f64 = a
        .parse()
        .map_err(|_| format!("bad angle_deg in {line:?}"))?;
    if !a.is_finite() {
        return Err(format!("angle not finite in {line:?}"));
    }
    Ok(Some((t, a)))
}

/// How one bounded line read ended.
#[derive(Debug, PartialEq, Eq)]
pub enum LineRead {
    /// A whole line (without its newline) is in the buffer.
    Line,
    /// A line longer than the bound, read to its newline and thrown away.
    TooLong,
    /// The stream closed (a partial last line is dropped).
    Closed,
}

/// Reads one line of at most `max` bytes into `line`; a longer one is consumed to its
/// newline without being stored, so memory stays bounded whatever the peer sends.
pub fn read_bounded_line(
    r: &mut impl BufRead,
    line: &mut Vec<u8>,
    max: usize,
) -> std::io::Result<LineRead> {
    line.clear();
    let mut too_long = false;
    loop {
        let chunk = match r.fill_buf() {
            Ok(c) => c,
            // A signal interrupted the read: read again.
            Err(e) if e.kind() == std::io::ErrorKind::Interrupted => continue,
            Err(e) => return Err(e),
        };
        if chunk.is_empty() {
            return Ok(LineRead::Closed);
        }
        let (take, done) = match chunk.iter().position(|&b| b == b'\n') {
            Some(i) => (i, true),
            None => (chunk.len(), false),
        };
        if !too_long && line.len() + take <= max {
            line.extend_from_slice(&chunk[..take]);
        } else {
            too_long = true;
            line.clear();
        }
        r.consume(take + usize::from(done));
        if done {
            return Ok(if too_long {
                LineRead::TooLong
            } else {
                LineRead::Line
            });
        }
    }
}

/// The positioner's samples on their way to the acquisition loop.
pub struct Positioner {
    /// Messages, at most the queue depth waiting.
    pub rx: Receiver<PosMsg>,
    /// Samples dropped because the queue was full.
    pub dropped: Arc<AtomicU64>,
    /// The clock fit, shared with the reader thread (for the report).
    pub clock: Arc<std::sync::Mutex<ClockFit>>,
    /// Depth of the queue.
    pub depth: usize,
}

/// Starts the reader thread on `stream` with a queue of `depth` messages.
pub fn spawn(stream: impl Read + Send + 'static, epoch: Instant, depth: usize) -> Positioner {
    let depth = depth.max(1);
    let (tx, rx) = mpsc::sync_channel(depth);
    let dropped = Arc::new(AtomicU64::new(0));
    let clock = Arc::new(std::sync::Mutex::new(ClockFit::default()));
    let (d, c) = (Arc::clone(&dropped), Arc::clone(&clock));
    std::thread::spawn(move || read_lines(stream, epoch, &tx, &d, &c));
    Positioner {
        rx,
        dropped,
        clock,
        depth,
    }
}

/// The reader thread: one message per line until the stream ends.
fn read_lines(
    stream: impl Read,
    epoch: Instant,
    tx: &SyncSender<PosMsg>,
    dropped: &AtomicU64,
    clock: &std::sync::Mutex<ClockFit>,
) {
    let mut reader = BufReader::with_capacity(8192, stream);
    let mut line = Vec::new();
    let mut last_t_us = 0u64;
    let end = loop {
        let msg = match read_bounded_line(&mut reader, &mut line, MAX_POSITIONER_LINE_BYTES) {
            Ok(LineRead::Closed) => break None,
            Err(e) => break Some(e.to_string()),
            Ok(LineRead::TooLong) => PosMsg::TooLong,
            Ok(LineRead::Line) => {
                let arrival_us = epoch.elapsed().as_micros() as f64;
                match std::str::from_utf8(&line).map(parse_axes_line) {
                    Err(_) => PosMsg::BadBytes,
                    Ok(Ok(None)) => continue,
                    Ok(Err(e)) => PosMsg::Malformed(e),
                    Ok(Ok(Some((t, a, more)))) => {
                        let Ok(mut fit) = clock.lock() else { return };
                        fit.add(t as f64, arrival_us);
                        // Never back in time when the fit moves.
                        let t_us = (fit.to_host_us(t as f64).max(0.0) as u64).max(last_t_us);
                        last_t_us = t_us;
                        let mut further_deg = [0.0; MAX_FURTHER_AXES];
                        for (d, v) in further_deg.iter_mut().zip(&more) {
                            *d = *v;
                        }
                        PosMsg::Sample(AngleSample {
                            t_us,
                            angle_deg: a,
                            further_deg,
                            further: more.len() as u8,
                        })
                    }
                }
            }
        };
        match tx.try_send(msg) {
            Ok(()) => {}
            Err(TrySendError::Full(_)) => {
                dropped.fetch_add(1, Ordering::Relaxed);
            }
            Err(TrySendError::Disconnected(_)) => return,
        }
    };
    // The end is always delivered: wait for room in the queue.
    tx.send(PosMsg::Ended(end)).ok();
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn lines_of_several_axes() {
        assert_eq!(parse_axes_line("12 -3.5"), Ok(Some((12, -3.5, vec![]))));
        assert_eq!(
            parse_axes_line("12 3 45.5\r"),
            Ok(Some((12, 3.0, vec![45.5])))
        );
        assert_eq!(
            parse_axes_line("1 2 3 4 5"),
            Ok(Some((1, 2.0, vec![3.0, 4.0, 5.0])))
        );
        assert_eq!(parse_axes_line("# c"), Ok(None));
        let e = parse_axes_line("1 2 3 4 5 6").unwrap_err();
        assert!(e.contains("5 axes") && e.contains("at most 4"), "{e}");
        let e = parse_axes_line("1 2 x").unwrap_err();
        assert!(e.contains("bad axis2_deg"), "{e}");
        let e = parse_axes_line("1 2 3 inf").unwrap_err();
        assert!(e.contains("axis3_deg not finite"), "{e}");
        assert!(parse_axes_line("12").is_err());
    }

    #[test]
    fn angle_lines() {
        assert_eq!(parse_angle_line("12 -3.5"), Ok(Some((12, -3.5))));
        assert_eq!(parse_angle_line("12\t4\r"), Ok(Some((12, 4.0))));
        assert_eq!(parse_angle_line("  "), Ok(None));
        assert_eq!(parse_angle_line("# comment"), Ok(None));
        assert!(parse_angle_line("12").is_err());
        assert!(parse_angle_line("12 3 4").is_err());
        assert!(parse_angle_line("-1 3").is_err());
        assert!(parse_angle_line("1 NaN").is_err());
        assert!(parse_angle_line("1 x").is_err());
    }

    #[test]
    fn bounded_lines_skip_long_ones_and_keep_going() {
        let mut data = vec![b'x'; 1000];
        data.extend_from_slice(b"\n1 2\n\xff\xfe 3\ntail");
        let mut r = BufReader::with_capacity(16, &data[..]);
        let mut line = Vec::new();
        assert_eq!(
            read_bounded_line(&mut r, &mut line, 64).unwrap(),
            LineRead::TooLong
        );
        assert!(line.len() <= 64);
        assert_eq!(
            read_bounded_line(&mut r, &mut line, 64).unwrap(),
            LineRead::Line
        );
        assert_eq!(line, b"1 2");
        assert_eq!(
            read_bounded_line(&mut r, &mut line, 64).unwrap(),
            LineRead::Line
        );
        assert!(std::str::from_utf8(&line).is_err());
        assert_eq!(
            read_bounded_line(&mut r, &mut line, 64).unwrap(),
            LineRead::Closed
        );
    }

    /// A read interrupted by a signal (Ctrl-C while driving) is read again, not taken for
    /// an error or the end.
    #[test]
    fn an_interrupted_read_is_read_again() {
        struct Interrupted(bool, &'static [u8]);
        impl Read for Interrupted {
            fn read(&mut self, buf: &mut [u8]) -> std::io::Result<usize> {
                if std::mem::replace(&mut self.0, false) {
                    return Err(std::io::ErrorKind::Interrupted.into());
                }
                let n = self.1.len().min(buf.len());
                buf[..n].copy_from_slice(&self.1[..n]);
                self.1 = &self.1[n..];
                Ok(n)
            }
        }
        let mut r = BufReader::new(Interrupted(true, b"OK 1 2 3 HOLDING\n"));
        let mut line = Vec::new();
        assert_eq!(
            read_bounded_line(&mut r, &mut line, 64).unwrap(),
            LineRead::Line
        );
        assert_eq!(line, b"OK 1 2 3 HOLDING");
    }

    #[test]
    fn bad_bytes_are_counted_and_the_stream_goes_on() {
        let data: &[u8] = b"10 1.0\n\xff\xff\n20 2.0\nnope\n";
        let p = spawn(data, Instant::now(), 16);
        let msgs: Vec<PosMsg> = p.rx.iter().collect();
        assert_eq!(msgs.len(), 5, "{msgs:?}");
        assert!(matches!(msgs[0], PosMsg::Sample(s) if s.angle_deg == 1.0));
        assert_eq!(msgs[1], PosMsg::BadBytes);
        assert!(matches!(msgs[2], PosMsg::Sample(s) if s.angle_deg == 2.0));
        assert!(matches!(msgs[3], PosMsg::Malformed(_)));
        assert_eq!(msgs[4], PosMsg::Ended(None));
    }
}
