//! Ctrl-C: a flag set by SIGINT (and SIGTERM) that long-running operations check
//! between polls, so they stop cleanly and record what they stopped.

use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::{Arc, Once, OnceLock};

static INTERRUPTED: OnceLock<Arc<AtomicBool>> = OnceLock::new();
static INSTALL: Once = Once::new();

fn shared() -> &'static Arc<AtomicBool> {
    INTERRUPTED.get_or_init(|| Arc::new(AtomicBool::new(false)))
}

/// Installs the handler (once per process) and returns the flag.
pub fn install() -> &'static AtomicBool {
    let flag = shared();
    INSTALL.call_once(|| {
        for sig in [signal_hook::consts::SIGINT, signal_hook::consts::SIGTERM] {
            if let Err(e) = signal_hook::flag::register(sig, Arc::clone(flag)) {
                tracing::warn!("cannot install the handler of signal {sig}: {e}");
            }
        }
    });
    flag
}

/// The flag (false unless [`install`] was called and a signal came).
pub fn flag() -> &'static AtomicBool {
    shared()
}

/// Whether a signal came.
pub fn interrupted() -> bool {
    shared().load(Ordering::SeqCst)
}
