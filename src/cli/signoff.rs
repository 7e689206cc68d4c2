//! `treewright signoff PROJECT --reviewer NAME [--note TEXT]` and the open-findings count
//! a sign-off records.

use std::path::PathBuf;

use clap::Args;

use super::CliError;
use super::edit::Session;
use crate::model::Project;
use crate::model::audit::{AuditConfig, Severity, audit};
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

/// Open findings recorded by a sign-off: the audit's findings of severity warning or error
/// that are not accepted (a finding on a node reviewed as approved is accepted). Stale and
/// skipped edits are findings of the audit's `stale-edit` rule and count too. A project whose
/// `audit` section is invalid is refused rather than signed off with an unknown count.
pub fn count_open_findings(
    project: &Project,
    eff: &EffectiveTree,
    problems: &[ApplyProblem],
) -> Result<usize, CliError> {
    let cfg = AuditConfig::of_project(project).map_err(CliError::bad_input)?;
    let report = audit(&project.gaussians, &project.phrases, eff, problems, &cfg);
    Ok(report.open_count(Severity::Warning))
}

/// Record a sign-off of the effective tree as it stands.
pub fn run(args: &SignoffArgs) -> Result<(), CliError> {
    let reviewer = args.reviewer.trim();
    if reviewer.is_empty() {
        return Err(CliError::bad_input("--reviewer is empty"));
    }
    let mut s = Session::open(&args.project)?;
    let (eff, problems) = s.effective();
    let open = count_open_findings(&s.project, &eff, &problems)?;
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
