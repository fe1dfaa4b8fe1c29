//! The one way the long-running commands (`record`, `watch`) hear SIGINT, SIGTERM and
//! SIGHUP: a flag their loops look at, so each ends cleanly with its log finished.

use std::io;
use std::sync::atomic::AtomicBool;
use std::sync::Arc;

/// A flag that SIGINT, SIGTERM and SIGHUP set.
pub fn stop_flag() -> io::Result<Arc<AtomicBool>> {
    let flag = Arc::new(AtomicBool::new(false));
    for signal in [
        signal_hook::consts::SIGINT,
        signal_hook::consts::SIGTERM,
        signal_hook::consts::SIGHUP,
    ] {
        signal_hook::flag::register(signal, Arc::clone(&flag))?;
    }
    Ok(flag)
}
