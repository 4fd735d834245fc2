//! Cooperative cancellation of a batch (SIGINT / SIGTERM).
//!
//! Takes in: a request (from a signal handler, a test or an embedding program).
//! Gives out: a flag the batch polls before it starts each capture. A request
//! stops new captures from being handed out; captures already running finish
//! and their reports are written whole (the job cannot be interrupted from
//! outside), then the summary of what completed is written and the batch
//! returns with [`super::BatchOutcome::interrupted`] set.
//!
//! The signal handlers come from the `signal-hook` crate: the handler only
//! stores the signal number in an atomic (async-signal-safe). A *second*
//! SIGINT/SIGTERM ends the process at once with 128 + signal (130 / 143),
//! without waiting for running captures; report files are still whole (they are
//! renamed into place only when complete), but a `.NAME.PID.tmp` file of a
//! report being written at that instant may remain and can be deleted.

use std::sync::atomic::{AtomicBool, AtomicUsize, Ordering};
use std::sync::Arc;

/// SIGINT's number on every platform signal-hook supports.
pub const SIGINT: i32 = 2;
/// SIGTERM's number on every platform signal-hook supports.
pub const SIGTERM: i32 = 15;

/// A shared cancellation flag: cheap to clone, every clone sees the same state.
#[derive(Debug, Clone, Default)]
pub struct CancelFlag {
    /// 0 = running; otherwise the signal number (or any non-zero reason code).
    signal: Arc<AtomicUsize>,
    /// Set with `signal`; arms the immediate exit on a second signal.
    armed: Arc<AtomicBool>,
}

impl CancelFlag {
    /// A flag that is not set.
    pub fn new() -> CancelFlag {
        CancelFlag::default()
    }

    /// Ask the batch to stop; `signal` is the signal number the exit code is
    /// derived from (use [`SIGINT`] or [`SIGTERM`]; any value > 0 works).
    pub fn request(&self, signal: i32) {
        let v = usize::try_from(signal).ok().filter(|&v| v > 0).unwrap_or(1);
        self.signal.store(v, Ordering::SeqCst);
        self.armed.store(true, Ordering::SeqCst);
    }

    /// Whether a stop was requested.
    pub fn is_cancelled(&self) -> bool {
        self.signal.load(Ordering::SeqCst) != 0
    }

    /// The signal number of the request, if any.
    pub fn signal(&self) -> Option<i32> {
        match self.signal.load(Ordering::SeqCst) {
            0 => None,
            v => Some(i32::try_from(v).unwrap_or(1)),
        }
    }

    /// Route SIGINT and SIGTERM to this flag (process-wide; call once, from the
    /// binary). The first signal sets the flag; a second one exits at once with
    /// status 128 + signal. See the module documentation.
    pub fn install_signal_handlers(&self) -> std::io::Result<()> {
        use signal_hook::consts::{SIGINT as INT, SIGTERM as TERM};
        for sig in [INT, TERM] {
            // Order matters: the shutdown check must run before the flag is set,
            // so that only a *second* signal exits.
            signal_hook::flag::register_conditional_shutdown(sig, 128 + sig, self.armed.clone())?;
            signal_hook::flag::register(sig, self.armed.clone())?;
            let value = usize::try_from(sig).unwrap_or(1);
            signal_hook::flag::register_usize(sig, self.signal.clone(), value)?;
        }
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_request_is_seen_by_every_clone_with_its_signal_number() {
        let a = CancelFlag::new();
        let b = a.clone();
        assert!(!b.is_cancelled() && b.signal().is_none());
        a.request(SIGTERM);
        assert!(b.is_cancelled());
        assert_eq!(b.signal(), Some(15));
    }

    #[test]
    fn the_signal_numbers_match_posix() {
        // Source: POSIX.1-2017 <signal.h> / signal(7): SIGINT = 2, SIGTERM = 15
        // on Linux, macOS and the BSDs (checked here against libc via signal-hook).
        assert_eq!(SIGINT, signal_hook::consts::SIGINT);
        assert_eq!(SIGTERM, signal_hook::consts::SIGTERM);
    }
}
