//! `treewright signoff PROJECT --reviewer NAME [--note TEXT]`: record a sign-off of the
//! effective tree as it stands.
//!
//! The sign-off edit (tree hash, open findings = warnings and errors not accepted,
//! unreviewed nodes) comes from [`Workspace::signoff_edit`], the same function the
//! workbench uses. It is appended under the project lock; if another writer saved in
//! between, the sign-off is rebuilt for the newer file.

use std::path::PathBuf;

use clap::Args;

use super::CliError;
use crate::model::Workspace;
use crate::model::edit::Edit;

/// Arguments of `signoff`.
#[derive(Debug, Args)]
pub struct SignoffArgs {
    /// Project folder or its project.json.
    pub project: PathBuf,
    /// Reviewer signing off.
    #[arg(long)]
    pub reviewer: String,
    /// Optional note.
    #[arg(long)]
    pub note: Option<String>,
}

/// Record a sign-off of the effective tree as it stands.
pub fn run(args: &SignoffArgs) -> Result<(), CliError> {
    let reviewer = args.reviewer.trim();
    if reviewer.is_empty() {
        return Err(CliError::bad_input("--reviewer is empty"));
    }
    let mut ws = Workspace::open(&args.project)?;
    let edit = ws.signoff_edit(reviewer)?;
    let index = ws.append(edit, reviewer, args.note.clone())?;
    let summary = match &ws.layer.edits[index].edit {
        Edit::Signoff {
            tree_hash,
            open_findings,
            unreviewed,
            ..
        } => format!(
            "tree {tree_hash}, {open_findings} open findings, {unreviewed} unreviewed nodes"
        ),
        _ => String::new(),
    };
    println!("signed off by {reviewer}: {summary}");
    Ok(())
}
