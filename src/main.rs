//! The `treewright` binary: GUI without a subcommand, headless with one.

use std::process::ExitCode;

use clap::Parser;
use treewright::cli::{self, Cli};

fn main() -> ExitCode {
    let args = Cli::parse();
    match args.command {
        Some(command) => cli::run(command),
        None => treewright::gui::run(args.project, args.select),
    }
}
