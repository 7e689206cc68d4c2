//! `treewright signoff PROJECT --reviewer NAME [--note TEXT]` and the open-findings count
//! a sign-off records.

use std::path::PathBuf;

use clap::Args;

use super::CliError;
use super::edit::Session;
use crate::model::Project;
use crate::model::edit::Edit;
use crate::model::effective::{ApplyProblem, EffectiveTree};
use crate::model::overrides::record;
use crate::model::signoff::signoff_edit;

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

/// Open findings recorded by a sign-off.
///
/// For now this counts the apply problems: skipped edits, among them the stale edits, which
/// are findings of the audit's `stale-edit` rule. The integrator routes this one function to
/// the full audit (`audit(...).open_count(..)`) once the audit module has landed; callers do
/// not change.
pub fn count_open_findings(
    project: &Project,
    eff: &EffectiveTree,
    problems: &[ApplyProblem],
) -> usize {
    let _ = (project, eff);
    problems.len()
}

/// Record a sign-off of the effective tree as it stands.
pub fn run(args: &SignoffArgs) -> Result<(), CliError> {
    let reviewer = args.reviewer.trim();
    if reviewer.is_empty() {
        return Err(CliError::bad_input("--reviewer is empty"));
    }
    let mut s = Session::open(&args.project)?;
    let (eff, problems) = s.effective();
    let open = count_open_findings(&s.project, &eff, &problems);
    let edit = signoff_edit(&eff, &s.project.phrases, reviewer, open);
    let summary = match &edit {
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
    s.layer.push(record(edit, reviewer, args.note.clone()));
    s.save()?;
    println!("signed off by {reviewer}: {summary}");
    Ok(())
}
