//! Clean interruption: SIGINT and SIGTERM set a process-wide stop flag that the job loops check
//! at their step boundaries (an output record, a sweep step, a branch, an ensemble member).
//!
//! The handler only stores the signal number in an atomic (async-signal-safe, no allocation);
//! a second signal of either kind while the first is being handled restores the default action
//! and re-raises, so a stuck job can still be stopped at once (its temporary file is then left
//! beside the target, never at the target path). Jobs turn a raised flag into
//! [`Error::Interrupted`](crate::error::Error::Interrupted) (exit 128 + signal).

use std::sync::atomic::{AtomicBool, AtomicI32, Ordering};

/// The signal that asked to stop (0: none).
static SIGNAL: AtomicI32 = AtomicI32::new(0);
static INSTALLED: AtomicBool = AtomicBool::new(false);

extern "C" fn on_signal(sig: libc::c_int) {
    if SIGNAL.swap(sig, Ordering::SeqCst) != 0 {
        // Second signal: give up the clean stop (both calls are async-signal-safe).
        unsafe {
            libc::signal(sig, libc::SIG_DFL);
            libc::raise(sig);
        }
    }
}

/// Install the SIGINT and SIGTERM handlers (once per process; later calls do nothing).
pub fn install() {
    if INSTALLED.swap(true, Ordering::SeqCst) {
        return;
    }
    let handler: extern "C" fn(libc::c_int) = on_signal;
    for sig in [libc::SIGINT, libc::SIGTERM] {
        // SAFETY: the handler only touches atomics and async-signal-safe libc calls.
        unsafe {
            let mut sa: libc::sigaction = std::mem::zeroed();
            sa.sa_sigaction = handler as libc::sighandler_t;
            sa.sa_flags = libc::SA_RESTART;
            libc::sigemptyset(&mut sa.sa_mask);
            libc::sigaction(sig, &sa, std::ptr::null_mut());
        }
    }
}

/// A view of the stop flag for job loops.
#[derive(Debug, Clone, Copy, Default)]
pub struct StopFlag;

impl StopFlag {
    /// The signal number that asked to stop, if any.
    pub fn requested(self) -> Option<i32> {
        match SIGNAL.load(Ordering::SeqCst) {
            0 => None,
            s => Some(s),
        }
    }

    /// Ask the loops to stop as if signal `sig` had arrived (tests, embedding programs).
    pub fn request(self, sig: i32) {
        SIGNAL.store(sig, Ordering::SeqCst);
    }

    /// Forget a request (tests, embedding programs running several jobs).
    pub fn clear(self) {
        SIGNAL.store(0, Ordering::SeqCst);
    }
}

/// Name of a signal number, for messages.
pub fn signal_name(sig: i32) -> &'static str {
    match sig {
        libc::SIGINT => "SIGINT",
        libc::SIGTERM => "SIGTERM",
        _ => "signal",
    }
}

/// Fault injection for tests: with `ICEFOLD_FAULT_SIGINT_AFTER_CHECKPOINT=N` in the
/// environment, the process sends itself SIGINT right after writing its N-th checkpoint, so
/// tests can interrupt a job at a reproducible point through the real signal path.
pub const FAULT_ENV: &str = "ICEFOLD_FAULT_SIGINT_AFTER_CHECKPOINT";

static CHECKPOINTS: std::sync::atomic::AtomicU64 = std::sync::atomic::AtomicU64::new(0);

/// Count a written checkpoint (and inject the fault of [`FAULT_ENV`] when due).
pub fn checkpoint_written() {
    let k = CHECKPOINTS.fetch_add(1, Ordering::SeqCst) + 1;
    let due = std::env::var(FAULT_ENV)
        .ok()
        .and_then(|v| v.trim().parse::<u64>().ok());
    if due == Some(k) && INSTALLED.load(Ordering::SeqCst) {
        // SAFETY: raise(3) delivers the signal to this thread; the handler is installed.
        unsafe {
            libc::raise(libc::SIGINT);
        }
    }
}
