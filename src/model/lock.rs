//! One writer at a time: an exclusive advisory lock on `.treewright.lock` in the project
//! folder.
//!
//! Every save of the override layer, the tree file, the manifest and the build report takes
//! this lock, then re-reads and compares what is on disk, then writes (temporary file, fsync,
//! rename, folder fsync), then releases it. The lock is an OS file lock (`flock` on Unix,
//! `LockFileEx` on Windows, through the `fs4` crate): the OS releases it when the holder's
//! process ends, so the lock of a process that died never blocks anyone. The file itself
//! stays behind (deleting a lock file while others wait on it would let two writers in);
//! it holds the process id of the latest holder, named in the message when a wait times out.
//!
//! Waits are bounded: [`DEFAULT_WAIT`], or `TREEWRIGHT_LOCK_WAIT` seconds from the
//! environment.

use std::fs::{File, OpenOptions};
use std::io::{Read, Seek, SeekFrom, Write};
use std::path::{Path, PathBuf};
use std::time::{Duration, Instant};

/// File name of the lock file inside the project folder.
pub const LOCK_FILE: &str = ".treewright.lock";
/// How long a writer waits for the lock by default.
pub const DEFAULT_WAIT: Duration = Duration::from_secs(10);
/// Environment variable overriding [`DEFAULT_WAIT`] (seconds, may be fractional).
pub const WAIT_ENV: &str = "TREEWRIGHT_LOCK_WAIT";

/// Why the lock could not be taken.
#[derive(Debug, thiserror::Error)]
pub enum LockError {
    /// The lock file could not be opened or locked.
    #[error("{file}: cannot lock: {source}")]
    Io {
        /// The lock file.
        file: String,
        /// The OS error.
        source: std::io::Error,
    },
    /// Another process held the lock for the whole wait.
    #[error(
        "{file}: another process ({holder}) is saving this project; gave up after {waited:.1} s \
         (nothing was written; try again)"
    )]
    Busy {
        /// The lock file.
        file: String,
        /// "pid N" when the holder wrote its process id, else "process id unknown".
        holder: String,
        /// Seconds waited.
        waited: f64,
    },
}

/// The wait in force: `TREEWRIGHT_LOCK_WAIT` seconds when set to a valid number, else
/// [`DEFAULT_WAIT`].
pub fn wait_from_env() -> Duration {
    std::env::var(WAIT_ENV)
        .ok()
        .and_then(|v| v.trim().parse::<f64>().ok())
        .filter(|s| s.is_finite() && *s >= 0.0)
        .map(Duration::from_secs_f64)
        .unwrap_or(DEFAULT_WAIT)
}

/// The held lock of one project folder; released when dropped.
#[derive(Debug)]
pub struct ProjectLock {
    file: File,
    path: PathBuf,
}

impl ProjectLock {
    /// Take the lock of the project folder `dir`, waiting at most [`wait_from_env`].
    pub fn acquire(dir: &Path) -> Result<Self, LockError> {
        Self::acquire_within(dir, wait_from_env())
    }

    /// Take the lock of the project folder `dir`, waiting at most `wait`.
    pub fn acquire_within(dir: &Path, wait: Duration) -> Result<Self, LockError> {
        let path = dir.join(LOCK_FILE);
        let io = |source| LockError::Io {
            file: path.display().to_string(),
            source,
        };
        let mut file = OpenOptions::new()
            .read(true)
            .write(true)
            .create(true)
            .truncate(false)
            .open(&path)
            .map_err(io)?;
        let start = Instant::now();
        let mut pause = Duration::from_millis(1);
        loop {
            match fs4::FileExt::try_lock(&file) {
                Ok(()) => break,
                Err(fs4::TryLockError::WouldBlock) => {}
                Err(fs4::TryLockError::Error(e)) => return Err(io(e)),
            }
            let waited = start.elapsed();
            if waited >= wait {
                return Err(LockError::Busy {
                    file: path.display().to_string(),
                    holder: holder_of(&mut file),
                    waited: waited.as_secs_f64(),
                });
            }
            std::thread::sleep(pause.min(wait - waited));
            pause = (pause * 2).min(Duration::from_millis(5));
        }
        // record the holder for whoever waits next; failing to is not worth refusing a save
        let pid = std::process::id().to_string();
        let _ = file
            .set_len(0)
            .and_then(|()| file.seek(SeekFrom::Start(0)))
            .and_then(|_| file.write_all(pid.as_bytes()))
            .and_then(|()| file.flush());
        Ok(ProjectLock { file, path })
    }

    /// The lock file.
    pub fn path(&self) -> &Path {
        &self.path
    }
}

impl Drop for ProjectLock {
    fn drop(&mut self) {
        // closing the file releases the lock too; unlock first so it is released at once
        let _ = fs4::FileExt::unlock(&self.file);
    }
}

fn holder_of(file: &mut File) -> String {
    let mut s = String::new();
    let read = file
        .seek(SeekFrom::Start(0))
        .and_then(|_| file.read_to_string(&mut s));
    match read.ok().and_then(|_| s.trim().parse::<u32>().ok()) {
        Some(pid) => format!("pid {pid}"),
        None => "process id unknown".into(),
    }
}

/// The folder whose lock guards `file` (its parent folder; `.` for a bare name).
pub fn dir_of(file: &Path) -> PathBuf {
    match file.parent() {
        Some(d) if !d.as_os_str().is_empty() => d.to_path_buf(),
        _ => PathBuf::from("."),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn second_taker_waits_then_names_the_holder() {
        let dir = tempfile::tempdir().unwrap();
        let held = ProjectLock::acquire_within(dir.path(), Duration::ZERO).unwrap();
        let e = ProjectLock::acquire_within(dir.path(), Duration::from_millis(30)).unwrap_err();
        let msg = e.to_string();
        assert!(
            msg.contains(&format!("pid {}", std::process::id())),
            "{msg}"
        );
        drop(held);
        ProjectLock::acquire_within(dir.path(), Duration::ZERO).unwrap();
    }

    #[test]
    fn released_lock_is_taken_by_a_waiting_thread() {
        let dir = tempfile::tempdir().unwrap();
        let held = ProjectLock::acquire_within(dir.path(), Duration::ZERO).unwrap();
        let d = dir.path().to_path_buf();
        let t = std::thread::spawn(move || {
            ProjectLock::acquire_within(&d, Duration::from_secs(5)).map(|_| ())
        });
        std::thread::sleep(Duration::from_millis(50));
        drop(held);
        t.join().unwrap().unwrap();
    }
}
