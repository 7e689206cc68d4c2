//! `treewright undo PROJECT [--reason TEXT] [--author NAME]`: cancel the latest edit in
//! force by appending a `revert` edit (the history is append-only; nothing is removed).
//!
//! Reverting a sign-off needs `--reason`; it is then shown by `verify`, the audit report and
//! the workbench. Refused (exit 2, nothing written) when the override file changed on disk
//! since it was loaded: the latest edit might then be someone else's.

use std::path::PathBuf;

use clap::Args;

use super::CliError;
use crate::model::Workspace;
use crate::model::history;

/// Arguments of `undo`.
#[derive(Debug, Args)]
pub struct UndoArgs {
    /// Project folder or its project.json.
    pub project: PathBuf,
    /// Why (required to revert a sign-off).
    #[arg(long)]
    pub reason: Option<String>,
    /// Who reverts (default: the login name, $USER).
    #[arg(long)]
    pub author: Option<String>,
}

/// Append a revert of the latest edit in force and save.
pub fn run(args: &UndoArgs) -> Result<(), CliError> {
    let mut ws = Workspace::open(&args.project)?;
    let author = super::undo::default_author(args.author.as_deref());
    let r = ws.undo_append(&author, args.reason.as_deref().unwrap_or(""))?;
    let t = &ws.layer.edits[r.target];
    println!(
        "reverted edit #{}: {} (by {}, {}); appended revert #{}",
        r.target,
        history::describe(&ws.layer.edits, r.target),
        t.author,
        t.time,
        r.revert
    );
    Ok(())
}

/// `--author`, else the login name (`$USER`), else `unknown`.
pub fn default_author(arg: Option<&str>) -> String {
    arg.map(str::trim)
        .filter(|a| !a.is_empty())
        .map(str::to_string)
        .or_else(|| std::env::var("USER").ok().filter(|u| !u.trim().is_empty()))
        .unwrap_or_else(|| "unknown".into())
}
