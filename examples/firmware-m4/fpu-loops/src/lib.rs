//! The sweepgate core's per-point loops written for the Cortex-M4F's FPU.
//!
//! The core's loops (`src/loops.rs`) are plain Rust, and on the Cortex-M4F the compiler
//! loads each single-precision value with its own `VLDR`: a complex multiply-accumulate then
//! costs four loads and four multiply-accumulates. The FPU can load eight values in one
//! `VLDM`, which the compiler does not choose (its register allocator does not hand out the
//! consecutive registers a `VLDM` needs). Here the loops are written in assembly with
//! `VLDM`/`VSTM` and `VMLA`/`VMLS`, a few points a step; each returns how many points it
//! did, and the core's Rust loop does the rest.
//!
//! Results are bit for bit those of the core's Rust loops: every value takes the same
//! operations in the same order (`VMLA`/`VMLS` round the product before the sum, as a
//! separate multiply and add do; nothing is fused), which the firmware's capture of the
//! kernel path checks against the host (`.ci/run`).
//!
//! One loop here is not floating point: the block decoder's copy of whole REAL,32 samples
//! (`real32_copy`: word loads, byte reversal, store-multiple), kept beside the others as the
//! core's one other hot loop that the compiler does not write well for this core.
//!
//! The core calls these only with its `fpu-loops` feature and only on 32-bit ARM with a
//! hardware FPU; on every other target this crate is empty.
#![no_std]

#[cfg(all(target_arch = "arm", target_abi = "eabihf"))]
mod arm;
#[cfg(all(target_arch = "arm", target_abi = "eabihf"))]
pub use arm::*;
