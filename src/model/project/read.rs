//! Reading files of a project: paths that stay inside the folder, size guards, JSON with
//! line and column on error.

use std::fs;
use std::path::{Component, Path, PathBuf};

use super::LoadError;
use super::manifest::{Limits, MANIFEST_NAME};

/// Resolve `rel` inside `dir`, refusing absolute paths and paths that leave the folder.
pub fn resolve_inside(dir: &Path, rel: &str, field: &str) -> Result<PathBuf, LoadError> {
    let manifest = dir.join(MANIFEST_NAME).display().to_string();
    let p = Path::new(rel);
    if rel.is_empty() {
        return Err(LoadError::invalid(&manifest, field, "path is empty"));
    }
    let mut depth: i32 = 0;
    for c in p.components() {
        match c {
            Component::Prefix(_) | Component::RootDir => {
                return Err(LoadError::invalid(
                    &manifest,
                    field,
                    format!(
                        "\"{rel}\" is an absolute path; paths must be relative to the project folder"
                    ),
                ));
            }
            Component::ParentDir => {
                depth -= 1;
                if depth < 0 {
                    return Err(LoadError::invalid(
                        &manifest,
                        field,
                        format!("\"{rel}\" leaves the project folder"),
                    ));
                }
            }
            Component::Normal(_) => depth += 1,
            Component::CurDir => {}
        }
    }
    let full = dir.join(p);
    // a symbolic link may still point outside: compare canonical paths when the file exists
    if let (Ok(cd), Ok(cf)) = (dir.canonicalize(), full.canonicalize())
        && !cf.starts_with(&cd)
    {
        return Err(LoadError::invalid(
            &manifest,
            field,
            format!("\"{rel}\" resolves outside the project folder"),
        ));
    }
    Ok(full)
}

pub(super) fn read_bytes(path: &Path) -> Result<Vec<u8>, LoadError> {
    read_bytes_limited(path, &Limits::default())
}

pub(super) fn read_bytes_limited(path: &Path, limits: &Limits) -> Result<Vec<u8>, LoadError> {
    use std::io::Read;
    let (mut f, len) = open_limited(path, limits)?;
    let mut out = Vec::with_capacity(len as usize);
    f.read_to_end(&mut out).map_err(|source| LoadError::Io {
        file: path.display().to_string(),
        source,
    })?;
    Ok(out)
}

pub(super) fn read_json_limited<T: serde::de::DeserializeOwned>(
    path: &Path,
    limits: &Limits,
) -> Result<T, LoadError> {
    let bytes = read_bytes_limited(path, limits)?;
    parse_json(&bytes, &path.display().to_string())
}

/// Parse JSON from a file, with line and column on error.
pub fn read_json<T: serde::de::DeserializeOwned>(path: &Path) -> Result<T, LoadError> {
    let bytes = read_bytes(path)?;
    parse_json(&bytes, &path.display().to_string())
}

/// Parse JSON bytes, naming `file` on error.
pub fn parse_json<T: serde::de::DeserializeOwned>(
    bytes: &[u8],
    file: &str,
) -> Result<T, LoadError> {
    serde_json::from_slice(bytes).map_err(|e| {
        let full = e.to_string();
        let suffix = format!(" at line {} column {}", e.line(), e.column());
        LoadError::Json {
            file: file.to_string(),
            line: e.line(),
            column: e.column(),
            message: full.strip_suffix(&suffix).unwrap_or(&full).to_string(),
        }
    })
}

/// Open a file for streaming after the size limit check.
pub(super) fn open_limited(path: &Path, limits: &Limits) -> Result<(fs::File, u64), LoadError> {
    let file = path.display().to_string();
    let io = |source| LoadError::Io {
        file: file.clone(),
        source,
    };
    let f = fs::File::open(path).map_err(io)?;
    let len = f.metadata().map_err(io)?.len();
    let max = limits.max_file_mb.saturating_mul(1 << 20);
    if len > max {
        return Err(LoadError::invalid(
            &file,
            "size",
            format!(
                "{:.1} MiB exceeds the limit of {} MiB (raise limits.max_file_mb in project.json)",
                len as f64 / (1 << 20) as f64,
                limits.max_file_mb
            ),
        ));
    }
    Ok((f, len))
}
