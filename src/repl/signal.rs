//! Ctrl-C for the interactive REPL: stop the running evaluation, keep the
//! session.
//!
//! While rustyline reads a line the terminal is in raw mode and Ctrl-C
//! arrives as a key (rustyline turns it into "cancel this line"). While Lua
//! runs, the terminal is back in cooked mode and Ctrl-C is a SIGINT; the
//! handler installed here then sets the host's interrupt flag, which the
//! host's instruction hook turns into an "interrupted" error.
//!
//! A second Ctrl-C during the same evaluation means the host is not
//! reaching its hook (a long call inside C, such as a huge `string.rep`):
//! the process then exits with status 130, the shell convention for SIGINT.

use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::{Arc, Mutex, MutexGuard, OnceLock};

/// The interrupt flag of the evaluation now running, if any.
static CURRENT: Mutex<Option<Arc<AtomicBool>>> = Mutex::new(None);

/// Whether the handler was installed (it can be only once per process).
static INSTALLED: OnceLock<Result<(), String>> = OnceLock::new();

/// Exit status after a second Ctrl-C: 128 + SIGINT.
pub const EXIT_INTERRUPTED: i32 = 130;

fn current() -> MutexGuard<'static, Option<Arc<AtomicBool>>> {
    // A poisoned lock only means a panic elsewhere; the flag is still valid.
    CURRENT.lock().unwrap_or_else(|e| e.into_inner())
}

/// Installs the SIGINT handler (once per process; later calls return the
/// first result). An error is a reason to warn, not to stop: without the
/// handler Ctrl-C during an evaluation ends the process.
pub fn install() -> Result<(), String> {
    INSTALLED
        .get_or_init(|| ctrlc::set_handler(on_sigint).map_err(|e| e.to_string()))
        .clone()
}

fn on_sigint() {
    let guard = current();
    match guard.as_ref() {
        Some(flag) if flag.swap(true, Ordering::SeqCst) => {
            eprintln!("\ninterrupted twice while the evaluation did not stop; leaving");
            std::process::exit(EXIT_INTERRUPTED);
        }
        // First Ctrl-C: the host's hook sees the flag and stops the chunk.
        Some(_) => {}
        // Between evaluations (printing, reading history): nothing to stop.
        None => {}
    }
}

/// Marks an evaluation as running for as long as it lives: Ctrl-C then
/// sets `flag`. Dropping it (also on unwinding) clears the mark.
pub struct Evaluating(());

impl Evaluating {
    /// Starts routing Ctrl-C to `flag`.
    pub fn new(flag: Arc<AtomicBool>) -> Evaluating {
        *current() = Some(flag);
        Evaluating(())
    }
}

impl Drop for Evaluating {
    fn drop(&mut self) {
        *current() = None;
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sigint_sets_the_flag_of_the_running_evaluation_only() {
        let flag = Arc::new(AtomicBool::new(false));
        on_sigint(); // nothing running: no effect, no exit
        {
            let _g = Evaluating::new(flag.clone());
            on_sigint();
            assert!(flag.load(Ordering::SeqCst));
        }
        flag.store(false, Ordering::SeqCst);
        on_sigint(); // the guard is gone: the flag stays clear
        assert!(!flag.load(Ordering::SeqCst));
    }
}
