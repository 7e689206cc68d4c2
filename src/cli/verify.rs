//! `treewright verify PROJECT`: exit 0 only if the latest sign-off matches the current
//! effective tree; otherwise exit 1 and list what changed since.

use std::path::PathBuf;

use clap::Args;

use super::CliError;
use crate::model::Workspace;
use crate::model::signoff::Verification;

/// Arguments of `verify`.
#[derive(Debug, Args)]
pub struct VerifyArgs {
    /// Project folder or its project.json.
    pub project: PathBuf,
    /// Print one JSON object instead of text.
    #[arg(long)]
    pub json: bool,
}

/// Human-readable lines for a verification outcome.
pub fn render(v: &Verification) -> String {
    use std::fmt::Write;
    let mut s = String::new();
    match v {
        Verification::NoSignoff => {
            let _ = writeln!(s, "not signed off: the override layer has no sign-off");
        }
        Verification::Valid { index, by, hash } => {
            let _ = writeln!(
                s,
                "signed off by {by} (edit #{index}): tree {hash} unchanged"
            );
        }
        Verification::Changed {
            index,
            by,
            signed,
            current,
            edits_since,
            changes,
        } => {
            let _ = writeln!(s, "changed since the sign-off by {by} (edit #{index})");
            let _ = writeln!(s, "  signed  {signed}");
            let _ = writeln!(s, "  current {current}");
            if edits_since.is_empty() {
                let _ = writeln!(
                    s,
                    "  no edit since: the base tree or the phrase table changed"
                );
            } else {
                let _ = writeln!(s, "edits since:");
                for e in edits_since {
                    let _ = writeln!(s, "  #{e}");
                }
            }
            if !changes.is_empty() {
                let _ = writeln!(s, "tree changes:");
                for c in changes {
                    let _ = writeln!(s, "  {c}");
                }
            }
        }
    }
    s
}

/// Compare the latest sign-off with the current effective tree.
pub fn run(args: &VerifyArgs) -> Result<(), CliError> {
    let v = Workspace::open(&args.project)?.verify()?;
    if args.json {
        println!(
            "{}",
            serde_json::to_string_pretty(&v).map_err(CliError::bad_input)?
        );
    } else {
        print!("{}", render(&v));
    }
    if v.is_valid() {
        Ok(())
    } else {
        Err(CliError::check_failed(""))
    }
}
