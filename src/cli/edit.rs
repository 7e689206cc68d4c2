//! `treewright edit PROJECT OP ... --author NAME [--note TEXT]`: record one edit in the
//! override layer, after checking that it applies to the effective tree as it stands.

use std::path::{Path, PathBuf};

use clap::{Args, Subcommand};

use super::CliError;
use crate::model::edit::{Edit, ReviewStatus};
use crate::model::effective::{ApplyProblem, EffectiveTree};
use crate::model::overrides::{OverrideLayer, apply, check_edit, record};
use crate::model::signoff::describe_edit;
use crate::model::{PhraseId, Project, Tree};

/// A project opened for the override-layer commands: the project, its base tree and its
/// override layer.
pub struct Session {
    /// The loaded project.
    pub project: Project,
    /// The machine-built tree.
    pub base: Tree,
    /// The override layer as loaded.
    pub layer: OverrideLayer,
    /// Where the override layer lives.
    pub path: PathBuf,
}

impl Session {
    /// Load the project, its tree and its override layer (exit 2 on any problem).
    pub fn open(project: &Path) -> Result<Self, CliError> {
        let project = Project::load(project)?;
        let base = project.tree.clone().ok_or_else(|| {
            CliError::bad_input(format!(
                "{}: the project has no tree yet; build one first",
                project.tree_path().display()
            ))
        })?;
        let path = project.overrides_path();
        let layer = OverrideLayer::load(&path).map_err(CliError::bad_input)?;
        Ok(Session {
            project,
            base,
            layer,
            path,
        })
    }

    /// The effective tree of the current edits and the edits that were skipped.
    pub fn effective(&self) -> (EffectiveTree, Vec<ApplyProblem>) {
        apply(&self.base, &self.project.phrases, &self.layer.edits)
    }

    /// Save the override layer (refuses when the file changed on disk).
    pub fn save(&mut self) -> Result<(), CliError> {
        self.layer.save(&self.path).map_err(CliError::bad_input)
    }

    /// Resolve a node argument: a phrase id, else a label (original or effective, exact
    /// first, then ignoring case).
    pub fn resolve(&self, eff: &EffectiveTree, arg: &str) -> Result<String, CliError> {
        let phrases = &self.project.phrases;
        let found = phrases.find(arg).or_else(|| {
            let by = |f: &dyn Fn(&str) -> bool| {
                eff.labels.iter().position(|l| f(l)).map(|i| i as PhraseId)
            };
            let lower = arg.to_lowercase();
            by(&|l| l == arg).or_else(|| by(&|l| l.to_lowercase() == lower))
        });
        found.map(|p| phrases.id(p).to_string()).ok_or_else(|| {
            CliError::bad_input(format!(
                "no phrase with id or label \"{arg}\" in {}",
                self.project.dir.display()
            ))
        })
    }
}

/// Print the skipped edits, one per line.
pub fn print_problems(problems: &[ApplyProblem]) {
    for p in problems {
        println!("skipped edit #{} ({}): {}", p.index, p.op, p.reason);
    }
}

/// Who made an edit and why.
#[derive(Debug, Args)]
pub struct Meta {
    /// Author of the edit.
    #[arg(long)]
    pub author: String,
    /// Optional note stored with the edit.
    #[arg(long)]
    pub note: Option<String>,
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
    /// Record a review decision: approved, needs-work or unreviewed.
    Review {
        /// Node id or label.
        node: String,
        /// approved | needs-work | unreviewed.
        status: String,
        /// Reviewer's comment.
        #[arg(long)]
        comment: Option<String>,
        #[command(flatten)]
        meta: Meta,
    },
}

/// Check and record one edit; a refused edit exits 2 with the reason and writes nothing.
pub fn run(args: EditArgs) -> Result<(), CliError> {
    let mut s = Session::open(&args.project)?;
    let (eff, _) = s.effective();
    let phrases = &s.project.phrases;
    let (edit, meta) = match args.op {
        EditOp::Reparent { node, parent, meta } => (
            Edit::Reparent {
                node: s.resolve(&eff, &node)?,
                parent: s.resolve(&eff, &parent)?,
            },
            meta,
        ),
        EditOp::Pin { node, meta } => {
            let node = s.resolve(&eff, &node)?;
            let row = phrases.get(&node).unwrap_or_default();
            let parent = eff
                .tree
                .parent(row)
                .map(|p| phrases.id(p).to_string())
                .ok_or_else(|| {
                    CliError::bad_input(format!(
                        "refused: \"{node}\" has no parent in the effective tree to pin it to"
                    ))
                })?;
            (Edit::Pin { node, parent }, meta)
        }
        EditOp::Unpin { node, meta } => (
            Edit::Unpin {
                node: s.resolve(&eff, &node)?,
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
                .map(|x| s.resolve(&eff, x))
                .collect::<Result<Vec<_>, _>>()?;
            (
                Edit::Merge {
                    sources,
                    into: s.resolve(&eff, &into)?,
                },
                meta,
            )
        }
        EditOp::Rename { node, label, meta } => (
            Edit::Rename {
                node: s.resolve(&eff, &node)?,
                label,
            },
            meta,
        ),
        EditOp::Exclude { node, meta } => (
            Edit::Exclude {
                node: s.resolve(&eff, &node)?,
            },
            meta,
        ),
        EditOp::Include { node, meta } => (
            Edit::Include {
                node: s.resolve(&eff, &node)?,
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
                    "review status \"{status}\": expected approved, needs-work or unreviewed"
                ))
            })?;
            (
                Edit::Review {
                    node: s.resolve(&eff, &node)?,
                    status: st,
                    comment: comment.unwrap_or_default(),
                },
                meta,
            )
        }
    };
    if meta.author.trim().is_empty() {
        return Err(CliError::bad_input("--author is empty"));
    }
    check_edit(&eff, phrases, &edit)
        .map_err(|why| CliError::bad_input(format!("refused: {why}")))?;
    let text = describe_edit(&edit);
    s.layer.push(record(edit, meta.author.trim(), meta.note));
    s.save()?;
    println!("edit #{}: {text}", s.layer.edits.len() - 1);
    Ok(())
}
