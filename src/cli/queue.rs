//! `treewright queue PROJECT [--top N] [--json]`: the review queue, highest risk first.
//!
//! Risk = finding confidence × reach (subtree size, or the traffic under the node when the
//! manifest names a `weights` file); see [`crate::model::queue`]. Lists the nodes still
//! waiting for a decision, with why they are queued and the suggested decision, and the
//! progress towards sign-off. Writes nothing.

use std::path::PathBuf;

use clap::Args;

use super::CliError;
use crate::model::Workspace;
use crate::model::queue::{QueueItem, ReviewQueue, project_weights};

/// Arguments of `queue`.
#[derive(Debug, Args)]
pub struct QueueArgs {
    /// Project folder or its project.json.
    pub project: PathBuf,
    /// Show only the first N waiting nodes.
    #[arg(long, value_name = "N")]
    pub top: Option<usize>,
    /// Machine-readable output.
    #[arg(long)]
    pub json: bool,
}

/// Print the queue.
pub fn run(args: &QueueArgs) -> Result<(), CliError> {
    let ws = Workspace::open(&args.project)?;
    let weights = project_weights(&ws.project).map_err(CliError::bad_input)?;
    let report = ws.audit_now()?;
    let q = ReviewQueue::build(
        &report,
        ws.effective()?,
        &ws.project.phrases,
        weights.as_deref(),
    );
    let progress = q.progress();
    let waiting = q.pending().count();
    let rows: Vec<&QueueItem> = q.pending().take(args.top.unwrap_or(usize::MAX)).collect();
    let reach = if weights.is_some() {
        "weights"
    } else {
        "subtree-size"
    };
    if args.json {
        let v = serde_json::json!({
            "project": ws.project.manifest.name,
            "reach": reach,
            "waiting": waiting,
            "progress": progress,
            "items": rows,
        });
        println!(
            "{}",
            serde_json::to_string_pretty(&v).map_err(CliError::bad_input)?
        );
        return Ok(());
    }
    println!(
        "Review queue of \"{}\": {waiting} waiting; {}; reach = {}",
        ws.project.manifest.name,
        progress.text(),
        if weights.is_some() {
            "traffic from the weights file"
        } else {
            "subtree size"
        }
    );
    for (i, x) in rows.iter().enumerate() {
        println!(
            "{:>4}. risk {:.3} (confidence {:.3} x reach {})  \"{}\" ({}){}",
            i + 1,
            x.risk,
            x.confidence,
            x.reach,
            x.label,
            x.id,
            if x.state == crate::model::queue::ItemState::Open {
                String::new()
            } else {
                format!(" [{}]", x.state.as_str())
            }
        );
        println!("      why: {}", x.why);
        println!("      suggested: {}", x.suggested);
    }
    Ok(())
}
