//! `treewright manpage [--dir DIR]`: the manual page (roff), generated from the same clap
//! definitions the binary parses with. Without `--dir` the page `treewright(1)` goes to
//! standard output; with it, `treewright.1` and one `treewright-<verb>.1` page per subcommand
//! are written into `DIR`.

use std::io::Write;
use std::path::{Path, PathBuf};

use clap::{Args, CommandFactory};

use super::{Cli, CliError};
use crate::model::fsutil;

/// Arguments of `manpage`.
#[derive(Debug, Args)]
pub struct ManpageArgs {
    /// Write `treewright.1` and one page per subcommand into this folder (created if missing)
    /// instead of printing `treewright(1)`.
    #[arg(long, value_name = "DIR")]
    pub dir: Option<PathBuf>,
}

/// Render one page.
fn render(cmd: clap::Command) -> Vec<u8> {
    let mut buf = Vec::new();
    clap_mangen::Man::new(cmd)
        .render(&mut buf)
        .expect("rendering into memory does not fail");
    buf
}

/// The top-level page and, per subcommand, its file name and page.
pub fn pages() -> Vec<(String, Vec<u8>)> {
    let mut cmd = Cli::command();
    // building fills in each subcommand's display name (`treewright-audit`) and usage name
    // (`treewright audit`)
    cmd.build();
    let mut out = vec![("treewright.1".to_string(), render(cmd.clone()))];
    for sub in cmd.get_subcommands().filter(|s| s.get_name() != "help") {
        let name = format!("treewright-{}", sub.get_name());
        let page = sub
            .clone()
            .display_name(name.clone())
            .version(env!("CARGO_PKG_VERSION"));
        out.push((format!("{name}.1"), render(page)));
    }
    out
}

/// Print the page or write all pages.
pub fn run(args: &ManpageArgs) -> Result<(), CliError> {
    match &args.dir {
        None => {
            let page = render(Cli::command());
            std::io::stdout()
                .write_all(&page)
                .map_err(|e| CliError::bad_input(format!("cannot write to standard output: {e}")))
        }
        Some(dir) => write_all(dir),
    }
}

fn write_all(dir: &Path) -> Result<(), CliError> {
    std::fs::create_dir_all(dir).map_err(|e| {
        CliError::bad_input(format!("{}: cannot create folder: {e}", dir.display()))
    })?;
    for (name, page) in pages() {
        let path = dir.join(&name);
        fsutil::atomic_write(&path, &page, false)
            .map_err(|e| CliError::bad_input(format!("{}: {e}", path.display())))?;
        println!("{}", path.display());
    }
    Ok(())
}
