//! How a Metropolis sweep cuts a colour class's site list into the groups of trials it
//! decides together (at most `max` sites each, buffers on the stack).
//!
//! The energy kernel reads the neighbours of a group's sites run by run, a run being the
//! group's sites in one row of cells; a run shorter than [`MIN_TRIAL_RUN`] goes site by
//! site, at several times the cost per site, and a group that is one stretch of one row
//! reads and writes its spins with contiguous loads and stores. Cut blindly every `max`
//! sites, a class whose rows do not hold a multiple of `max` sites straddles rows in
//! almost every group and leaves short pieces of rows at the groups' ends. So:
//!
//! * a row's stretch of at least half a group and at most a group is a group of its own
//!   (a checkerboard class of rows of 100 cells: groups of 50, not 64 made of 50 and 14,
//!   36 and 28, ..., 2 and 50 and 12) when it leaves at most [`MIN_TRIAL_RUN`] sites past
//!   the trial generator's last whole block of [`LANES`], which draws the rest one by one
//!   (as groups of their own, rows of 60 and 40 sites cost 12% and 2% more);
//! * otherwise a group is `max` sites, ending a row's stretch early where that row would
//!   leave fewer than [`MIN_TRIAL_RUN`] sites on either side of the cut.
//!
//! callgrind (one thread, instructions per site and sweep of `Metropolis::sweep`, the sc
//! config of `bench/configs/sc128-metropolis.toml` at other sizes, 2026-12-05): films of
//! 100 x 100 x 8 cells 288 -> 222, 96 x 96 x 8 247 -> 214, 64 x 64 x 8 247 -> 237,
//! 200 x 200 x 8 228 -> 219; periodic cubes of 20, 28 and 36 cells a side 450 -> 389,
//! 442 -> 355, 394 -> 330; 128 x 128 x 8 and cubes of 16, 24 and 40 unchanged within
//! 0.4%; 80 x 80 x 8 (rows of 40 class sites) 259 -> 260; bcc films of 50 x 50 x 8 and
//! 60 x 60 x 8 cells 655 -> 536 and 568 -> 564; honeycomb films of the same 460 -> 415 and
//! 416 -> 427. Which trials share a group changes no result: each trial's random numbers
//! belong to its site and sweep, its energy change is the same bits on every path of the
//! kernel, and the sweep's sums are integer sums.

use spindrift_hamiltonian::MIN_TRIAL_RUN;
use spindrift_noise::LANES;
use std::ops::Range;

/// The groups of `sites` (ascending site indices, rows of `row_len` sites), in order, as
/// ranges of positions in `sites`, each of 1 to `max` sites.
pub(crate) fn trial_groups(
    sites: &[u32],
    row_len: usize,
    max: usize,
) -> impl Iterator<Item = Range<usize>> + '_ {
    let (row_len, max) = (row_len.max(1) as u64, max.max(1));
    let mut start = 0;
    std::iter::from_fn(move || {
        if start >= sites.len() {
            return None;
        }
        let len = group_len(&sites[start..], row_len, max);
        let group = start..start + len;
        start += len;
        Some(group)
    })
}

/// The length of the group at the head of `rest` (not empty): see the module
/// documentation. A division and a bisection of at most `max + 1` sites, twice at most.
fn group_len(rest: &[u32], row_len: u64, max: usize) -> usize {
    if rest.len() <= max {
        // The list's last group.
        return rest.len();
    }
    let row_start = |i: u32| u64::from(i) / row_len * row_len;
    // How many sites at the head of `part` lie in the row of cells that starts at `start`.
    let in_row = |part: &[u32], start: u64| part.partition_point(|&i| u64::from(i) < start + row_len);
    let head = in_row(&rest[..=max], row_start(rest[0]));
    if (max / 2..=max).contains(&head) && head % LANES <= MIN_TRIAL_RUN {
        return head;
    }
    // Does the group cut the row of its last site, leaving a short piece on either side?
    let last = row_start(rest[max - 1]);
    if u64::from(rest[max]) < last + row_len {
        let tail = max - rest[..max].partition_point(|&i| u64::from(i) < last);
        let after = in_row(&rest[max..rest.len().min(max + MIN_TRIAL_RUN)], last);
        if (tail < MIN_TRIAL_RUN || after < MIN_TRIAL_RUN) && tail < max {
            return max - tail;
        }
    }
    max
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The group lengths, after checking that the groups take every site once, in order,
    /// 1 to `max` at a time.
    fn check(sites: &[u32], row_len: usize, max: usize) -> Vec<usize> {
        let groups: Vec<Range<usize>> = trial_groups(sites, row_len, max).collect();
        let mut next = 0;
        for g in &groups {
            assert_eq!(g.start, next, "groups in order, none left out");
            assert!(!g.is_empty() && g.len() <= max, "group {g:?} of 1 to {max} sites");
            next = g.end;
        }
        assert_eq!(next, sites.len(), "every site in a group");
        groups.iter().map(Range::len).collect()
    }

    /// A checkerboard class of `rows` rows of `n1` cells: sites of even `c1 + row`.
    fn checkerboard(n1: u32, rows: u32) -> Vec<u32> {
        (0..rows).flat_map(|r| (0..n1).filter(move |c| (c + r) % 2 == 0).map(move |c| r * n1 + c)).collect()
    }

    // Our own behaviour (the module documentation): the cases that motivated the rule.
    #[test]
    fn groups_follow_rows() {
        // 50 class sites per row: one group per row.
        assert_eq!(check(&checkerboard(100, 6), 100, 64), vec![50; 6]);
        // 64 per row: one group per row, as the plain cut gave.
        assert_eq!(check(&checkerboard(128, 3), 128, 64), vec![64; 3]);
        // 68 per row: 64, then four with the next row's first 60, and so on.
        assert_eq!(check(&checkerboard(136, 2), 136, 64), vec![64, 64, 8]);
        // 100 per row: 64 and 36 (over half a group).
        assert_eq!(check(&checkerboard(200, 2), 200, 64), vec![64, 36, 64, 36]);
        // 14 per row: 64 (8 of the fifth row, 6 left of it); then 62, not 64, which would
        // leave 2 of the tenth row; then that row's 14.
        assert_eq!(check(&checkerboard(28, 10), 28, 64), vec![64, 62, 14]);
        // 8 and 12 per row: cut every 64 sites (pieces of 4 and more).
        assert_eq!(check(&checkerboard(16, 16), 16, 64), vec![64, 64]);
        assert_eq!(check(&checkerboard(24, 12), 24, 64), vec![64, 64, 16]);
        // A list starting part-way through a row of 50: 40 of that row leave 8 past the
        // last block of 16, so 64 (40 and 24), then 64 (26 and 38), then the rest; one
        // starting 2 sites into such a row: its 48, then a row of 50 a group.
        let sites: Vec<u32> = checkerboard(100, 4)[10..].to_vec();
        assert_eq!(check(&sites, 100, 64), vec![64, 64, 62]);
        let sites: Vec<u32> = checkerboard(100, 4)[2..].to_vec();
        assert_eq!(check(&sites, 100, 64), vec![48, 50, 50, 50]);
        // 30 per row: under half a group, so cut at 64, whose piece of the third row is 4
        // sites, the shortest the kernel takes as a run; then 56.
        assert_eq!(check(&checkerboard(60, 4), 60, 64), vec![64, 56]);
    }

    // Our own behaviour: any ascending list is cut into groups of 1 to `max` sites in order
    // (scattered sites, several sites per cell, rows of one site, groups of one).
    #[test]
    fn any_list_is_cut_whole() {
        let mut state = 12345u64;
        for case in 0..200 {
            state = state.wrapping_mul(6364136223846793005).wrapping_add(1442695040888963407);
            let row_len = 1 + (state >> 33) as usize % 90;
            let max = 1 + (state >> 20) as usize % 70;
            let mut sites = Vec::new();
            let mut i = (state >> 50) as u32 % 7;
            for _ in 0..(state >> 40) as usize % 400 {
                sites.push(i);
                state = state.wrapping_mul(6364136223846793005).wrapping_add(1442695040888963407);
                i += 1 + (state >> 60) as u32 * (case % 3);
            }
            check(&sites, row_len, max);
        }
    }
}
