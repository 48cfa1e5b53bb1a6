//! Disk space held back while a run writes, so that a full disk cannot cost the rows
//! already computed.
//!
//! HDF5 1.10 keeps metadata in a cache and has no journal: when a write fails because the
//! disk is full, the flush on closing fails part-way too, and the whole file can become
//! unreadable (seen on a full tmpfs: every row of the run lost, not just the last). So
//! [`RunFile`](crate::RunFile) holds a file of real blocks in the run folder, big enough
//! for what a failing run still has to write (the pending rows, a snapshot written again,
//! the final spins and the cache's metadata), and deletes it at the first failed write:
//! the writes that follow (the engine saves the last good state and flushes) then find
//! room, and the file closes intact with every row up to the failure.
//!
//! The blocks are pseudo-random bytes rather than zeros, so that a file system that
//! compresses (or stores runs of zeros as holes) still allocates them. Quotas count the
//! file too. A per-file size limit (`ulimit -f`) is not helped by it.

use std::io::Write;
use std::path::{Path, PathBuf};

use crate::error::IoError;

/// Name of the reserve file inside the run folder.
pub(crate) const RESERVE_FILE: &str = ".spindrift-reserve";

/// Bytes held for HDF5's metadata and the small tables, beyond the per-site part.
const FIXED_BYTES: u64 = 8 << 20;

/// Bytes held per site: a snapshot written again and the final spins, 24 bytes each.
const BYTES_PER_SITE: u64 = 48;

/// Bytes the reserve holds for a lattice of `sites` sites.
pub fn reserve_bytes(sites: usize) -> u64 {
    FIXED_BYTES + BYTES_PER_SITE * sites as u64
}

/// A reserve file, deleted when dropped.
#[derive(Debug)]
pub(crate) struct Reserve {
    path: PathBuf,
}

impl Reserve {
    /// Writes `DIR/.spindrift-reserve` of `bytes` bytes (replacing any left by a killed run).
    /// A disk that cannot hold it fails here, before the run has computed anything.
    pub(crate) fn create(dir: &Path, bytes: u64) -> Result<Reserve, IoError> {
        let path = dir.join(RESERVE_FILE);
        let reserve = Reserve { path };
        let fail = |e| IoError::os(&reserve.path, "writing the disk reserve (is the disk full?)", e);
        let mut f = std::fs::File::create(&reserve.path).map_err(fail)?;
        // xorshift64 (Marsaglia, J. Stat. Softw. 8(14), 2003): bytes no file system
        // compresses away; their values do not matter.
        let mut block = vec![0u8; 1 << 20];
        let mut x: u64 = 0x9e37_79b9_7f4a_7c15;
        for word in block.chunks_exact_mut(8) {
            x ^= x << 13;
            x ^= x >> 7;
            x ^= x << 17;
            word.copy_from_slice(&x.to_le_bytes());
        }
        let mut left = bytes;
        while left > 0 {
            let k = left.min(block.len() as u64) as usize;
            f.write_all(&block[..k]).map_err(fail)?;
            left -= k as u64;
        }
        f.sync_all().map_err(fail)?;
        Ok(reserve)
    }
}

impl Drop for Reserve {
    fn drop(&mut self) {
        // A reserve that cannot be deleted leaves a file in the run folder, nothing worse.
        let _ = std::fs::remove_file(&self.path);
    }
}
