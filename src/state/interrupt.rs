//! Ctrl-C: a flag set by SIGINT (and SIGTERM) that long-running operations check
//! between polls, so they stop cleanly and record what they stopped.

use std::sync::atomic::{AtomicBool, Ordering};

static INTERRUPTED: AtomicBool = AtomicBool::new(false);

extern "C" fn on_signal(_: libc::c_int) {
    INTERRUPTED.store(true, Ordering::SeqCst);
}

/// Installs the handler and returns the flag.
pub fn install() -> &'static AtomicBool {
    unsafe {
        libc::signal(
            libc::SIGINT,
            on_signal as extern "C" fn(libc::c_int) as libc::sighandler_t,
        );
        libc::signal(
            libc::SIGTERM,
            on_signal as extern "C" fn(libc::c_int) as libc::sighandler_t,
        );
    }
    &INTERRUPTED
}

/// The flag (false unless [`install`] was called and a signal came).
pub fn flag() -> &'static AtomicBool {
    &INTERRUPTED
}

/// Whether a signal came.
pub fn interrupted() -> bool {
    INTERRUPTED.load(Ordering::SeqCst)
}
