//! Fuzz the board loop's replay of a link capture (`sweepgate::pump::Pump::replay`): half
//! the inputs behind a valid capture header (K = 33 points, M = 64), the rest as they come.
//! Checks that nothing panics; that a refused capture names a byte inside the input (or its
//! end); and,
//! whenever the pump was configured, that every decoded sweep reached the engine and was
//! counted (`binned + rejected = pushed`), and that the preview output is exactly the frames
//! the pump counted, each a good record numbered in order.
#![no_main]

use libfuzzer_sys::fuzz_target;
use sweepgate::bins::BinLayout;
use sweepgate::error::ReplayError;
use sweepgate::gate::GateConfig;
use sweepgate::grid::Grid;
use sweepgate::pump::Pump;
use sweepgate::scan::EchoMode;
use sweepgate::window::WindowKind;
use sweepgate::wire::block::{ByteOrder, Format};
use sweepgate::wire::capture::{CaptureHeader, HEADER_LEN, MAX_PATTERN};
use sweepgate::wire::preview::Decoder;

fn valid_header(echo: EchoMode) -> Option<[u8; HEADER_LEN]> {
    let grid = Grid::from_start_stop(1e9, 2e9, 33).ok()?;
    let mut pattern = [0u16; MAX_PATTERN];
    pattern[..2].copy_from_slice(&[4, 20]);
    let h = CaptureHeader {
        gate: GateConfig {
            grid,
            band_window: WindowKind::Kaiser { beta: 6.0 },
            center_s: 5e-9,
            span_s: 4e-9,
            shape: WindowKind::Tukey { alpha: 0.5 },
            renormalize: true,
        },
        layout: BinLayout::full_circle(0.0, 10.0).ok()?,
        pattern,
        pattern_count: 2,
        format: Format::Real32,
        order: ByteOrder::Swapped,
        echo,
    };
    let mut out = [0u8; HEADER_LEN];
    h.emit(&mut out);
    Some(out)
}

fuzz_target!(|data: &[u8]| {
    let Some((&choice, rest)) = data.split_first() else {
        return;
    };
    let mut input = Vec::new();
    if choice & 1 == 1 {
        let echo = if choice & 2 == 0 {
            EchoMode::Never
        } else {
            EchoMode::EveryBin
        };
        let Some(h) = valid_header(echo) else { return };
        input.extend_from_slice(&h);
    }
    input.extend_from_slice(rest);
    let mut pump: Box<Pump<64, 2, 36>> = Box::new(Pump::unconfigured());
    let mut out = Vec::new();
    let r = pump.replay(&mut &input[..], &mut out, None, &mut ());
    if let Err(ReplayError::Capture { at_byte, .. }) = r {
        assert!(
            at_byte <= input.len() as u64,
            "{at_byte} of {}",
            input.len()
        );
    }
    if !pump.is_configured() {
        assert!(out.is_empty());
        return;
    }
    let k = pump.scan().counters();
    assert_eq!(k.sweeps_pushed, pump.counters().sweeps_decoded);
    assert_eq!(k.sweeps_binned + k.sweeps_rejected(), k.sweeps_pushed);
    assert_eq!(k.angles_accepted + k.angles_rejected(), k.angles_pushed);
    // Every frame ends with the one zero byte COBS leaves in it.
    let frames = out.iter().filter(|&&b| b == 0).count();
    assert_eq!(frames as u32, pump.counters().frames_sent);
    assert_eq!(pump.counters().frames_sent, k.bins_closed);
    let mut dec: Decoder<2, 512> = Decoder::new();
    let mut next = 0u16;
    dec.feed(&out, |seq, _| {
        assert_eq!(seq, next);
        next = next.wrapping_add(1);
    });
    assert_eq!(dec.counters().good, pump.counters().frames_sent);
});
