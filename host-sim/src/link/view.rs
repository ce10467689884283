//! `sweepgate view --from ADDR`: shows a board's preview stream (the same screen as
//! `sweepgate replay`). `ADDR` is `HOST:PORT` for a TCP stream, or a path (a serial device
//! or a file of recorded preview bytes) read as a file. The screen decodes records of up to
//! [`crate::limits::MAX_FREQUENCIES`] pattern frequencies in frames of up to
//! [`crate::limits::MAX_FRAME_BYTES`], the sizes every command's engine sends.

use std::io::Read;
use std::path::Path;
use std::sync::atomic::{AtomicBool, AtomicU64, Ordering};
use std::sync::{mpsc, Arc};

use anyhow::Context;

use sweepgate::grid::Grid;

use crate::output::screen::{self as preview, Screen, ScreenInput};
use crate::web::{Ended, Hub, Meta};

/// Options of `sweepgate view`.
#[derive(Debug, Clone)]
pub struct Options {
    /// `HOST:PORT` of a TCP preview stream, or a path to a serial device or a file.
    pub from: String,
    /// No full-screen preview: a progress line on stderr and a summary at the end.
    pub no_preview: bool,
    /// Number of bins of the scan, for the "filled" count (unknown otherwise).
    pub bins: Option<u16>,
    /// The sweep grid, to name the pattern frequencies in GHz (grid points otherwise).
    pub grid: Option<Grid>,
    /// The web view to feed (`--web`), already serving.
    pub web: Option<Hub>,
}

/// `START:STOP:POINTS` in Hz (`8e9:12e9:801`) as a grid, for `view --grid-hz`.
pub fn parse_grid(spec: &str) -> anyhow::Result<Grid> {
    let bad = || {
        format!(
            "--grid-hz {}: expected START:STOP:POINTS in Hz, e.g. 8e9:12e9:801",
            crate::quote::clipped(spec)
        )
    };
    let parts: Vec<&str> = spec.split(':').collect();
    let [a, b, n] = parts[..] else {
        anyhow::bail!(bad());
    };
    let start: f64 = a.trim().parse().with_context(bad)?;
    let stop: f64 = b.trim().parse().with_context(bad)?;
    let points: usize = n.trim().parse().with_context(bad)?;
    Grid::from_start_stop(start, stop, points).with_context(bad)
}

/// The web view's names for a stream read by `view`.
fn web_meta(args: &Options) -> Meta {
    Meta {
        title: format!("stream from {}", args.from),
        source: format!("preview stream from {}", args.from),
        total_bins: args.bins,
        grid_start_hz: args.grid.map(|g| g.frequency_hz(0)),
        grid_step_hz: args.grid.map(|g| g.frequency_hz(1) - g.frequency_hz(0)),
        ..Meta::default()
    }
}

/// Feed messages in flight between the reader thread and the screen: the reader waits
/// when the screen is behind, so memory stays bounded whatever the source sends.
const FEED_DEPTH: usize = 64;

fn open(from: &str) -> anyhow::Result<Box<dyn Read + Send>> {
    let path = Path::new(from);
    if path.is_dir() {
        anyhow::bail!(
            "{from} is a directory: give a preview stream file, a serial device or HOST:PORT"
        );
    }
    if path.exists() {
        let f = std::fs::File::open(from).with_context(|| format!("opening {from}"))?;
        return Ok(Box::new(f));
    }
    let s = std::net::TcpStream::connect(from).with_context(|| format!("connecting to {from}"))?;
    Ok(Box::new(s))
}

/// Reads the stream to its end (or until `q`), returning the final screen; an error when
/// the source is a directory or the stream held no preview record at all.
pub fn view(args: &Options) -> anyhow::Result<Screen> {
    let mut src = open(&args.from)?;
    let (tx, rx) = mpsc::sync_channel(FEED_DEPTH);
    let read = Arc::new(AtomicU64::new(0));
    let counted = Arc::clone(&read);
    let web = args.web.clone();
    if let Some(h) = &web {
        h.set_meta(web_meta(args));
    }
    std::thread::spawn(move || {
        let mut buf = [0u8; 4096];
        loop {
            match src.read(&mut buf) {
                Ok(0) | Err(_) => break,
                Ok(n) => {
                    counted.fetch_add(n as u64, Ordering::Relaxed);
                    if let Some(h) = &web {
                        // Never waits: a browser that cannot keep up is dropped.
                        h.publish(&buf[..n]);
                    }
                    if tx.send(ScreenInput::Bytes(buf[..n].to_vec())).is_err() {
                        break;
                    }
                }
            }
        }
        let _ = tx.send(ScreenInput::End);
        if let Some(h) = &web {
            h.end(
                None,
                Ended {
                    files: Vec::new(),
                    summary: "the preview stream has ended".into(),
                },
            );
        }
    });
    let mut screen = Screen::new(format!("stream from {}", args.from));
    screen.total_bins = args.bins;
    screen.grid = args.grid;
    let quit = AtomicBool::new(false);
    if !args.no_preview && preview::have_terminal() {
        preview::run_terminal(&rx, &mut screen, &quit, None).context("terminal preview")?;
    } else {
        preview::run_plain(&rx, &mut screen, args.bins.is_some());
    }
    if screen.bins.is_empty() && screen.status.is_none() {
        anyhow::bail!(
            "no preview record in the {} bytes read from {}",
            read.load(Ordering::Relaxed),
            args.from
        );
    }
    Ok(screen)
}

/// Runs the command: shows the stream, then prints the summary.
pub fn run(args: &Options) -> anyhow::Result<()> {
    let screen = view(args)?;
    for line in screen.summary_lines() {
        println!("{line}");
    }
    Ok(())
}
