//! Terminal progress bars that stay quiet in pipes.

use std::io::IsTerminal;

use indicatif::{ProgressBar, ProgressDrawTarget, ProgressStyle};

/// A progress bar of `len` steps on standard error, hidden unless both standard output and
/// standard error are terminals (so `treewright ... | jq` and CI logs stay clean).
pub fn bar(len: u64, what: &str) -> ProgressBar {
    let visible = std::io::stdout().is_terminal() && std::io::stderr().is_terminal();
    let pb = ProgressBar::with_draw_target(
        Some(len),
        if visible {
            ProgressDrawTarget::stderr()
        } else {
            ProgressDrawTarget::hidden()
        },
    );
    pb.set_style(
        ProgressStyle::with_template("{msg} [{bar:40}] {pos}/{len} ({eta})")
            .expect("static template")
            .progress_chars("=> "),
    );
    pb.set_message(what.to_string());
    pb
}
