//! The on-disk format of `overrides.json`: the header check (format and version), the
//! version-2 hash chain on load, and serialisation with each record's `prev` link.

use serde::{Deserialize, Serialize};

use super::{OVERRIDES_FORMAT, OVERRIDES_VERSION, OverrideError};
use crate::model::edit::EditRecord;
use crate::model::fsutil;
use crate::model::history::{self, StoredRecord};
use crate::model::merge::Conflict;

/// The on-disk shape of `overrides.json`.
#[derive(Debug, Clone, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
struct OverrideFile {
    format: String,
    version: u64,
    #[serde(default)]
    edits: Vec<StoredRecord>,
    /// Unresolved merge conflicts (absent from files without any, so those stay
    /// byte-identical); the loader refuses a file that has some.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    conflicts: Vec<Conflict>,
}

/// Only the header, read first so an unknown version is reported as such even when the
/// edits of that version do not parse.
#[derive(Deserialize)]
struct OverrideHeader {
    format: String,
    version: u64,
}

/// Parse override-file bytes, naming `file` in errors. A file with unresolved merge
/// conflicts is refused ([`OverrideError::Unresolved`]).
pub fn parse_overrides(bytes: &[u8], file: &str) -> Result<Vec<EditRecord>, OverrideError> {
    let (edits, conflicts) = parse_override_file(bytes, file)?;
    if !conflicts.is_empty() {
        return Err(OverrideError::Unresolved {
            file: file.to_string(),
            count: conflicts.len(),
            ids: conflicts
                .iter()
                .map(|c| c.id.as_str())
                .collect::<Vec<_>>()
                .join(", "),
        });
    }
    Ok(edits)
}

/// Parse override-file bytes with their `conflicts` section (empty for ordinary files):
/// what `merge-edits` and `resolve` read.
pub fn parse_override_file(
    bytes: &[u8],
    file: &str,
) -> Result<(Vec<EditRecord>, Vec<Conflict>), OverrideError> {
    let corrupt = |e: serde_json::Error| OverrideError::Corrupt {
        file: file.to_string(),
        line: e.line(),
        column: e.column(),
        message: e.to_string(),
    };
    let header: OverrideHeader = serde_json::from_slice(bytes).map_err(corrupt)?;
    if header.format != OVERRIDES_FORMAT {
        return Err(OverrideError::WrongFormat {
            file: file.to_string(),
            found: header.format,
        });
    }
    if header.version != 1 && header.version != u64::from(OVERRIDES_VERSION) {
        return Err(OverrideError::UnknownVersion {
            file: file.to_string(),
            found: header.version,
        });
    }
    let f: OverrideFile = serde_json::from_slice(bytes).map_err(corrupt)?;
    let history = |detail: String| OverrideError::HistoryChanged {
        file: file.to_string(),
        detail,
    };
    if header.version == 1 {
        if let Some(i) = f.edits.iter().position(|s| s.prev.is_some()) {
            return Err(history(format!(
                "edit #{i}: prev: version-1 files have no hash chain"
            )));
        }
    } else {
        history::check_chain(&f.edits).map_err(history)?;
    }
    Ok((f.edits.into_iter().map(|s| s.record).collect(), f.conflicts))
}

/// Serialise edits in the version-2 file format (pretty JSON, trailing newline), each
/// record with its `prev` link ([`history::chained`]).
pub fn serialize_overrides(edits: &[EditRecord]) -> Vec<u8> {
    serialize_override_file(edits, &[])
}

/// Serialise edits and unresolved conflicts (no `conflicts` key when there are none, so
/// the bytes equal [`serialize_overrides`]'s).
pub fn serialize_override_file(edits: &[EditRecord], conflicts: &[Conflict]) -> Vec<u8> {
    let f = OverrideFile {
        format: OVERRIDES_FORMAT.to_string(),
        version: u64::from(OVERRIDES_VERSION),
        edits: history::chained(edits),
        conflicts: conflicts.to_vec(),
    };
    fsutil::to_json_pretty(&f)
}
