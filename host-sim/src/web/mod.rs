//! The live view in a browser: `--web [ADDR:]PORT` on `replay`, `view` and `acquire`.
//!
//! [`hub`] decodes the preview frames a command produces (the same bytes the terminal
//! screen and a board's link carry) into JSON events and keeps a snapshot; [`server`]
//! serves the page built into the binary (`page/`: plain HTML, JavaScript and canvas, no
//! network access at run time) and the events to a bounded number of browsers, each with a
//! bounded queue, so a slow or stalled browser is dropped and never slows the scan. It
//! binds 127.0.0.1 unless an address is given, and answers `GET` only.
//!
//! Imports: the core, `output::screen` (the preview decoder's sizes) and the leaves; never
//! `pipeline/` or `link/`, which both use it.

pub mod hub;
pub mod server;

pub use hub::{AbsoluteLevels, Ended, Hub, Limits, Meta};
pub use server::{exposure_warning, parse_addr, WebServer};

/// Binds the web view at `spec` (`PORT` on 127.0.0.1, or `ADDR:PORT`) for a hub with these
/// names and the default bounds; prints where it is, and a warning when it is reachable
/// from other machines.
pub fn start(spec: &str, meta: Meta) -> anyhow::Result<WebServer> {
    let addr = parse_addr(spec)?;
    if let Some(w) = exposure_warning(addr) {
        eprintln!("warning: {w}");
    }
    let server = WebServer::start(addr, Hub::new(meta, Limits::default()))?;
    eprintln!("web view on {}", server.url());
    Ok(server)
}

/// Keeps the process (and so the page) up after the scan until the user stops it with
/// Ctrl-C (SIGINT) or SIGTERM; then returns, so the command exits normally. (A driven
/// acquisition has already taken those signals to stop the positioner, so they are caught
/// here too rather than left to end the process.)
pub fn stay_up(server: &WebServer) -> anyhow::Result<()> {
    use std::sync::atomic::{AtomicBool, Ordering};
    use std::sync::Arc;
    let stop = Arc::new(AtomicBool::new(false));
    for sig in [signal_hook::consts::SIGINT, signal_hook::consts::SIGTERM] {
        anyhow::Context::context(
            signal_hook::flag::register(sig, Arc::clone(&stop)),
            "web view: setting up the stop on Ctrl-C",
        )?;
    }
    eprintln!(
        "the scan has ended; the web view stays up on {} until you stop this command (Ctrl-C)",
        server.url()
    );
    while !stop.load(Ordering::Relaxed) {
        std::thread::sleep(std::time::Duration::from_millis(100));
    }
    Ok(())
}
