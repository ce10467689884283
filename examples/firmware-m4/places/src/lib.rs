//! Static storage for the firmware's board loops, each built where it lies.
//!
//! The firmware is built for size, and a build for size constructs a large value in a local
//! and then copies it into its `static` (as `cortex_m::singleton!` does): the whole board
//! loop (42 KiB) would pass through the stack. This crate is built for speed (see the
//! firmware's `Cargo.toml`), where the compiler writes the constructor's result straight
//! into the `static`; its functions are not generic, so they are compiled here.
//!
//! The one-trace loop and the loop of cuts share one storage: the firmware runs them one
//! after the other, never both at once, and the full image's gate measurements at
//! M = 2048 need the RAM that a second storage would take.
#![no_std]

use core::cell::UnsafeCell;
use core::mem::{ManuallyDrop, MaybeUninit};
use core::sync::atomic::{AtomicBool, Ordering};
use sweepgate::cut_pump::CutPump;
use sweepgate::pump::Pump;

/// The board's loop: decoder, engine `Scan<1024, 8, 361>`, preview frames.
pub type BoardPump = Pump<1024, 8, 361>;

/// The board loop of cuts: two traces, M = 256, 8 pattern frequencies, 64 bins.
pub type BoardCutPump = CutPump<256, 8, 64, 64, 1>;

/// Room for either loop.
#[repr(C)]
union Storage {
    board: ManuallyDrop<BoardPump>,
    cuts: ManuallyDrop<BoardCutPump>,
}

/// The storage and whether it has been handed out.
struct Loops {
    taken: AtomicBool,
    storage: UnsafeCell<MaybeUninit<Storage>>,
}

// SAFETY: the storage is reached only through `board_pump`, which hands it out once.
unsafe impl Sync for Loops {}

static LOOPS: Loops = Loops {
    taken: AtomicBool::new(false),
    storage: UnsafeCell::new(MaybeUninit::uninit()),
};

/// The one-trace loop, unconfigured, in static storage: `Some` the first time only.
#[inline(never)]
pub fn board_pump() -> Option<&'static mut BoardPump> {
    if LOOPS.taken.swap(true, Ordering::Relaxed) {
        return None;
    }
    // SAFETY: the flag lets this point be passed once, so this is the only reference to
    // the storage ever made here; a `Storage` (repr(C) union) holds a `BoardPump` at its
    // start, suitably aligned.
    let place = unsafe { &mut *LOOPS.storage.get().cast::<MaybeUninit<BoardPump>>() };
    Some(place.write(BoardPump::unconfigured()))
}

/// The loop of cuts, unconfigured, in the storage of the one-trace loop, which is given up
/// (the reference is taken by value, so its holder cannot use it again).
#[inline(never)]
pub fn cut_pump(board: &'static mut BoardPump) -> &'static mut BoardCutPump {
    let place = (board as *mut BoardPump).cast::<MaybeUninit<BoardCutPump>>();
    // SAFETY: `board` is the only reference to the storage (from `board_pump`) and is
    // consumed here; the storage holds a `BoardCutPump` at its start, suitably aligned.
    // Neither loop needs dropping.
    unsafe { &mut *place }.write(BoardCutPump::unconfigured())
}
