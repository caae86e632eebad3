//! Temporary files that must not outlive an interrupted run: the hidden
//! sibling `-o` is written to before its rename, and `ic50`'s stdin spool.
//! Each is registered while it exists; the binary installs [`on_signal`],
//! which on SIGINT, SIGTERM or SIGHUP removes every registered file and
//! exits with 130. A run that ends normally, or with an error, removes its
//! own files (the owners' `Drop`); SIGKILL and power loss cannot be caught,
//! which is why the names say who left them (`.out.csv.kimech-4711.tmp`).

use std::path::{Path, PathBuf};
use std::sync::Mutex;

/// The temporary files now on disk.
static LIVE: Mutex<Vec<PathBuf>> = Mutex::new(Vec::new());

/// A registered temporary file: unregistered (not removed; its owner does
/// that, or renames it into place) when dropped.
#[derive(Debug)]
pub struct Registered(PathBuf);

/// Registers `path` for removal should the run be interrupted.
pub fn register(path: &Path) -> Registered {
    if let Ok(mut live) = LIVE.lock() {
        live.push(path.to_path_buf());
    }
    Registered(path.to_path_buf())
}

impl Drop for Registered {
    fn drop(&mut self) {
        if let Ok(mut live) = LIVE.lock()
            && let Some(i) = live.iter().position(|p| *p == self.0)
        {
            live.swap_remove(i);
        }
    }
}

/// Removes every registered file (the signal handler's work).
fn remove_all() {
    // The lock is held to the exit, so no owner renames a file after it is gone.
    let live = match LIVE.lock() {
        Ok(live) => live,
        Err(poisoned) => poisoned.into_inner(),
    };
    for path in live.iter() {
        let _ = std::fs::remove_file(path);
    }
    std::process::exit(130);
}

/// Installs the handler for SIGINT, SIGTERM and SIGHUP (the binary calls
/// this once; the library alone, as in tests and fuzzing, leaves signals alone).
pub fn on_signal() {
    // An error means a handler is already installed: nothing to do.
    let _ = ctrlc::set_handler(remove_all);
}
