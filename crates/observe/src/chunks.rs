//! How the fixed-size work chunks fall on the planes of cells along `a3`.
//!
//! Reductions sum each chunk of [`CHUNK`] sites on its own and then add the partial sums in
//! chunk order, so the result does not depend on how many threads ran the chunks. A chunk
//! only touches the few planes of cells (`c3` values) its sites lie in, so per-layer partial
//! sums need room for those planes only, not for every layer of the system.

use spindrift_hamiltonian::CHUNK;
use std::ops::Range;

/// The chunk decomposition of `len` sites with `plane` sites per plane of cells.
#[derive(Debug, Clone)]
pub(crate) struct ChunkPlanes {
    len: usize,
    plane: usize,
    /// Number of chunks.
    pub(crate) count: usize,
    /// Most planes any chunk touches.
    pub(crate) span: usize,
}

impl ChunkPlanes {
    pub(crate) fn new(len: usize, plane: usize) -> Self {
        let count = len.div_ceil(CHUNK);
        let mut out = Self { len, plane: plane.max(1), count, span: 0 };
        out.span = (0..count).map(|k| out.planes(k).len()).max().unwrap_or(0);
        out
    }

    /// First site of chunk `k`.
    #[inline]
    pub(crate) fn start(k: usize) -> usize {
        k * CHUNK
    }

    /// The planes (`c3` values) that chunk `k` touches.
    #[inline]
    pub(crate) fn planes(&self, k: usize) -> Range<usize> {
        let start = k * CHUNK;
        let end = ((k + 1) * CHUNK).min(self.len);
        if start >= end {
            return start / self.plane..start / self.plane;
        }
        start / self.plane..(end - 1) / self.plane + 1
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn chunks_cover_every_plane_they_touch() {
        for (len, plane) in
            [(10, 3), (CHUNK * 3 + 7, 100), (CHUNK * 2, CHUNK), (5 * CHUNK, 7 * CHUNK), (1, 1)]
        {
            let c = ChunkPlanes::new(len, plane);
            let mut seen = vec![false; len.div_ceil(plane)];
            for k in 0..c.count {
                let r = c.planes(k);
                assert!(r.len() <= c.span);
                let first = ChunkPlanes::start(k);
                let last = (first + CHUNK).min(len) - 1;
                assert_eq!(r.start, first / plane);
                assert_eq!(r.end - 1, last / plane);
                for p in r {
                    seen[p] = true;
                }
            }
            assert!(seen.iter().all(|&s| s), "len {len} plane {plane}");
        }
    }
}
