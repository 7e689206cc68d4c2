//! `treewright undo PROJECT`: drop the last edit of the override layer.

use std::path::PathBuf;

use clap::Args;

use super::CliError;
use super::edit::Session;
use crate::model::signoff::describe_edit;

/// Arguments of `undo`.
#[derive(Debug, Args)]
pub struct UndoArgs {
    /// Project folder or its project.json.
    pub project: PathBuf,
}

/// Drop the last edit and save.
pub fn run(args: &UndoArgs) -> Result<(), CliError> {
    let mut s = Session::open(&args.project)?;
    let r = s
        .layer
        .undo()
        .ok_or_else(|| CliError::bad_input(format!("{}: no edit to undo", s.path.display())))?;
    s.save()?;
    println!(
        "dropped edit #{}: {} (by {}, {})",
        s.layer.edits.len(),
        describe_edit(&r.edit),
        r.author,
        r.time
    );
    Ok(())
}
