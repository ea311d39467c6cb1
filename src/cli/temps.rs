//! The temporary files of the output step, registered while they exist, and
//! the interrupt handler that removes them.
//!
//! [`super::outputs`] creates, renames and removes its temporary files only
//! through this module, which keeps their paths in one list under one lock.
//! [`install`] starts a thread that waits for SIGINT or SIGTERM; when one
//! arrives it takes the lock (so no temporary is created or renamed after
//! that), removes every temporary still listed and ends the process with
//! 128 + the signal's number (130 for SIGINT, 143 for SIGTERM), the code a
//! shell reports for a process ended by that signal.

use std::fs::File;
use std::io;
use std::path::{Path, PathBuf};
use std::sync::{Mutex, MutexGuard};

/// The temporary files that exist now (created and not yet renamed or removed).
static PENDING: Mutex<Vec<PathBuf>> = Mutex::new(Vec::new());

/// The list, even when a thread panicked while holding it.
fn pending() -> MutexGuard<'static, Vec<PathBuf>> {
    PENDING.lock().unwrap_or_else(|e| e.into_inner())
}

/// Creates (or truncates) the temporary file `tmp` and lists it.
///
/// # Errors
/// The error of creating the file; nothing is listed then.
pub fn create(tmp: &Path) -> io::Result<File> {
    let mut list = pending();
    let file = File::create(tmp)?;
    list.push(tmp.to_path_buf());
    Ok(file)
}

/// Renames the listed temporary `tmp` onto `dest` and forgets it. When the
/// rename fails the temporary is removed.
///
/// # Errors
/// The error of the rename.
pub fn rename(tmp: &Path, dest: &Path) -> io::Result<()> {
    let mut list = pending();
    let result = std::fs::rename(tmp, dest);
    if result.is_err() {
        let _ = std::fs::remove_file(tmp);
    }
    list.retain(|p| p != tmp);
    result
}

/// Removes the listed temporary `tmp` and forgets it.
pub fn remove(tmp: &Path) {
    let mut list = pending();
    let _ = std::fs::remove_file(tmp);
    list.retain(|p| p != tmp);
}

/// Removes every listed temporary and empties the list; returns the lock,
/// still held, so that the caller can end the process before the output
/// step creates or renames another file.
pub fn remove_all() -> MutexGuard<'static, Vec<PathBuf>> {
    let mut list = pending();
    for p in list.drain(..) {
        let _ = std::fs::remove_file(&p);
    }
    list
}

/// Starts the thread that, on SIGINT or SIGTERM, removes the temporaries
/// and exits with 128 + the signal number. When the handler cannot be
/// installed the signals keep their default action (the process ends and
/// a temporary may be left, named `.NAME.pondus-PID.tmp`).
pub fn install() {
    use signal_hook::consts::{SIGINT, SIGTERM};
    let Ok(mut signals) = signal_hook::iterator::Signals::new([SIGINT, SIGTERM]) else {
        return;
    };
    std::thread::spawn(move || {
        if let Some(signal) = signals.forever().next() {
            let _held = remove_all();
            std::process::exit(128 + signal);
        }
    });
}

/// Held by every unit test that creates temporaries, so that the test of
/// [`remove_all`] does not remove another test's files.
#[cfg(test)]
pub static TEST_LOCK: Mutex<()> = Mutex::new(());

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn remove_all_removes_the_listed_temporaries_only() {
        let _one_at_a_time = TEST_LOCK.lock().unwrap_or_else(|e| e.into_inner());
        let dir = tempfile::tempdir().unwrap();
        let a = dir.path().join(".a.pondus-1.tmp");
        let b = dir.path().join(".b.pondus-1.tmp");
        let kept = dir.path().join("kept.json");
        std::fs::write(&kept, "{}").unwrap();
        create(&a).unwrap();
        create(&b).unwrap();
        // A renamed temporary is no longer listed: its destination stays.
        rename(&b, &dir.path().join("b.json")).unwrap();
        assert!(a.exists() && pending().contains(&a));
        drop(remove_all());
        assert!(!a.exists());
        assert!(!pending().contains(&a));
        let mut left: Vec<_> = std::fs::read_dir(dir.path())
            .unwrap()
            .map(|e| e.unwrap().file_name().into_string().unwrap())
            .collect();
        left.sort();
        assert_eq!(left, ["b.json", "kept.json"]);
    }
}
