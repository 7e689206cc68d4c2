//! `treewright completions SHELL`: a shell completion script on standard output, generated
//! from the same clap definitions the binary parses with (so it never lists a verb or flag
//! the binary lacks).

use std::io::Write;

use clap::{Args, CommandFactory};
use clap_complete::Shell;

use super::{Cli, CliError};

/// Arguments of `completions`.
#[derive(Debug, Args)]
pub struct CompletionsArgs {
    /// The shell to write completions for.
    #[arg(value_enum)]
    pub shell: Shell,
}

/// Write the completion script to standard output.
pub fn run(args: &CompletionsArgs) -> Result<(), CliError> {
    let mut buf = Vec::new();
    clap_complete::generate(args.shell, &mut Cli::command(), "treewright", &mut buf);
    std::io::stdout()
        .write_all(&buf)
        .map_err(|e| CliError::bad_input(format!("cannot write to standard output: {e}")))
}
