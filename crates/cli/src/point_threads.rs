//! How a sweep shares its threads among its points.
//!
//! A small system gains little from a second thread: each step or sweep forks and joins its
//! parallel loops, and below some ten thousand sites a thread's share is too short to pay
//! for that. Points of a sweep are independent runs, so a sweep of small systems runs
//! several points at once, each on fewer threads, instead of one point at a time on all of
//! them. Every run gives the same bits for any thread count, so this changes how long a
//! sweep takes, never what it computes.

/// Sites per thread below which a sweep's point is given fewer threads, so that more points
/// run at once. Measured on a 2-core first-generation Zen node (2026-12-05, whole runs of
/// `bench/configs/sc128.toml` at 300 K and of its Metropolis twin): 1024 sites ran at
/// 0.86-0.96 times the one-thread rate on two threads, 8192 sites at 1.4-1.7 times (Heun)
/// and 1.7 (Metropolis), while two one-thread runs side by side gave 2 times; at 32768
/// sites two threads on one run (2.1-2.8e7 spin-steps/s) and two one-thread runs at once
/// (2.4-2.8e7 together) were about even, at 131072 sites 2.3-2.5e7 against 2.6-2.7e7.
/// (The Heun step shares its parallel loops out in chunks of 4096 sites, so a system of
/// up to 4096 sites runs its steps on one thread whatever the pool holds.)
pub const SITES_PER_THREAD: usize = 16384;

/// How many points of a sweep run at once, and on how many threads each.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Plan {
    /// Points running at the same time (at least one).
    pub at_once: usize,
    /// Worker threads of each running point (at least one).
    pub threads_per_point: usize,
}

/// The plan for `points` points to run with `threads` threads in all, the largest point
/// having `largest_sites` sites and needing `largest_bytes` of memory, with `memory` bytes
/// available (if known).
///
/// Each point needs one thread per [`SITES_PER_THREAD`] sites (at least one); as many
/// points run at once as the threads allow, but no more than there are points and no more
/// than fit the memory together; the threads are then shared evenly among the running
/// points, so a sweep of fewer points than that still uses every thread.
pub fn plan(
    threads: usize,
    points: usize,
    largest_sites: usize,
    largest_bytes: u64,
    memory: Option<u64>,
) -> Plan {
    let threads = threads.max(1);
    let needed = (largest_sites / SITES_PER_THREAD).clamp(1, threads);
    let mut at_once = (threads / needed).min(points).max(1);
    if let Some(memory) = memory {
        let fit = usize::try_from(memory / largest_bytes.max(1)).unwrap_or(usize::MAX);
        at_once = at_once.min(fit.max(1));
    }
    Plan { at_once, threads_per_point: threads / at_once }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn small_points_run_side_by_side_on_one_thread_each() {
        assert_eq!(plan(2, 10, 1024, 1 << 20, None), Plan { at_once: 2, threads_per_point: 1 });
        assert_eq!(plan(32, 100, 20_000, 1 << 20, None), Plan { at_once: 32, threads_per_point: 1 });
    }

    #[test]
    fn large_points_take_every_thread() {
        assert_eq!(plan(2, 10, 131_072, 1 << 30, None), Plan { at_once: 1, threads_per_point: 2 });
        assert_eq!(plan(32, 10, 10_000_000, 1 << 30, None), Plan { at_once: 1, threads_per_point: 32 });
    }

    #[test]
    fn middling_points_share_the_threads_evenly() {
        // 100000 sites need 6 threads: 5 points at once on a 32-thread node, 6 threads each.
        assert_eq!(plan(32, 40, 100_000, 1 << 20, None), Plan { at_once: 5, threads_per_point: 6 });
    }

    #[test]
    fn fewer_points_than_slots_get_the_spare_threads() {
        assert_eq!(plan(2, 1, 1024, 1 << 20, None), Plan { at_once: 1, threads_per_point: 2 });
        assert_eq!(plan(32, 2, 100_000, 1 << 20, None), Plan { at_once: 2, threads_per_point: 16 });
    }

    #[test]
    fn memory_limits_the_points_at_once() {
        assert_eq!(plan(8, 10, 1024, 1 << 30, Some(3 << 30)), Plan { at_once: 3, threads_per_point: 2 });
        // A point larger than the memory still runs (its own validation refuses it, not this).
        assert_eq!(plan(8, 10, 1024, 1 << 30, Some(1 << 20)), Plan { at_once: 1, threads_per_point: 8 });
    }

    #[test]
    fn degenerate_counts_still_plan_one_point_on_one_thread() {
        assert_eq!(plan(0, 0, 0, 0, Some(0)), Plan { at_once: 1, threads_per_point: 1 });
    }
}
