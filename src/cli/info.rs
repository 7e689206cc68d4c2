//! `treewright info PROJECT [--json]`.

use std::path::PathBuf;

use clap::Args;

use super::CliError;
use crate::model::Project;
use crate::model::info::ProjectInfo;

/// Arguments of `info`.
#[derive(Debug, Args)]
pub struct InfoArgs {
    /// Project folder or its project.json.
    pub project: PathBuf,
    /// Print one JSON object instead of text.
    #[arg(long)]
    pub json: bool,
}

/// Print the project summary.
pub fn run(args: &InfoArgs) -> Result<(), CliError> {
    let project = Project::load(&args.project)?;
    let info = ProjectInfo::of(&project);
    if args.json {
        println!(
            "{}",
            serde_json::to_string_pretty(&info).expect("info serialises")
        );
    } else {
        print!("{}", render_text(&info));
    }
    Ok(())
}

/// The plain-text form of the summary.
pub fn render_text(info: &ProjectInfo) -> String {
    use std::fmt::Write;
    let mut s = String::new();
    let _ = writeln!(s, "project     {}", info.name);
    let _ = writeln!(s, "phrases     {}", info.phrases);
    let _ = writeln!(s, "dimension   {}", info.dim);
    let _ = writeln!(s, "covariance  {}", info.covariance);
    let g = &info.generality;
    let _ = writeln!(
        s,
        "generality  ln det Σ min {:.3}  median {:.3}  max {:.3}",
        g.min, g.median, g.max
    );
    let _ = writeln!(s, "users       {}", info.users);
    match &info.tree {
        Some(t) => {
            let _ = writeln!(s, "tree        root {}", t.root);
            let _ = writeln!(
                s,
                "            {} nodes, depth {}, max fan-out {}",
                t.nodes, t.depth, t.max_fanout
            );
        }
        None => {
            let _ = writeln!(s, "tree        none");
        }
    }
    if !info.languages.is_empty() {
        let _ = writeln!(s, "languages   {}", info.languages.join(", "));
    }
    for c in &info.label_clashes {
        let _ = writeln!(
            s,
            "label clash \"{}\"@{} ({}) and \"{}\"@{} ({}) are equal after case folding{}",
            c.a.label,
            c.a.language,
            c.a.id,
            c.b.label,
            c.b.language,
            c.b.id,
            if c.cross_language {
                " (two languages: not merged, check they mean different things)"
            } else {
                ""
            }
        );
    }
    if info.unplaced.is_empty() {
        let _ = writeln!(s, "unplaced    none");
    } else {
        let _ = writeln!(
            s,
            "unplaced    {} ({})",
            info.unplaced.len(),
            info.unplaced.join(", ")
        );
    }
    s
}
