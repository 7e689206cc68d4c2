//! `treewright apply PROJECT --out FILE`: write the effective tree and print the problems.

use std::path::PathBuf;

use clap::Args;

use super::CliError;
use crate::model::Workspace;
use crate::model::effective::ApplyProblem;
use crate::model::export::Format;
use crate::model::fsutil::atomic_write;

/// Arguments of `apply`.
#[derive(Debug, Args)]
pub struct ApplyArgs {
    /// Project folder or its project.json.
    pub project: PathBuf,
    /// Output file: the tree.json schema plus aliases, excluded and renamed.
    #[arg(long)]
    pub out: PathBuf,
}

/// Print the skipped edits, one per line.
pub fn print_problems(problems: &[ApplyProblem]) {
    for p in problems {
        println!("skipped edit #{} ({}): {}", p.index, p.op, p.reason);
    }
}

/// Apply the override layer and write the effective tree.
pub fn run(args: &ApplyArgs) -> Result<(), CliError> {
    let ws = Workspace::open(&args.project)?;
    let text = ws.export(Format::Json, "", "")?;
    atomic_write(&args.out, text.as_bytes(), false)
        .map_err(|e| CliError::bad_input(format!("{}: {e}", args.out.display())))?;
    println!(
        "wrote {} ({} nodes, {} edits, {} skipped)",
        args.out.display(),
        ws.effective()?.tree.node_count(),
        ws.layer.edits.len(),
        ws.problems.len()
    );
    print_problems(&ws.problems);
    Ok(())
}
