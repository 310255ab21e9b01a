//! SIGINT and SIGTERM as a graceful stop of a batch or a watch (see the
//! module notes of [`crate::app::batch`]).

use crate::base::error::{Result, TonusError};
use std::path::PathBuf;
use std::sync::atomic::{AtomicI32, Ordering};
use std::time::Duration;

/// The signal that asked the batch to stop (0: none yet).
static STOP_SIGNAL: AtomicI32 = AtomicI32::new(0);

/// Slice of the watch mode's wait between two listings, so that a stop
/// request is seen within this time.
pub(super) const STOP_POLL: Duration = Duration::from_millis(50);

extern "C" fn on_stop_signal(sig: libc::c_int) {
    // Only async-signal-safe work here: an atomic swap, and `_exit` on
    // the second signal.
    if STOP_SIGNAL.swap(sig, Ordering::SeqCst) != 0 {
        // SAFETY: `_exit` is async-signal-safe and ends the process
        // without running destructors or atexit handlers.
        unsafe { libc::_exit(128 + sig) };
    }
}

/// Makes SIGINT and SIGTERM a graceful stop of [`inspect`] and [`watch`]
/// (see the module notes): the first one sets a flag the batch polls, a
/// second one ends the process at once.
///
/// # Errors
/// [`TonusError::Io`] when the handler cannot be installed.
pub fn stop_on_signals() -> Result<()> {
    for sig in [libc::SIGINT, libc::SIGTERM] {
        // SAFETY: the action is zero-initialised (a valid `sigaction`),
        // its mask emptied with `sigemptyset`, and the handler only does
        // async-signal-safe work.
        let rc = unsafe {
            let mut sa: libc::sigaction = std::mem::zeroed();
            sa.sa_sigaction = on_stop_signal as extern "C" fn(libc::c_int) as libc::sighandler_t;
            libc::sigemptyset(&mut sa.sa_mask);
            sa.sa_flags = libc::SA_RESTART;
            libc::sigaction(sig, &sa, std::ptr::null_mut())
        };
        if rc != 0 {
            return Err(TonusError::Io {
                path: PathBuf::from("signal handler"),
                reason: format!(
                    "cannot install the handler for signal {sig}: {}",
                    std::io::Error::last_os_error()
                ),
            });
        }
    }
    Ok(())
}

/// The signal that asked for a stop, if any.
pub fn stop_requested() -> Option<i32> {
    match STOP_SIGNAL.load(Ordering::SeqCst) {
        0 => None,
        s => Some(s),
    }
}

/// The usual name of a stop signal.
pub(super) fn signal_name(sig: i32) -> String {
    match sig {
        libc::SIGINT => "SIGINT".into(),
        libc::SIGTERM => "SIGTERM".into(),
        other => format!("signal {other}"),
    }
}

/// Exit status of a batch cut short by signal `sig`: 128 + sig (the
/// shell's convention; 130 for SIGINT).
pub(super) fn interrupted_exit(sig: i32) -> u8 {
    u8::try_from(128 + sig).unwrap_or(130)
}
