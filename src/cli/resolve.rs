//! `treewright resolve PROJECT CONFLICT-ID ours|theirs`: finish one conflict of a merged
//! override file (`all` resolves every conflict to the same side).
//!
//! The chosen side's edits are appended to the file's edits and the conflict leaves the
//! `conflicts` section; the file is rewritten atomically under the project lock (the
//! previous one kept as `.bak`). Once no conflict is left the file loads as usual.

use std::path::PathBuf;

use clap::Args;

use super::CliError;
use super::merge_edits::SideArg;
use crate::model::Project;
use crate::model::fsutil::atomic_write;
use crate::model::lock::ProjectLock;
use crate::model::merge::{self, Side};
use crate::model::overrides::{apply, parse_override_file, serialize_override_file};

/// Arguments of `resolve`.
#[derive(Debug, Args)]
pub struct ResolveArgs {
    /// Project folder or its project.json.
    pub project: PathBuf,
    /// The conflict's id (`c1`, ...), or `all`.
    pub conflict: String,
    /// Which side's edits to keep.
    pub side: SideArg,
}

/// Resolve a conflict of the project's override file.
pub fn run(args: &ResolveArgs) -> Result<(), CliError> {
    let project = Project::load(&args.project)?;
    let path = project.overrides_path();
    let file = path.display().to_string();
    let lock = ProjectLock::acquire(&project.dir).map_err(CliError::bad_input)?;
    let bytes = std::fs::read(&path).map_err(|e| CliError::bad_input(format!("{file}: {e}")))?;
    let (mut edits, mut conflicts) =
        parse_override_file(&bytes, &file).map_err(CliError::bad_input)?;
    let side: Side = args.side.into();
    if conflicts.is_empty() {
        return Err(CliError::bad_input(format!(
            "{file}: conflicts: none left to resolve"
        )));
    }
    let done: Vec<String> = if args.conflict == "all" {
        edits = merge::take_all(&edits, &conflicts, side);
        conflicts.drain(..).map(|c| c.id).collect()
    } else {
        match merge::resolve_one(&mut edits, &mut conflicts, &args.conflict, side) {
            Some(c) => vec![c.id],
            None => {
                return Err(CliError::bad_input(format!(
                    "{file}: conflicts: no conflict \"{}\" (open: {})",
                    args.conflict,
                    conflicts
                        .iter()
                        .map(|c| c.id.as_str())
                        .collect::<Vec<_>>()
                        .join(", ")
                )));
            }
        }
    };
    atomic_write(&path, &serialize_override_file(&edits, &conflicts), true)
        .map_err(|e| CliError::bad_input(format!("{file}: {e}")))?;
    drop(lock);
    println!(
        "resolved {} to {}; {} conflict(s) left",
        done.join(", "),
        side.as_str(),
        conflicts.len()
    );
    if let (true, Some(tree)) = (conflicts.is_empty(), &project.tree) {
        let (_, problems) = apply(tree, &project.phrases, &edits);
        for p in &problems {
            println!(
                "  edit #{} ({}) does not apply: {}",
                p.index, p.op, p.reason
            );
        }
        match merge::signed_by(tree, &project.phrases, &edits) {
            Some(by) => println!("signed off: the tree matches the sign-off by {by}"),
            None => println!("not signed off: the tree matches no recorded sign-off"),
        }
    }
    Ok(())
}
