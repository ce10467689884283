//! Where a command's time goes, for profiling: with the environment variable
//! `SWEEPGATE_PHASE_TIMES` set (to anything), each [`mark`] prints one line to standard
//! error, `phase NAME: W ms (since start T ms)`, W the wall time since the previous mark (or
//! since the first mark of the run) and T the time since the first mark. Unset, a mark costs
//! one look at a flag. Nothing is timed in tests; the figures are read by hand (README,
//! "Host: the host's FFT back end and threads"). This module imports nothing of the crate.

use std::sync::Mutex;
use std::sync::OnceLock;
use std::time::Instant;

/// The environment variable that turns the lines on.
pub const ENV: &str = "SWEEPGATE_PHASE_TIMES";

/// The first and the previous mark's instants, once there was a mark.
type Marks = Mutex<Option<(Instant, Instant)>>;

/// The marks, when timing is on.
fn clock() -> Option<&'static Marks> {
    static ON: OnceLock<Option<Marks>> = OnceLock::new();
    ON.get_or_init(|| std::env::var_os(ENV).map(|_| Mutex::new(None)))
        .as_ref()
}

/// Ends the phase `name`: prints its wall time when `SWEEPGATE_PHASE_TIMES` is set (the
/// first mark of a run starts the clock and prints a zero-length phase).
pub fn mark(name: &str) {
    let Some(clock) = clock() else {
        return;
    };
    let now = Instant::now();
    let (first, previous) = {
        let mut c = clock.lock().unwrap_or_else(|e| e.into_inner());
        let (first, previous) = c.unwrap_or((now, now));
        *c = Some((first, now));
        (first, previous)
    };
    let ms = |d: std::time::Duration| d.as_secs_f64() * 1e3;
    eprintln!(
        "phase {name}: {:.2} ms (since start {:.2} ms)",
        ms(now - previous),
        ms(now - first)
    );
}
