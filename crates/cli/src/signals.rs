//! SIGINT and SIGTERM ask the run to stop at its next safe point with a checkpoint; a
//! second signal ends the process at once. SIGXFSZ, which a write past a per-file size limit
//! (`ulimit -f`) raises, is caught for every command, so that such a write fails with an
//! error the command reports (exit 4; a run keeps the rows written) instead of killing it.

use signal_hook::consts::{SIGINT, SIGTERM, SIGXFSZ};
use signal_hook::iterator::Signals;
use std::sync::atomic::{AtomicI32, Ordering};
use std::sync::{Arc, OnceLock};

static STOP: OnceLock<Arc<AtomicI32>> = OnceLock::new();

/// Catches SIGXFSZ, which a write past a per-file size limit raises and which by default ends
/// the process: caught, the write fails with `EFBIG` instead, and the command reports it.
pub fn catch_file_size_signal() -> std::io::Result<()> {
    signal_hook::flag::register(SIGXFSZ, Arc::new(std::sync::atomic::AtomicBool::new(false))).map(|_| ())
}

/// The process's stop flag, with SIGINT and SIGTERM routed to it (the signal number is
/// stored). Installed once; later calls return the same flag, cleared.
pub fn install() -> std::io::Result<Arc<AtomicI32>> {
    if let Some(stop) = STOP.get() {
        stop.store(0, Ordering::Relaxed);
        return Ok(stop.clone());
    }
    let stop = Arc::new(AtomicI32::new(0));
    let _ = STOP.set(stop.clone());
    let flag = stop.clone();
    let mut signals = Signals::new([SIGINT, SIGTERM])?;
    std::thread::Builder::new().name("signals".into()).spawn(move || {
        for sig in signals.forever() {
            if flag.load(Ordering::Relaxed) != 0 {
                eprintln!("spindrift: second signal, stopping without a checkpoint");
                std::process::exit(128 + sig);
            }
            eprintln!("spindrift: signal {sig} received, stopping at the next safe point with a checkpoint");
            flag.store(sig, Ordering::Relaxed);
        }
    })?;
    Ok(stop)
}
