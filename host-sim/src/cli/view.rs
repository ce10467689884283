//! `sweepgate view`: its arguments and the call (see [`crate::link::view`]).

use crate::link::view::{self, Options};

/// Options of `sweepgate view`.
#[derive(clap::Args, Debug, Clone)]
pub struct Args {
    /// `HOST:PORT` of a TCP preview stream, or a path to a serial device or a file.
    #[arg(long)]
    pub from: String,
    /// No full-screen preview: a progress line on stderr and a summary at the end.
    #[arg(long)]
    pub no_preview: bool,
    /// Number of bins of the scan, for the "filled" count (unknown otherwise).
    #[arg(long)]
    pub bins: Option<u16>,
    /// The sweep grid as START:STOP:POINTS in Hz (e.g. 8e9:12e9:801), to name the pattern
    /// frequencies in GHz (the records carry grid points).
    #[arg(long, value_name = "START:STOP:POINTS")]
    pub grid_hz: Option<String>,
    /// Also serve the live view to a browser on [ADDR:]PORT (a bare port is on 127.0.0.1);
    /// the page stays up after the stream ends until the command is stopped (Ctrl-C).
    #[arg(long, value_name = "[ADDR:]PORT")]
    pub web: Option<String>,
}

/// Runs the command.
pub fn run(a: Args) -> anyhow::Result<()> {
    let grid = a.grid_hz.as_deref().map(view::parse_grid).transpose()?;
    let server = match &a.web {
        Some(spec) => Some(crate::web::start(spec, crate::web::Meta::default())?),
        None => None,
    };
    view::run(&Options {
        from: a.from,
        no_preview: a.no_preview,
        bins: a.bins,
        grid,
        web: server.as_ref().map(|s| s.hub().clone()),
    })?;
    if let Some(s) = &server {
        crate::web::stay_up(s)?;
    }
    Ok(())
}
