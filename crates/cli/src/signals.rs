//! SIGINT and SIGTERM ask the run to stop at its next safe point with a checkpoint; a
//! second signal ends the process at once. SIGXFSZ, which a write past a per-file size limit
//! (`ulimit -f`) raises, is caught and ignored, so that such a write fails with an error the
//! run reports and survives (exit 4, the rows written kept) instead of killing the process.

use signal_hook::consts::{SIGINT, SIGTERM, SIGXFSZ};
use signal_hook::iterator::Signals;
use std::sync::atomic::{AtomicI32, Ordering};
use std::sync::{Arc, OnceLock};

static STOP: OnceLock<Arc<AtomicI32>> = OnceLock::new();

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
    signal_hook::flag::register(SIGXFSZ, Arc::new(std::sync::atomic::AtomicBool::new(false)))?;
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
