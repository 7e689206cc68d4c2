//! The `treewright` binary: GUI without a subcommand, headless with one.

use std::process::ExitCode;

use clap::Parser;
use treewright::cli::{self, Cli};

fn main() -> ExitCode {
    #[cfg(feature = "test-broken-writer")]
    eprintln!(
        "treewright: WARNING: this is a test build with the non-atomic file writer \
         (feature test-broken-writer){}; never use it on real projects",
        if treewright::model::fsutil::broken_writer::active() {
            ", and it is active"
        } else {
            ""
        }
    );
    let argv: Vec<std::ffi::OsString> = std::env::args_os().collect();
    if let Err(e) = cli::typo::check_first_word(&argv) {
        eprintln!("treewright: {}", e.message);
        return ExitCode::from(e.code);
    }
    let args = Cli::parse_from(argv);
    match args.command {
        Some(command) => cli::run(command),
        None => treewright::gui::run(args.project, args.select),
    }
}
