//! `treewright history PROJECT [--json]`: the override layer's edits as a hash chain, oldest
//! first: index, link (`prev`), author, time, what, and which revert cancels an edit.
//!
//! Loading the project checks the chain; a changed history is refused (exit 2) with the
//! first edit that does not follow.

use std::path::PathBuf;

use clap::Args;

use super::CliError;
use crate::model::Workspace;
use crate::model::history;

/// Arguments of `history`.
#[derive(Debug, Args)]
pub struct HistoryArgs {
    /// Project folder or its project.json.
    pub project: PathBuf,
    /// Print one JSON object instead of text.
    #[arg(long)]
    pub json: bool,
}

/// Print the chain.
pub fn run(args: &HistoryArgs) -> Result<(), CliError> {
    let ws = Workspace::open(&args.project)?;
    let edits = &ws.layer.edits;
    let entries = history::entries(edits);
    let head = history::head(edits);
    if args.json {
        let v = serde_json::json!({
            "file": ws.overrides_path().display().to_string(),
            "header_sha256": history::header_sha256(),
            "head": head,
            "edits": entries,
        });
        println!(
            "{}",
            serde_json::to_string_pretty(&v).map_err(CliError::bad_input)?
        );
        return Ok(());
    }
    println!(
        "{}: {} edits, chain from the header {}",
        ws.overrides_path().display(),
        entries.len(),
        &history::header_sha256()[..12]
    );
    for e in &entries {
        let mut tail = String::new();
        if let Some(j) = e.reverted_by {
            tail.push_str(&format!(" [reverted by #{j}]"));
        }
        match e.signed {
            Some(true) => tail.push_str(" [signed]"),
            Some(false) => tail.push_str(" [unsigned]"),
            None => {}
        }
        if let Some(n) = &e.note {
            tail.push_str(&format!(" note: {n}"));
        }
        println!(
            "#{:<4} {}  {}  {:<12} {}{}",
            e.index,
            &e.prev[..12],
            e.time,
            e.author,
            e.what,
            tail
        );
    }
    println!("head {head}");
    Ok(())
}
