//! `treewright signoff PROJECT --reviewer NAME [--note TEXT] [--key PATH]`: record a
//! sign-off of the effective tree as it stands, signed with the reviewer's key when given.
//!
//! The sign-off edit (tree hash, open findings = warnings and errors not accepted,
//! unreviewed nodes) comes from [`Workspace::signoff_edit`], the same function the
//! workbench uses. It is appended under the project lock; if another writer saved in
//! between, the sign-off is rebuilt for the newer file.

use std::path::PathBuf;

use clap::Args;

use super::CliError;
use crate::model::Workspace;
use crate::model::edit::Edit;

/// Arguments of `signoff`.
#[derive(Debug, Args)]
pub struct SignoffArgs {
    /// Project folder or its project.json.
    pub project: PathBuf,
    /// Reviewer signing off.
    #[arg(long)]
    pub reviewer: String,
    /// Optional note.
    #[arg(long)]
    pub note: Option<String>,
    /// Sign the sign-off with this OpenSSH ed25519 private key ("sshsig", namespace
    /// treewright-signoff); a passphrase is asked for on the terminal and never stored.
    #[arg(long, value_name = "PATH")]
    pub key: Option<PathBuf>,
}

/// Record a sign-off of the effective tree as it stands.
pub fn run(args: &SignoffArgs) -> Result<(), CliError> {
    let reviewer = args.reviewer.trim();
    if reviewer.is_empty() {
        return Err(CliError::bad_input("--reviewer is empty"));
    }
    let key = match &args.key {
        Some(path) => Some(
            crate::model::sshsig::read_private_key(path, || ask_passphrase(path))
                .map_err(CliError::bad_input)?,
        ),
        None => None,
    };
    let mut ws = Workspace::open(&args.project)?;
    let edit = ws.signoff_edit(reviewer)?;
    let index = ws.append_signed(edit, reviewer, args.note.clone(), key.as_ref())?;
    let summary = match &ws.layer.edits[index].edit {
        Edit::Signoff {
            tree_hash,
            open_findings,
            unreviewed,
            ..
        } => format!(
            "tree {tree_hash}, {open_findings} open findings, {unreviewed} unreviewed nodes"
        ),
        _ => String::new(),
    };
    println!("signed off by {reviewer}: {summary}");
    if let Some(k) = &key {
        println!(
            "signed with {}",
            crate::model::sshsig::fingerprint(k.public_key().key_data())
        );
    }
    Ok(())
}

/// Ask for a key's passphrase on the terminal (`None` when there is no terminal).
fn ask_passphrase(path: &std::path::Path) -> Option<String> {
    use std::io::IsTerminal;
    if !std::io::stdin().is_terminal() {
        return None;
    }
    rpassword::prompt_password(format!("passphrase for {}: ", path.display())).ok()
}
