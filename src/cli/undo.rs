//! `treewright undo PROJECT`: drop the last edit of the override layer.
//!
//! Refused (exit 2, nothing written) when the override file changed on disk since it was
//! loaded: the last edit might then be someone else's.

use std::path::PathBuf;

use clap::Args;

use super::CliError;
use crate::model::signoff::describe_edit;
use crate::model::{Workspace, WorkspaceError};

/// Arguments of `undo`.
#[derive(Debug, Args)]
pub struct UndoArgs {
    /// Project folder or its project.json.
    pub project: PathBuf,
}

/// Drop the last edit and save.
pub fn run(args: &UndoArgs) -> Result<(), CliError> {
    let mut ws = Workspace::open(&args.project)?;
    let r = ws.undo().ok_or_else(|| WorkspaceError::NothingToUndo {
        file: ws.overrides_path().display().to_string(),
    })?;
    ws.save()?;
    println!(
        "dropped edit #{}: {} (by {}, {})",
        ws.layer.edits.len(),
        describe_edit(&r.edit),
        r.author,
        r.time
    );
    Ok(())
}
