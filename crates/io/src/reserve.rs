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
//! file too.
//!
//! A per-file size limit (`ulimit -f`, `RLIMIT_FSIZE`) is not helped by a second file: there
//! the run file itself stops growing at the limit less the reserve's size
//! ([`file_size_limit`], checked by `RunFile` before each row and snapshot), which leaves
//! the last writes the same room within the limit.

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

/// The process's per-file size limit in bytes (the soft `RLIMIT_FSIZE`, as Linux lists it in
/// `/proc/self/limits`), or `None` when it is unlimited or cannot be read.
pub(crate) fn file_size_limit() -> Option<u64> {
    let limits = std::fs::read_to_string("/proc/self/limits").ok()?;
    parse_file_size_limit(&limits)
}

fn parse_file_size_limit(limits: &str) -> Option<u64> {
    let line = limits.lines().find(|l| l.starts_with("Max file size"))?;
    line["Max file size".len()..].split_whitespace().next()?.parse().ok()
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

#[cfg(test)]
mod tests {
    use super::parse_file_size_limit;

    /// The layout of `/proc/self/limits` (Linux, proc(5)): the soft limit is the first number.
    #[test]
    fn reads_the_soft_file_size_limit() {
        let text = "Limit                     Soft Limit           Hard Limit           Units     \n\
                    Max cpu time              unlimited            unlimited            seconds   \n\
                    Max file size             12582912             unlimited            bytes     \n\
                    Max core file size        0                    unlimited            bytes     \n";
        assert_eq!(parse_file_size_limit(text), Some(12_582_912));
        let open = text.replace("12582912 ", "unlimited");
        assert_eq!(parse_file_size_limit(&open), None);
        assert_eq!(parse_file_size_limit("Max core file size 0 0 bytes\n"), None);
    }
}
