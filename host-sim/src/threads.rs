//! A bounded pool of worker threads for work split into independent items: `process`
//! reads a manifest's files and gates its sweeps on it (`--threads N`, default every core).
//!
//! Items are taken in blocks of consecutive items, a block at a time, by at most `threads`
//! scoped threads; the results come back in item order. Each item's result depends on the
//! item alone, so any number of threads gives the same results bit for bit (tested in
//! `pipeline::engine` and `tests/process_threads.rs`). This module imports nothing of the
//! crate, so any folder may use it.

use std::num::NonZeroUsize;
use std::sync::atomic::{AtomicUsize, Ordering};
use std::sync::Mutex;

/// Stack of each worker: room for a Touchstone parse and an M = 4096 gate's buffers.
const WORKER_STACK_BYTES: usize = 8 << 20;

/// The number of cores this process may use (1 when the system does not say).
pub fn available() -> usize {
    std::thread::available_parallelism().map_or(1, NonZeroUsize::get)
}

/// Runs `work` over `items` in blocks of up to `block` consecutive items on up to `threads`
/// threads (1 runs on the calling thread). Each thread makes its own state with `init` once
/// (an FFT plan and buffers, say) and hands it to `work` with each block it takes; `work`
/// gives one result per item of the block. Returns every result in item order.
///
/// ```
/// use sweepgate_host::threads::map_blocks;
/// let squares = map_blocks(&[1, 2, 3, 4, 5], 2, 2, || (), |_, b: &[i32]| {
///     b.iter().map(|x| x * x).collect()
/// });
/// assert_eq!(squares, [1, 4, 9, 16, 25]);
/// ```
pub fn map_blocks<T, R, S>(
    items: &[T],
    threads: usize,
    block: usize,
    init: impl Fn() -> S + Sync,
    work: impl Fn(&mut S, &[T]) -> Vec<R> + Sync,
) -> Vec<R>
where
    T: Sync,
    R: Send,
{
    let block = block.max(1);
    let blocks = items.len().div_ceil(block);
    let threads = threads.clamp(1, blocks.max(1));
    if threads == 1 {
        let mut state = init();
        return items
            .chunks(block)
            .flat_map(|b| work(&mut state, b))
            .collect();
    }
    let next = AtomicUsize::new(0);
    let done: Mutex<Vec<(usize, Vec<R>)>> = Mutex::new(Vec::with_capacity(blocks));
    std::thread::scope(|scope| {
        for _ in 0..threads {
            let worker = || {
                let mut state = init();
                loop {
                    let i = next.fetch_add(1, Ordering::Relaxed);
                    let Some(b) = items.chunks(block).nth(i) else {
                        break;
                    };
                    let r = work(&mut state, b);
                    done.lock().unwrap_or_else(|e| e.into_inner()).push((i, r));
                }
            };
            let spawned = std::thread::Builder::new()
                .name("worker".into())
                .stack_size(WORKER_STACK_BYTES)
                .spawn_scoped(scope, worker);
            if spawned.is_err() {
                // No thread to be had: the threads already running (or none, then the
                // calling thread below) take every block.
                break;
            }
        }
    });
    let mut done = done.into_inner().unwrap_or_else(|e| e.into_inner());
    // Blocks no thread took (none could be started) are worked here.
    let mut state = None;
    for (i, b) in items.chunks(block).enumerate() {
        if !done.iter().any(|(j, _)| *j == i) {
            let s = state.get_or_insert_with(&init);
            done.push((i, work(s, b)));
        }
    }
    done.sort_unstable_by_key(|(i, _)| *i);
    done.into_iter().flat_map(|(_, r)| r).collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn results_come_back_in_item_order_whatever_the_threads_and_blocks() {
        let items: Vec<u64> = (0..1000).collect();
        let one = map_blocks(
            &items,
            1,
            7,
            || 0u32,
            |_, b| b.iter().map(|x| x * 3 + 1).collect(),
        );
        assert_eq!(one.len(), 1000);
        assert!(one.iter().enumerate().all(|(i, &r)| r == i as u64 * 3 + 1));
        for threads in [2, 3, 8] {
            for block in [1, 7, 64, 5000] {
                let r = map_blocks(
                    &items,
                    threads,
                    block,
                    || 0u32,
                    |_, b| b.iter().map(|x| x * 3 + 1).collect(),
                );
                assert_eq!(r, one, "threads {threads}, block {block}");
            }
        }
    }

    #[test]
    fn each_thread_keeps_its_state_across_blocks() {
        // The state counts the blocks a thread took: the counts over all threads add up to
        // the number of blocks.
        let items: Vec<u8> = vec![0; 100];
        let seen = map_blocks(
            &items,
            2,
            10,
            || 0usize,
            |n, b| {
                *n += 1;
                vec![*n; b.len()]
            },
        );
        let firsts: usize = seen.chunks(10).filter(|c| c[0] == 1).count();
        assert!((1..=2).contains(&firsts), "{firsts} threads started");
        let none: Vec<u8> = map_blocks(&[] as &[u8], 4, 3, || (), |_, b| b.to_vec());
        assert!(none.is_empty());
    }
}
