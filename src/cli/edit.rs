//! `treewright edit PROJECT OP ... --author NAME [--note TEXT]`: record one edit in the
//! override layer, after checking that it applies to the effective tree as it stands.
//! With `--dry-run [--json]` it prints the edit's impact preview
//! ([`crate::model::impact`]) instead and writes nothing.

use std::path::PathBuf;

use clap::{Args, Subcommand};

use super::CliError;
use crate::model::Workspace;
use crate::model::edit::{Edit, ReviewStatus};
use crate::model::refusal::EditRefusal;
use crate::model::signoff::describe_edit;

/// Who made an edit and why.
#[derive(Debug, Args)]
pub struct Meta {
    /// Author of the edit (not needed with --dry-run).
    #[arg(long, required_unless_present = "dry_run")]
    pub author: Option<String>,
    /// Optional note stored with the edit.
    #[arg(long)]
    pub note: Option<String>,
    /// Show what the edit would do (findings resolved and created, top broader offers that
    /// change, whether the sign-off becomes outdated) and write nothing.
    #[arg(long)]
    pub dry_run: bool,
    /// With --dry-run: the preview as JSON.
    #[arg(long, requires = "dry_run")]
    pub json: bool,
}

/// Arguments of `edit`.
#[derive(Debug, Args)]
pub struct EditArgs {
    /// Project folder or its project.json.
    pub project: PathBuf,
    /// The edit.
    #[command(subcommand)]
    pub op: EditOp,
}

/// The edits. Node arguments accept a phrase id or a label.
#[derive(Debug, Subcommand)]
pub enum EditOp {
    /// Move NODE (with its subtree) under PARENT.
    Reparent {
        /// Node id or label.
        node: String,
        /// New parent id or label.
        parent: String,
        #[command(flatten)]
        meta: Meta,
    },
    /// Keep NODE under its current parent even when a re-trained tree puts it elsewhere.
    Pin {
        /// Node id or label.
        node: String,
        #[command(flatten)]
        meta: Meta,
    },
    /// Release a pin.
    Unpin {
        /// Node id or label.
        node: String,
        #[command(flatten)]
        meta: Meta,
    },
    /// Merge the sources into NODE: they become its aliases, their children move to it.
    Merge {
        /// Source ids or labels.
        #[arg(required = true, num_args = 1..)]
        sources: Vec<String>,
        /// Target id or label.
        #[arg(long)]
        into: String,
        #[command(flatten)]
        meta: Meta,
    },
    /// Show NODE under a new label.
    Rename {
        /// Node id or label.
        node: String,
        /// New label.
        label: String,
        /// Language of the new label (BCP 47 tag such as de or ja); default: the project's
        /// default language.
        #[arg(long, value_name = "TAG")]
        language: Option<String>,
        #[command(flatten)]
        meta: Meta,
    },
    /// Leave NODE out of the deployed tree; its children move to its parent.
    Exclude {
        /// Node id or label.
        node: String,
        #[command(flatten)]
        meta: Meta,
    },
    /// Undo an exclusion.
    Include {
        /// Node id or label.
        node: String,
        #[command(flatten)]
        meta: Meta,
    },
    /// Record a review decision: approved, to-fix or unreviewed.
    Review {
        /// Node id or label.
        node: String,
        /// approved | to-fix | unreviewed (needs-work is read as to-fix).
        status: String,
        /// Reviewer's comment.
        #[arg(long)]
        comment: Option<String>,
        #[command(flatten)]
        meta: Meta,
    },
}

/// Check and record one edit; a refused edit exits 2 with the reason and writes nothing.
///
/// The edit is checked against the file as loaded, then appended under the project lock; if
/// another writer saved in between, it is checked again on top of the newer file (see
/// [`Workspace::append`]).
pub fn run(args: EditArgs) -> Result<(), CliError> {
    let mut ws = Workspace::open(&args.project)?;
    let (edit, meta) = match args.op {
        EditOp::Reparent { node, parent, meta } => (
            Edit::Reparent {
                node: ws.resolve(&node)?,
                parent: ws.resolve(&parent)?,
            },
            meta,
        ),
        EditOp::Pin { node, meta } => {
            let row = ws.resolve_row(&node)?;
            let node = ws.project.phrases.id(row).to_string();
            let parent = ws
                .effective()?
                .tree
                .parent(row)
                .map(|p| ws.project.phrases.id(p).to_string())
                .ok_or(EditRefusal::NoParentToPin { node: node.clone() })
                .map_err(crate::model::WorkspaceError::from)?;
            (Edit::Pin { node, parent }, meta)
        }
        EditOp::Unpin { node, meta } => (
            Edit::Unpin {
                node: ws.resolve(&node)?,
            },
            meta,
        ),
        EditOp::Merge {
            sources,
            into,
            meta,
        } => {
            let sources = sources
                .iter()
                .map(|x| ws.resolve(x))
                .collect::<Result<Vec<_>, _>>()?;
            (
                Edit::Merge {
                    sources,
                    into: ws.resolve(&into)?,
                },
                meta,
            )
        }
        EditOp::Rename {
            node,
            label,
            language,
            meta,
        } => (
            Edit::Rename {
                node: ws.resolve(&node)?,
                label,
                language,
            },
            meta,
        ),
        EditOp::Exclude { node, meta } => (
            Edit::Exclude {
                node: ws.resolve(&node)?,
            },
            meta,
        ),
        EditOp::Include { node, meta } => (
            Edit::Include {
                node: ws.resolve(&node)?,
            },
            meta,
        ),
        EditOp::Review {
            node,
            status,
            comment,
            meta,
        } => {
            let st = ReviewStatus::parse(&status).ok_or_else(|| {
                CliError::bad_input(format!(
                    "review status \"{status}\": expected approved, to-fix or unreviewed"
                ))
            })?;
            (
                Edit::Review {
                    node: ws.resolve(&node)?,
                    status: st,
                    comment: comment.unwrap_or_default(),
                },
                meta,
            )
        }
    };
    if meta.dry_run {
        // a preview: the override file is not touched (not even locked)
        let impact = ws.preview(&edit)?;
        if meta.json {
            println!(
                "{}",
                serde_json::to_string_pretty(&impact).map_err(CliError::bad_input)?
            );
        } else {
            for line in impact.lines() {
                println!("{line}");
            }
        }
        return Ok(());
    }
    let author = meta.author.unwrap_or_default();
    if author.trim().is_empty() {
        return Err(CliError::bad_input("--author is empty"));
    }
    ws.check_edit(&edit)
        .map_err(crate::model::WorkspaceError::from)?;
    let text = describe_edit(&edit);
    let index = ws.append(edit, author.trim(), meta.note)?;
    println!("edit #{index}: {text}");
    Ok(())
}
