//! `treewright redo PROJECT [--author NAME]`: bring back the edit the latest `undo`
//! cancelled, by appending a revert of that revert.

use std::path::PathBuf;

use clap::Args;

use super::CliError;
use crate::model::Workspace;
use crate::model::history;

/// Arguments of `redo`.
#[derive(Debug, Args)]
pub struct RedoArgs {
    /// Project folder or its project.json.
    pub project: PathBuf,
    /// Who redoes (default: the login name, $USER).
    #[arg(long)]
    pub author: Option<String>,
}

/// Append a revert of the latest undo and save.
pub fn run(args: &RedoArgs) -> Result<(), CliError> {
    let mut ws = Workspace::open(&args.project)?;
    let author = super::undo::default_author(args.author.as_deref());
    let r = ws.redo_append(&author, "")?;
    println!(
        "redid: {}; appended revert #{}",
        history::describe(&ws.layer.edits, r.target),
        r.revert
    );
    Ok(())
}
