//! Headless subcommands over the same model the GUI uses.
//!
//! Each subcommand lives in its own file and is a thin function over `crate::model`.
//! Exit codes: 0 ok, 1 a check failed (verify, audit `--fail-on`), 2 bad input.

use std::path::PathBuf;
use std::process::ExitCode;

use clap::{Parser, Subcommand};

pub mod apply;
pub mod audit;
pub mod build;
pub mod completions;
pub mod diff;
pub mod edit;
pub mod export;
pub mod fit;
pub mod history;
pub mod info;
pub mod manpage;
pub mod merge_edits;
pub mod progress;
pub mod queue;
pub mod redo;
pub mod resolve;
pub mod sample;
pub mod signoff;
pub mod suggest;
pub mod typo;
pub mod undo;
pub mod verify;

/// Exit code for "a check failed".
pub const EXIT_CHECK_FAILED: u8 = 1;
/// Exit code for bad input (unreadable or invalid files, unknown ids, bad arguments).
pub const EXIT_BAD_INPUT: u8 = 2;

/// The command line.
#[derive(Debug, Parser)]
#[command(
    name = "treewright",
    version,
    about = "Curate and audit concept hierarchies built from Gaussian phrase embeddings.",
    long_about = "Without arguments, opens the workbench on the bundled demo project. \
                  With a project folder, opens that project. With a subcommand, runs headless.",
    args_conflicts_with_subcommands = true
)]
pub struct Cli {
    /// Project folder (or its project.json) to open in the workbench.
    pub project: Option<PathBuf>,
    /// Workbench only: select and reveal this phrase (id or label) at start.
    #[arg(long, value_name = "ID")]
    pub select: Option<String>,
    /// Headless subcommand.
    #[command(subcommand)]
    pub command: Option<Command>,
}

/// Headless subcommands.
#[derive(Debug, Subcommand)]
pub enum Command {
    /// Summarise a project: phrases, dimension, generality, tree shape, unplaced phrases.
    Info(info::InfoArgs),
    /// Audit the effective tree: ranked findings with numbers and suggested fixes.
    Audit(audit::AuditArgs),
    /// Record an edit in the override layer (refused edits exit 2 and write nothing).
    Edit(edit::EditArgs),
    /// Cancel the latest edit in force by appending a revert (a sign-off needs --reason).
    Undo(undo::UndoArgs),
    /// Write the effective tree (tree.json schema plus aliases and exclusions).
    Apply(apply::ApplyArgs),
    /// Sign off the effective tree as it stands.
    Signoff(signoff::SignoffArgs),
    /// Exit 0 only if the latest sign-off matches the effective tree, else 1.
    Verify(verify::VerifyArgs),
    /// Export the effective tree as SKOS (Turtle), CSV or JSON.
    Export(export::ExportArgs),
    /// Base vs effective tree, or what a re-trained tree changes.
    Diff(diff::DiffArgs),
    /// Preview the broader / narrower / sibling offers for a phrase, or check them all.
    Suggest(suggest::SuggestArgs),
    /// Write the Fernhollow demo project or a synthetic project.
    Sample(sample::SampleArgs),
    /// Regenerate the machine-built tree from the embeddings (divisive clustering).
    Build(build::BuildArgs),
    /// Print a shell completion script (bash, zsh, fish, powershell, elvish).
    Completions(completions::CompletionsArgs),
    /// Print the manual page (roff), or write one page per subcommand with --dir.
    Manpage(manpage::ManpageArgs),
    /// Three-way merge of override files (BASE OURS THEIRS); a git merge driver.
    MergeEdits(merge_edits::MergeEditsArgs),
    /// Resolve a merge conflict of the project's override file to ours or theirs.
    Resolve(resolve::ResolveArgs),
    /// Fit one Gaussian per phrase from occurrence vectors and write a new project.
    Fit(fit::FitArgs),
    /// Print the override layer's hash chain: edits, authors, times, reverts.
    History(history::HistoryArgs),
    /// Bring back what the latest undo cancelled (appends a revert of the revert).
    Redo(redo::RedoArgs),
    /// The review queue: nodes ordered by risk (finding confidence × reach), with why and
    /// the suggested decision.
    Queue(queue::QueueArgs),
}

/// A failed subcommand: the message to print and the exit code.
#[derive(Debug)]
pub struct CliError {
    /// Exit code.
    pub code: u8,
    /// Message for standard error.
    pub message: String,
}

impl CliError {
    /// Bad input (exit 2).
    pub fn bad_input(message: impl std::fmt::Display) -> Self {
        CliError {
            code: EXIT_BAD_INPUT,
            message: message.to_string(),
        }
    }

    /// A check failed (exit 1).
    pub fn check_failed(message: impl std::fmt::Display) -> Self {
        CliError {
            code: EXIT_CHECK_FAILED,
            message: message.to_string(),
        }
    }
}

impl From<crate::model::LoadError> for CliError {
    fn from(e: crate::model::LoadError) -> Self {
        CliError::bad_input(e)
    }
}

impl From<crate::model::WorkspaceError> for CliError {
    fn from(e: crate::model::WorkspaceError) -> Self {
        match e {
            crate::model::WorkspaceError::Refused(why) => {
                CliError::bad_input(format!("refused: {why}"))
            }
            e => CliError::bad_input(e),
        }
    }
}

/// Run a subcommand, printing errors to standard error.
pub fn run(command: Command) -> ExitCode {
    let result = match command {
        Command::Info(a) => info::run(&a),
        Command::Audit(a) => audit::run(&a),
        Command::Edit(a) => edit::run(a),
        Command::Undo(a) => undo::run(&a),
        Command::Apply(a) => apply::run(&a),
        Command::Signoff(a) => signoff::run(&a),
        Command::Verify(a) => verify::run(&a),
        Command::Export(a) => export::run(&a),
        Command::Diff(a) => diff::run(&a),
        Command::Suggest(a) => suggest::run(&a),
        Command::Sample(a) => sample::run(&a),
        Command::Build(a) => build::run(&a),
        Command::Completions(a) => completions::run(&a),
        Command::Manpage(a) => manpage::run(&a),
        Command::MergeEdits(a) => merge_edits::run(&a),
        Command::Resolve(a) => resolve::run(&a),
        Command::Fit(a) => fit::run(&a),
        Command::History(a) => history::run(&a),
        Command::Redo(a) => redo::run(&a),
        Command::Queue(a) => queue::run(&a),
    };
    match result {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) => {
            if !e.message.is_empty() {
                eprintln!("treewright: {}", e.message);
            }
            ExitCode::from(e.code)
        }
    }
}
