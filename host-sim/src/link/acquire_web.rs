//! `acquire --web`: the live engine's closed bins, impulse responses and status as preview
//! frames for the web view ([`crate::web`]), the same frames a board would send, so the page
//! reads an acquisition exactly as it reads `replay` or a board's stream.

use sweepgate::scan::Event;
use sweepgate::wire::preview::{encode_frame, PreviewRecord};

use crate::formats::rcs_record::RcsCalibration;
use crate::limits::{MAX_FRAME_BYTES, MAX_FREQUENCIES};
use crate::pipeline::engine::Engine;
use crate::pipeline::replay_rcs;
use crate::pipeline::setup::Setup;
use crate::pipeline::stream::STATUS_INTERVAL_US;
use crate::pipeline::web_feed;
use crate::web::{Ended, Hub};

/// The live engine's output on its way to the web view.
pub struct WebFeed {
    hub: Hub,
    seq: u16,
    last_status_us: Option<u64>,
    rcs: Option<RcsCalibration>,
}

impl WebFeed {
    /// Names the scan set up as `setup` to the web view and starts the feed; with `rcs` (an
    /// RCS scan's calibration) the bins go out in calibrated amplitude and the page shows
    /// them in absolute dBsm, as for `replay` of a calibrated recording.
    pub fn new(hub: Hub, setup: &Setup, source: &str, rcs: Option<RcsCalibration>) -> Self {
        let mut meta = web_feed::meta_of(setup, source);
        if rcs.is_some() {
            meta.absolute_levels = Some(replay_rcs::web_levels());
        }
        hub.set_meta(meta);
        Self {
            hub,
            seq: 0,
            last_status_us: None,
            rcs,
        }
    }

    fn emit(&mut self, r: &PreviewRecord<MAX_FREQUENCIES>) {
        let mut buf = [0u8; MAX_FRAME_BYTES];
        if let Ok(n) = encode_frame(r, self.seq, &mut buf) {
            self.hub.publish(&buf[..n]);
        }
        self.seq = self.seq.wrapping_add(1);
    }

    /// Sends the bins `events` closed, the impulse responses the engine kept, and a status
    /// record every [`STATUS_INTERVAL_US`] of scan time (`t_us`; `None`: now, at the end).
    pub fn events(
        &mut self,
        engine: &mut Engine,
        events: &[Event<MAX_FREQUENCIES>],
        t_us: Option<u64>,
    ) {
        for e in events {
            if let Event::BinClosed(r) = e {
                let mut b = r.to_record();
                if let Some(c) = &self.rcs {
                    replay_rcs::calibrate_bin(c, &mut b);
                }
                self.emit(&PreviewRecord::Bin(b));
            }
        }
        for r in engine.take_impulses() {
            self.emit(&PreviewRecord::Impulse(r));
        }
        let due = match (t_us, self.last_status_us) {
            (None, _) | (Some(_), None) => true,
            (Some(t), Some(l)) => t.saturating_sub(l) >= STATUS_INTERVAL_US,
        };
        if due {
            self.emit(&PreviewRecord::Status(engine.status()));
            if let Some(t) = t_us {
                self.last_status_us = Some(t);
            }
        }
    }
}

/// Tells the web view that the acquisition has ended, with its one-line outcome.
pub fn ended(hub: &Hub, summary: String) {
    hub.end(
        None,
        Ended {
            files: Vec::new(),
            summary,
        },
    );
}
