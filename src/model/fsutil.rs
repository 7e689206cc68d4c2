//! File helpers shared by every writer: atomic replace with an optional backup.

use std::fs;
use std::io::Write;
use std::path::{Path, PathBuf};

/// Write `bytes` to `path` atomically: a temporary file in the same folder is written,
/// flushed to disk (fsync) and renamed over the target. With `keep_backup`, an existing
/// target is first copied to `<name>.bak`. A crash at any point leaves either the old or the
/// new file, never a torn one.
pub fn atomic_write(path: &Path, bytes: &[u8], keep_backup: bool) -> std::io::Result<()> {
    atomic_write_with(path, keep_backup, |w| w.write_all(bytes))
}

/// [`atomic_write`] for content produced by `fill` into a buffered writer, so a large
/// report is streamed to disk instead of being built in memory first. If `fill` fails, the
/// temporary file is removed and the target is left as it was.
pub fn atomic_write_with(
    path: &Path,
    keep_backup: bool,
    fill: impl FnOnce(&mut dyn Write) -> std::io::Result<()>,
) -> std::io::Result<()> {
    #[cfg(feature = "test-broken-writer")]
    if broken_writer::active() {
        return broken_writer::write_in_place(path, keep_backup, fill);
    }
    let dir = match path.parent() {
        Some(d) if !d.as_os_str().is_empty() => d.to_path_buf(),
        _ => PathBuf::from("."),
    };
    let name = path
        .file_name()
        .ok_or_else(|| std::io::Error::other(format!("{}: not a file path", path.display())))?
        .to_string_lossy()
        .into_owned();
    let tmp = dir.join(format!(".{name}.{}.tmp", std::process::id()));
    let written = (|| {
        let mut w = std::io::BufWriter::with_capacity(1 << 16, fs::File::create(&tmp)?);
        fill(&mut w)?;
        let f = w.into_inner().map_err(|e| e.into_error())?;
        f.sync_all()
    })();
    if let Err(e) = written {
        let _ = fs::remove_file(&tmp);
        return Err(e);
    }
    if keep_backup && path.exists() {
        let bak = dir.join(format!("{name}.bak"));
        let bak_tmp = dir.join(format!(".{name}.bak.{}.tmp", std::process::id()));
        fs::copy(path, &bak_tmp)?;
        fs::File::open(&bak_tmp)?.sync_all()?;
        fs::rename(&bak_tmp, &bak)?;
    }
    if let Err(e) = fs::rename(&tmp, path) {
        let _ = fs::remove_file(&tmp);
        return Err(e);
    }
    if let Ok(d) = fs::File::open(&dir) {
        let _ = d.sync_all();
    }
    Ok(())
}

/// The deliberately broken twin of [`atomic_write_with`], for tests/crash_safety.rs only:
/// it truncates the target and writes the new bytes straight into it, with no temporary
/// file, no fsync and no rename, so a process killed mid-write leaves a torn file. Compiled
/// only with the `test-broken-writer` feature, which itself refuses to compile unless
/// `TREEWRIGHT_ALLOW_BROKEN_WRITER=1` is set at build time (so `--all-features` cannot pull
/// it into a release by accident), and active only while `TREEWRIGHT_BROKEN_WRITER=1` is set
/// in the environment of the process.
#[cfg(feature = "test-broken-writer")]
pub mod broken_writer {
    use std::fs;
    use std::io::Write;
    use std::path::Path;

    const _: () = assert!(
        option_env!("TREEWRIGHT_ALLOW_BROKEN_WRITER").is_some(),
        "the test-broken-writer feature makes every save non-atomic and is for \
         tests/crash_safety.rs only; set TREEWRIGHT_ALLOW_BROKEN_WRITER=1 at build time \
         if you really mean to build it (never ship such a build)"
    );

    /// Whether this process writes in place (`TREEWRIGHT_BROKEN_WRITER=1`).
    pub fn active() -> bool {
        std::env::var_os("TREEWRIGHT_BROKEN_WRITER").is_some_and(|v| v == "1")
    }

    /// Write in place: truncate, stream, no fsync, no rename.
    pub fn write_in_place(
        path: &Path,
        keep_backup: bool,
        fill: impl FnOnce(&mut dyn Write) -> std::io::Result<()>,
    ) -> std::io::Result<()> {
        if keep_backup && path.exists() {
            let mut bak = path.as_os_str().to_owned();
            bak.push(".bak");
            fs::copy(path, &bak)?;
        }
        let mut w = std::io::BufWriter::with_capacity(1 << 16, fs::File::create(path)?);
        fill(&mut w)?;
        w.flush()
    }
}

/// Serialise `value` as pretty JSON with a trailing newline.
pub fn to_json_pretty<T: serde::Serialize>(value: &T) -> Vec<u8> {
    let mut v = serde_json::to_vec_pretty(value).expect("in-memory values serialise");
    v.push(b'\n');
    v
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn replaces_and_keeps_backup() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("a.json");
        atomic_write(&p, b"one", true).unwrap();
        assert!(!dir.path().join("a.json.bak").exists());
        atomic_write(&p, b"two", true).unwrap();
        assert_eq!(fs::read(&p).unwrap(), b"two");
        assert_eq!(fs::read(dir.path().join("a.json.bak")).unwrap(), b"one");
        let leftovers: Vec<_> = fs::read_dir(dir.path())
            .unwrap()
            .filter_map(|e| e.ok())
            .filter(|e| e.file_name().to_string_lossy().ends_with(".tmp"))
            .collect();
        assert!(leftovers.is_empty());
    }
}
