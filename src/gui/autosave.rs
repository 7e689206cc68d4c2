//! The crash-recovery file: unsaved edits are written next to the project every few seconds
//! and offered back when the project is opened again after the window died.

use std::path::PathBuf;

use serde::{Deserialize, Serialize};

use crate::model::edit::EditRecord;
use crate::model::fsutil::{atomic_write, to_json_pretty};

use super::doc::Doc;

/// File name of the recovery file inside the project folder.
pub const FILE_NAME: &str = ".treewright-recovery.json";
/// Value of the `format` field.
pub const FORMAT: &str = "treewright-recovery";

/// What the recovery file holds.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RecoveryFile {
    /// Always [`FORMAT`].
    pub format: String,
    /// Every edit of the layer when it was written, oldest first.
    pub edits: Vec<EditRecord>,
}

/// The recovery file's path for a document.
pub fn path(doc: &Doc) -> PathBuf {
    doc.dir().join(FILE_NAME)
}

/// Write the current edits to the recovery file.
pub fn write(doc: &Doc) -> std::io::Result<()> {
    let f = RecoveryFile {
        format: FORMAT.into(),
        edits: doc.layer.edits.clone(),
    };
    atomic_write(&path(doc), &to_json_pretty(&f), false)
}

/// Delete the recovery file (after a save or an explicit discard). A missing file is fine.
pub fn remove(doc: &Doc) {
    let _ = std::fs::remove_file(path(doc));
}

/// Unsaved edits found in a recovery file.
#[derive(Debug, Clone, PartialEq)]
pub struct Recovery {
    /// The recovery file.
    pub path: PathBuf,
    /// Edits in the recovery file that the override file lacks (in order).
    pub extra: Vec<EditRecord>,
    /// Whether the override file still starts with the recovered edits' history; when not,
    /// the file changed since and the edits cannot be replayed safely.
    pub replayable: bool,
    /// A problem reading the file, shown instead of the edits.
    pub error: Option<String>,
}

impl Recovery {
    /// Look for a recovery file with edits the loaded override file lacks.
    pub fn find(doc: &Doc) -> Option<Recovery> {
        let path = path(doc);
        let bytes = std::fs::read(&path).ok()?;
        let parsed: Result<RecoveryFile, String> = serde_json::from_slice(&bytes)
            .map_err(|e| format!("{}: {e}", path.display()))
            .and_then(|f: RecoveryFile| {
                if f.format == FORMAT {
                    Ok(f)
                } else {
                    Err(format!(
                        "{}: format: is \"{}\", expected \"{FORMAT}\"",
                        path.display(),
                        f.format
                    ))
                }
            });
        let file = match parsed {
            Ok(f) => f,
            Err(e) => {
                return Some(Recovery {
                    path,
                    extra: Vec::new(),
                    replayable: false,
                    error: Some(e),
                });
            }
        };
        let saved = &doc.layer.edits;
        let replayable = file.edits.len() >= saved.len() && file.edits[..saved.len()] == saved[..];
        if replayable && file.edits.len() == saved.len() {
            // nothing new: a stale file from a session that saved but did not clean up
            remove(doc);
            return None;
        }
        let extra = if replayable {
            file.edits[saved.len()..].to_vec()
        } else {
            file.edits
        };
        Some(Recovery {
            path,
            extra,
            replayable,
            error: None,
        })
    }
}
