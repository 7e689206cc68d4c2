//! `treewright apply PROJECT --out FILE`: write the effective tree and print the problems.

use std::path::PathBuf;

use clap::Args;

use super::CliError;
use super::edit::{Session, print_problems};
use crate::model::export::export_json;
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

/// Apply the override layer and write the effective tree.
pub fn run(args: &ApplyArgs) -> Result<(), CliError> {
    let s = Session::open(&args.project)?;
    let (eff, problems) = s.effective();
    let text = export_json(&eff, &s.project.phrases);
    atomic_write(&args.out, text.as_bytes(), false)
        .map_err(|e| CliError::bad_input(format!("{}: {e}", args.out.display())))?;
    println!(
        "wrote {} ({} nodes, {} edits, {} skipped)",
        args.out.display(),
        eff.tree.node_count(),
        s.layer.edits.len(),
        problems.len()
    );
    print_problems(&problems);
    Ok(())
}
