//! `treewright merge-edits BASE OURS THEIRS`: three-way merge of override layers, usable as
//! a git merge driver (`%O %A %B`: the result is written to OURS unless `--out` is given).
//!
//! Conflicts are found on the effective trees of the project the files belong to (see
//! [`crate::model::merge`]). Exit 0 when the merge is clean; exit 1 when it has conflicts,
//! which are written to the result's `conflicts` section (the loader refuses the file until
//! `treewright resolve` or `--take` finishes it); exit 2 on bad input.

use std::path::{Path, PathBuf};

use clap::{Args, ValueEnum};

use super::CliError;
use crate::model::Project;
use crate::model::fsutil::atomic_write;
use crate::model::merge::{self, Conflict, MergeOutcome, Side};
use crate::model::overrides::{parse_override_file, serialize_override_file};
use crate::model::signoff::describe_edit;

/// A side chosen on the command line.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum SideArg {
    /// Our edits (OURS, git's `%A`).
    Ours,
    /// Their edits (THEIRS, git's `%B`).
    Theirs,
}

impl From<SideArg> for Side {
    fn from(s: SideArg) -> Side {
        match s {
            SideArg::Ours => Side::Ours,
            SideArg::Theirs => Side::Theirs,
        }
    }
}

/// Arguments of `merge-edits`.
#[derive(Debug, Args)]
pub struct MergeEditsArgs {
    /// The common ancestor's override file (git's `%O`).
    pub base: PathBuf,
    /// Our override file (git's `%A`); the result is written here unless `--out` is given.
    pub ours: PathBuf,
    /// Their override file (git's `%B`).
    pub theirs: PathBuf,
    /// Write the result here instead of OURS.
    #[arg(long, value_name = "FILE")]
    pub out: Option<PathBuf>,
    /// Print one JSON object instead of text.
    #[arg(long)]
    pub json: bool,
    /// Resolve every conflict to this side (the result is then clean).
    #[arg(long, value_name = "SIDE")]
    pub take: Option<SideArg>,
    /// The project the files belong to (default: the folder of --path, else of OURS).
    #[arg(long, value_name = "DIR")]
    pub project: Option<PathBuf>,
    /// The file's path in the repository (git's `%P`); its folder is the project.
    #[arg(long, value_name = "PATH")]
    pub path: Option<PathBuf>,
}

fn folder_of(p: &Path) -> PathBuf {
    p.parent()
        .filter(|d| !d.as_os_str().is_empty())
        .map(Path::to_path_buf)
        .unwrap_or_else(|| PathBuf::from("."))
}

fn read_layer(p: &Path) -> Result<Vec<crate::model::edit::EditRecord>, CliError> {
    let file = p.display().to_string();
    let bytes = match std::fs::read(p) {
        Ok(b) => b,
        // git passes an empty ancestor when the file is new on both sides
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => return Ok(Vec::new()),
        Err(e) => return Err(CliError::bad_input(format!("{file}: {e}"))),
    };
    if bytes.iter().all(u8::is_ascii_whitespace) {
        return Ok(Vec::new());
    }
    let (edits, conflicts) = parse_override_file(&bytes, &file).map_err(CliError::bad_input)?;
    if !conflicts.is_empty() {
        return Err(CliError::bad_input(format!(
            "{file}: conflicts: has {} unresolved merge conflict(s); resolve them first",
            conflicts.len()
        )));
    }
    Ok(edits)
}

/// Text report of a merge.
pub fn render(m: &MergeOutcome, out: &Path) -> String {
    use std::fmt::Write;
    let mut s = String::new();
    let _ = writeln!(
        s,
        "merged {}: {} edits ({} added by ours, {} by theirs, {} dropped because a side undid them), {} conflict(s)",
        out.display(),
        m.edits.len(),
        m.added_ours.len(),
        m.added_theirs.len(),
        m.dropped.len(),
        m.conflicts.len()
    );
    for r in &m.dropped {
        let _ = writeln!(s, "  dropped: {} (by {})", describe_edit(&r.edit), r.author);
    }
    for c in &m.conflicts {
        s.push_str(&c.render());
    }
    if m.is_clean() {
        match &m.signed_by {
            Some(by) => {
                let _ = writeln!(
                    s,
                    "signed off: the merged tree matches the sign-off by {by}"
                );
            }
            None => {
                let _ = writeln!(
                    s,
                    "not signed off: the merged tree matches no recorded sign-off"
                );
            }
        }
    } else {
        let _ = writeln!(
            s,
            "resolve with `treewright resolve PROJECT ID ours|theirs` (or --take ours|theirs)"
        );
    }
    s
}

/// JSON report of a merge.
pub fn to_json(m: &MergeOutcome, out: &Path) -> serde_json::Value {
    serde_json::json!({
        "out": out.display().to_string(),
        "clean": m.is_clean(),
        "edits": m.edits.len(),
        "added_ours": m.added_ours,
        "added_theirs": m.added_theirs,
        "dropped": m.dropped,
        "conflicts": m.conflicts,
        "signed_by": m.signed_by,
    })
}

/// Merge three override files.
pub fn run(args: &MergeEditsArgs) -> Result<(), CliError> {
    let dir = match (&args.project, &args.path) {
        (Some(p), _) => p.clone(),
        (None, Some(p)) => folder_of(p),
        (None, None) => folder_of(&args.ours),
    };
    let project = Project::load(&dir)?;
    let Some(tree) = &project.tree else {
        return Err(CliError::bad_input(format!(
            "{}: the project has no tree yet; build one first",
            project.tree_path().display()
        )));
    };
    let base = read_layer(&args.base)?;
    let ours = read_layer(&args.ours)?;
    let theirs = read_layer(&args.theirs)?;
    let mut m = merge::merge(tree, &project.phrases, &base, &ours, &theirs);
    if let Some(side) = args.take {
        m.edits = m.take_all(side.into());
        m.conflicts = Vec::<Conflict>::new();
        m.signed_by = merge::signed_by(tree, &project.phrases, &m.edits);
    }
    let out = args.out.clone().unwrap_or_else(|| args.ours.clone());
    let bytes = serialize_override_file(&m.edits, &m.conflicts);
    atomic_write(&out, &bytes, false)
        .map_err(|e| CliError::bad_input(format!("{}: {e}", out.display())))?;
    if args.json {
        println!(
            "{}",
            serde_json::to_string_pretty(&to_json(&m, &out)).map_err(CliError::bad_input)?
        );
    } else {
        print!("{}", render(&m, &out));
    }
    if m.is_clean() {
        Ok(())
    } else {
        Err(CliError::check_failed(format!(
            "{}: {} merge conflict(s) left in its conflicts section",
            out.display(),
            m.conflicts.len()
        )))
    }
}
