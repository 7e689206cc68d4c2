//! `treewright diff PROJECT [--against OTHER_TREE | --against-signoff [INDEX]]`: base vs
//! effective tree, what a re-trained tree changes for the override layer, or the tree a
//! sign-off signed against the effective tree.

use std::path::PathBuf;

use clap::Args;

use super::CliError;
use crate::model::Workspace;
use crate::model::diff::{base_vs_effective, diff_retrained};
use crate::model::project::read_json;
use crate::model::tree::TreeFile;

/// Arguments of `diff`.
#[derive(Debug, Args)]
pub struct DiffArgs {
    /// Project folder or its project.json.
    pub project: PathBuf,
    /// A re-trained tree file (JSON, the tree.json schema) to compare against; a SKOS
    /// taxonomy (`.ttl`) is instead compared with the effective tree.
    #[arg(long)]
    pub against: Option<PathBuf>,
    /// Compare the tree signed by a sign-off (the edit index; the latest when omitted)
    /// with the current effective tree, each change with its causes.
    #[arg(long, value_name = "INDEX", conflicts_with = "against")]
    pub against_signoff: Option<Option<usize>>,
    /// Print JSON instead of text.
    #[arg(long)]
    pub json: bool,
}

/// Print the differences.
pub fn run(args: &DiffArgs) -> Result<(), CliError> {
    let ws = Workspace::open(&args.project)?;
    let phrases = &ws.project.phrases;
    let base = ws.base()?;
    if let Some(index) = args.against_signoff {
        let since = ws.since_signoff(index)?;
        if args.json {
            println!(
                "{}",
                serde_json::to_string_pretty(&since).map_err(CliError::bad_input)?
            );
        } else {
            println!("signed tree (edit #{}) -> effective tree", since.index);
            print!("{}", super::verify::render_since(&since));
        }
        return Ok(());
    }
    let Some(other) = &args.against else {
        let changes = base_vs_effective(base, phrases, ws.effective()?);
        if args.json {
            println!(
                "{}",
                serde_json::to_string_pretty(&changes).map_err(CliError::bad_input)?
            );
        } else if changes.is_empty() {
            println!("no difference between the base and the effective tree");
        } else {
            for c in &changes {
                println!("{c}");
            }
        }
        return Ok(());
    };
    let file = other.display().to_string();
    if crate::model::project::is_skos_path(other) {
        return against_skos(&ws, other, args.json);
    }
    let tf: TreeFile = if other
        .extension()
        .is_some_and(|e| e.eq_ignore_ascii_case("csv"))
    {
        let bytes = std::fs::read(other)
            .map_err(|e| CliError::bad_input(format!("{file}: cannot read: {e}")))?;
        crate::model::project::parse_tree_csv(&bytes, &file)?
    } else {
        read_json(other)?
    };
    let d =
        diff_retrained(base, phrases, &ws.layer.edits, &tf, &file).map_err(CliError::bad_input)?;
    if args.json {
        println!(
            "{}",
            serde_json::to_string_pretty(&d).map_err(CliError::bad_input)?
        );
        return Ok(());
    }
    let list = |name: &str, v: &[String]| {
        println!(
            "{name} ({}){}",
            v.len(),
            if v.is_empty() { "" } else { ":" }
        );
        for x in v {
            println!("  {x}");
        }
    };
    list("new phrases", &d.new_phrases);
    list("vanished phrases", &d.vanished_phrases);
    println!(
        "pins holding against the new tree ({})",
        d.pins_holding.len()
    );
    for p in &d.pins_holding {
        println!(
            "  {} stays under {} (new tree: {})",
            p.node,
            p.pinned_under,
            if p.tree_parent.is_empty() {
                "not placed"
            } else {
                &p.tree_parent
            }
        );
    }
    println!("stale edits ({})", d.stale_edits.len());
    for p in &d.stale_edits {
        println!("  #{} ({}): {}", p.index, p.op, p.reason);
    }
    println!("other skipped edits ({})", d.other_problems.len());
    for p in &d.other_problems {
        println!("  #{} ({}): {}", p.index, p.op, p.reason);
    }
    Ok(())
}

/// `diff --against taxonomy.ttl`: how the effective tree differs from a SKOS taxonomy read
/// as a tree over the project's phrases (changes read "taxonomy → effective tree").
fn against_skos(ws: &Workspace, path: &std::path::Path, json: bool) -> Result<(), CliError> {
    let phrases = &ws.project.phrases;
    let file = path.display().to_string();
    let skos = crate::model::project::load_skos_tree(
        path,
        phrases,
        &ws.project.manifest.limits.unwrap_or_default(),
    )?;
    let tree = crate::model::tree::Tree::from_id_map(phrases, &skos.tree.root, &skos.tree.parent)
        .map_err(|e| CliError::bad_input(format!("{file}: tree: {e}")))?;
    let changes = base_vs_effective(&tree, phrases, ws.effective()?);
    if json {
        let out = serde_json::json!({ "taxonomy": skos.report, "changes": changes });
        println!(
            "{}",
            serde_json::to_string_pretty(&out).map_err(CliError::bad_input)?
        );
        return Ok(());
    }
    let r = &skos.report;
    println!(
        "taxonomy {file}: {} concepts, {} matched to phrases",
        r.concepts, r.matched
    );
    let list = |name: &str, v: &[String]| {
        println!(
            "{name} ({}){}",
            v.len(),
            if v.is_empty() { "" } else { ":" }
        );
        for x in v {
            println!("  {x}");
        }
    };
    list("concepts matching no phrase", &r.unmatched_concepts);
    list("phrases matching no concept", &r.unmatched_phrases);
    list("concepts with several broader concepts", &r.several_broader);
    list(
        "concepts matching an already matched phrase",
        &r.duplicate_matches,
    );
    let lines: Vec<String> = changes.iter().map(ToString::to_string).collect();
    list("effective tree against the taxonomy", &lines);
    Ok(())
}
