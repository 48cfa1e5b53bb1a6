//! How a sweep shares its threads among its points.
//!
//! A small system gains little from a second thread: each step or sweep forks and joins its
//! parallel loops, and below some ten thousand sites a thread's share is too short to pay
//! for that. Points of a sweep are independent runs, so a sweep starts each point once the
//! threads its size needs ([`demand`]) and its memory are free ([`Budget`]), the first in
//! index order that fits ([`next_to_start`]: a large point waiting for threads still busy
//! lets smaller ones after it use the idle ones), and gives it a share of the idle threads
//! when the points still to start are too few to use them all ([`share`]): small points
//! run side by side, large ones on every thread.
//! Every run gives the same bits for any thread count, so this changes how long a sweep
//! takes, never what it computes.

/// Sites per thread a sweep's point needs: below that, a point is given fewer threads, so
/// that more points run at once. Measured on a 2-core first-generation Zen node (2026-12-05, whole runs of
/// `bench/configs/sc128.toml` at 300 K and of its Metropolis twin): 1024 sites ran at
/// 0.86-0.96 times the one-thread rate on two threads, 8192 sites at 1.4-1.7 times (Heun)
/// and 1.7 (Metropolis), while two one-thread runs side by side gave 2 times; at 32768
/// sites two threads on one run (2.1-2.8e7 spin-steps/s) and two one-thread runs at once
/// (2.4-2.8e7 together) were about even, at 131072 sites 2.3-2.5e7 against 2.6-2.7e7.
/// (The Heun step then shared its parallel loops out in chunks of 4096 sites, so a system
/// of up to 4096 sites ran its steps on one thread whatever the pool held; since
/// 2026-12-05 it splits such a system among the threads, 1.3-1.8 times as fast on two,
/// still short of two runs side by side.) Again on a
/// third-generation Zen node (2026-12-05, the same runs, two rounds; two threads on one
/// run against two one-thread runs side by side, each over one thread alone): 1024 sites
/// 1.24-1.30 against 1.64-1.98, 8192 sites 1.33-1.60 against 1.83-1.96, 16384 sites
/// 1.81-1.82 against 1.96-2.00, 32768 sites 1.84-1.86 against 1.94-2.05: side by side
/// stays ahead a little longer there. Larger systems there (2026-12-05, two rounds; sc with
/// the bench configs' couplings): Metropolis, a periodic 32^3 cube 1.26-1.48 against
/// 1.95-2.08, a 40^3 cube (64000 sites) 1.10-1.41 against 1.56-1.78, a film of 64x64x16
/// (65536) 1.19-1.73 against 1.91-2.21; Heun, the 40^3 cube 1.83-1.85 against 1.80-2.05,
/// the 64x64x16 film 1.45-1.53 against 1.83-1.91. So a point takes a second thread from
/// 131072 sites (where both nodes measured two threads on one run about even with side by
/// side, and the bench's 128x128x8 runs at 1.9-2.2 times one thread on two), not from 32768
/// as before: a sweep of temperatures over cubes of 32 to 50 cells a side runs its points
/// side by side. (Since af48760 the Metropolis figures of the cubes are about 1.1 times
/// higher, their slab boundaries now shared among the threads: still below side by side.)
pub const SITES_PER_THREAD: usize = 65536;

/// Threads a point of `sites` sites should have, out of a sweep's `threads`: one per
/// [`SITES_PER_THREAD`] sites, at least one and at most `threads`.
pub fn demand(threads: usize, sites: usize) -> usize {
    (sites / SITES_PER_THREAD).clamp(1, threads.max(1))
}

/// Threads to give a point that needs `need` when `free` threads are idle and `remaining`
/// points (this one included) are still to start: its need, or a share of the idle threads
/// when the points left are too few to use them all (so that a sweep of one small point
/// still runs on every thread, and the last points of a sweep on the threads the others
/// left), never more than are idle. The caller waits until `free >= need`.
pub fn share(need: usize, free: usize, remaining: usize) -> usize {
    need.max(free / remaining.max(1)).min(free)
}

/// Threads and memory (bytes) of a sweep not taken by its running points, and how many
/// points run.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Budget {
    pub threads: usize,
    pub memory: u64,
    pub running: usize,
}

impl Budget {
    /// Whether a point needing `threads` threads and `memory` bytes can start now. A point
    /// larger than the memory left starts once nothing else runs (its own validation has
    /// checked it against the machine's memory).
    pub fn admits(&self, threads: usize, memory: u64) -> bool {
        self.threads >= threads && (memory <= self.memory || self.running == 0)
    }
}

/// The first of the points still to start, given as their `(threads, memory)` needs in
/// index order, that `budget` admits now, or `None` if none does. First fit: a point that
/// needs more threads than are idle waits while smaller points after it start, and starts
/// once its threads are free together, at the latest when the smaller ones have all
/// started and run out (the list is finite, so no point waits for ever).
pub fn next_to_start(pending: &[(usize, u64)], budget: &Budget) -> Option<usize> {
    pending.iter().position(|&(threads, memory)| budget.admits(threads, memory))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_point_needs_a_thread_per_share_of_sites() {
        assert_eq!(demand(2, 1024), 1);
        assert_eq!(demand(2, 65_536), 1);
        assert_eq!(demand(2, 131_072), 2);
        assert_eq!(demand(2, 10_000_000), 2);
        assert_eq!(demand(32, 1_000_000), 15);
        assert_eq!(demand(0, 0), 1);
    }

    #[test]
    fn spare_threads_go_to_the_last_points() {
        // Two cores, three small points: one thread each, the third when one is free.
        assert_eq!(share(1, 2, 3), 1);
        assert_eq!(share(1, 1, 2), 1);
        assert_eq!(share(1, 1, 1), 1);
        // A single small point takes both, as a sweep of one point always did.
        assert_eq!(share(1, 2, 1), 2);
        // 32 threads, two points of 100000 sites: 16 each.
        assert_eq!(share(6, 32, 2), 16);
        assert_eq!(share(6, 16, 1), 16);
        // 32 threads, forty such points: their need.
        assert_eq!(share(6, 32, 40), 6);
    }

    #[test]
    fn memory_holds_a_point_back_while_others_run() {
        let b = Budget { threads: 4, memory: 1 << 30, running: 1 };
        assert!(b.admits(2, 1 << 29));
        assert!(!b.admits(2, 1 << 31));
        assert!(!b.admits(8, 1 << 20));
        assert!(Budget { running: 0, ..b }.admits(2, 1 << 40));
    }

    #[test]
    fn a_point_that_fits_starts_before_one_that_waits() {
        // Two cores, one busy: the large point (two threads) waits, the small one after it
        // starts; with both idle the large one goes first, in index order.
        let pending = [(2, 1 << 20), (1, 1 << 20), (1, 1 << 20)];
        let one_idle = Budget { threads: 1, memory: 1 << 30, running: 1 };
        assert_eq!(next_to_start(&pending, &one_idle), Some(1));
        assert_eq!(next_to_start(&pending, &Budget { threads: 2, ..one_idle }), Some(0));
        assert_eq!(next_to_start(&pending[..1], &one_idle), None);
        // Memory as well: a point larger than the memory left waits behind one that fits.
        let pending = [(1, 1 << 31), (1, 1 << 20)];
        assert_eq!(next_to_start(&pending, &one_idle), Some(1));
        assert_eq!(next_to_start(&pending, &Budget { running: 0, ..one_idle }), Some(0));
        assert_eq!(next_to_start(&[], &one_idle), None);
    }
}
