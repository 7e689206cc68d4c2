//! `treewright verify PROJECT`: exit 0 only if the latest sign-off matches the current
//! effective tree; otherwise exit 1 and list what changed since.

use std::path::PathBuf;

use clap::Args;

use super::CliError;
use crate::model::Workspace;
use crate::model::signed::{SignedSource, SinceSignoff};
use crate::model::signoff::Verification;

/// Arguments of `verify`.
#[derive(Debug, Args)]
pub struct VerifyArgs {
    /// Project folder or its project.json.
    pub project: PathBuf,
    /// Print one JSON object instead of text.
    #[arg(long)]
    pub json: bool,
    /// Do not require the sign-off to be signed by an allowed key even when the project
    /// names an allowed-signers file.
    #[arg(long)]
    pub allow_unsigned: bool,
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
            by,
            signed,
            current,
            edits_since,
            since,
        } => {
            let index = since.index;
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
            s.push_str(&render_since(since));
        }
    }
    s
}

/// Lines for the signed tree against the current one (shared with `diff --against-signoff`).
pub fn render_since(since: &SinceSignoff) -> String {
    use std::fmt::Write;
    let mut s = String::new();
    match since.signed_tree {
        SignedSource::Snapshot => {}
        SignedSource::Replayed => {
            let _ = writeln!(
                s,
                "no snapshot of the signed tree; the edits up to the sign-off on today's base \
                 tree give the signed hash, so they rebuild it exactly"
            );
        }
        SignedSource::Missing => {
            let _ = writeln!(
                s,
                "NOT COMPLETE: the snapshot of the signed tree is missing (signed before \
                 snapshots were kept) and the edits up to the sign-off no longer give the \
                 signed hash; listed below is only what the edits since the sign-off changed"
            );
        }
    }
    if let Some(b) = &since.base_changed {
        let _ = writeln!(s, "base: {b}");
    }
    let _ = writeln!(
        s,
        "tree changes{} ({} nodes, {} changes):",
        if since.complete { "" } else { " known" },
        since.nodes_changed,
        since.changes.len()
    );
    for c in &since.changes {
        let _ = writeln!(s, "  {c}");
    }
    s
}

/// Compare the latest sign-off with the current effective tree.
pub fn run(args: &VerifyArgs) -> Result<(), CliError> {
    let ws = Workspace::open(&args.project)?;
    let v = ws.verify()?;
    let sig = signature_check(&ws, args.allow_unsigned)?;
    let reverted = crate::model::history::reverted_signoff_lines(&ws.layer.edits);
    if args.json {
        // the verification's own fields first, in their order; the new ones only when set
        #[derive(serde::Serialize)]
        struct Out<'a> {
            #[serde(flatten)]
            v: &'a Verification,
            #[serde(skip_serializing_if = "Vec::is_empty")]
            reverted_signoffs: Vec<String>,
            #[serde(skip_serializing_if = "Option::is_none")]
            signature: Option<String>,
        }
        let out = Out {
            v: &v,
            reverted_signoffs: reverted.clone(),
            signature: sig.line(),
        };
        println!(
            "{}",
            serde_json::to_string_pretty(&out).map_err(CliError::bad_input)?
        );
    } else {
        print!("{}", render(&v));
        for l in &reverted {
            println!("{l}");
        }
        if let Some(line) = sig.line() {
            println!("{line}");
        }
    }
    if v.is_valid() && sig.passes() {
        Ok(())
    } else {
        Err(CliError::check_failed(""))
    }
}

/// The signature check of the gate (`verify`, `export --require-signoff`): skipped with
/// `--allow-unsigned`; an unreadable signer file is bad input (exit 2).
pub fn signature_check(
    ws: &Workspace,
    allow_unsigned: bool,
) -> Result<crate::model::workspace::SignatureCheck, CliError> {
    if allow_unsigned {
        return Ok(crate::model::workspace::SignatureCheck::NoPolicy);
    }
    Ok(ws.check_signature()?)
}
