//! `treewright suggest PROJECT PHRASE [--user ID] [--top N] [--json]` and
//! `treewright suggest PROJECT --all [--csv FILE]`.

use std::path::PathBuf;

use clap::Args;

use super::CliError;
use crate::model::Workspace;
use crate::model::suggest::{
    Candidate, SuggestCtx, SuggestParams, Suggestions, bulk_check, bulk_csv, nearest_labels,
    suggest,
};

/// Arguments of `suggest`.
#[derive(Debug, Args)]
pub struct SuggestArgs {
    /// Project folder or its project.json.
    pub project: PathBuf,
    /// The phrase, by label or id.
    #[arg(required_unless_present = "all")]
    pub phrase: Option<String>,
    /// Personalise for this shopper profile (id or label from users.json).
    #[arg(long)]
    pub user: Option<String>,
    /// Offers per list.
    #[arg(long, default_value_t = 5)]
    pub top: usize,
    /// Print JSON.
    #[arg(long)]
    pub json: bool,
    /// Check the top broader offer of every phrase.
    #[arg(long, conflicts_with = "phrase")]
    pub all: bool,
    /// With --all: write the table as CSV to this file.
    #[arg(long, requires = "all")]
    pub csv: Option<PathBuf>,
}

/// Run `suggest`.
pub fn run(args: &SuggestArgs) -> Result<(), CliError> {
    let ws = Workspace::open(&args.project)?;
    let (project, eff) = (&ws.project, ws.effective()?);
    let params = SuggestParams {
        top: args.top.max(1),
        ..SuggestParams::default()
    };
    let ctx = SuggestCtx::new(&project.gaussians, &project.phrases, eff, &params);
    if args.all {
        let rows = bulk_check(&ctx, &project.users);
        if let Some(path) = &args.csv {
            crate::model::fsutil::atomic_write(path, bulk_csv(&rows).as_bytes(), false).map_err(
                |e| CliError::bad_input(format!("{}: cannot write: {e}", path.display())),
            )?;
        }
        let flagged = rows.iter().filter(|r| r.flagged()).count();
        if args.json {
            println!(
                "{}",
                serde_json::to_string_pretty(&rows).expect("rows serialise")
            );
        } else if args.csv.is_none() {
            print!("{}", bulk_csv(&rows));
        }
        eprintln!("{} phrases checked, {flagged} flagged", rows.len());
        return Ok(());
    }
    let query = args.phrase.as_deref().unwrap_or_default();
    let Ok(p) = ws.resolve_row(query) else {
        let near = nearest_labels(&project.phrases, query, 3);
        return Err(CliError::bad_input(format!(
            "{}: no phrase \"{query}\"; did you mean {}?",
            args.project.display(),
            near.iter()
                .map(|l| format!("\"{l}\""))
                .collect::<Vec<_>>()
                .join(", ")
        )));
    };
    let user = match &args.user {
        Some(u) => Some(
            project
                .users
                .iter()
                .find(|x| &x.id == u || &x.label == u)
                .ok_or_else(|| {
                    let ids: Vec<&str> = project.users.iter().map(|x| x.id.as_str()).collect();
                    CliError::bad_input(format!(
                        "no shopper profile \"{u}\" in users.json (profiles: {})",
                        if ids.is_empty() {
                            "none".to_string()
                        } else {
                            ids.join(", ")
                        }
                    ))
                })?,
        ),
        None => None,
    };
    let s = suggest(&ctx, p, user).map_err(CliError::bad_input)?;
    if args.json {
        println!(
            "{}",
            serde_json::to_string_pretty(&s).expect("suggestions serialise")
        );
    } else {
        print!("{}", render_text(&s));
    }
    Ok(())
}

fn render_list(out: &mut String, title: &str, v: &[Candidate], personal: bool) {
    use std::fmt::Write;
    let _ = writeln!(out, "{title}:");
    if v.is_empty() {
        let _ = writeln!(out, "  (none)");
        return;
    }
    let mut order: Vec<&Candidate> = v.iter().collect();
    if personal {
        order.sort_by_key(|c| c.personal_rank.unwrap_or(usize::MAX));
    }
    for c in order {
        let moved = match c.personal_rank {
            Some(r) if r != c.generic_rank => {
                format!("  (generic #{} → #{})", c.generic_rank + 1, r + 1)
            }
            _ => String::new(),
        };
        let _ = writeln!(
            out,
            "  {:<32} score {:>9.3}  containment {:.2}  KL {:>8.3}  overlap {:.3}  {}{}{}",
            c.label,
            c.score,
            c.containment,
            c.kl,
            c.overlap,
            serde_json::to_value(c.relation)
                .ok()
                .and_then(|v| v.as_str().map(str::to_string))
                .unwrap_or_default(),
            if c.in_tree { "" } else { " (not in tree)" },
            moved
        );
    }
}

/// The plain-text form.
pub fn render_text(s: &Suggestions) -> String {
    let mut out = String::new();
    out.push_str(&format!("phrase: {} ({})", s.phrase.label, s.phrase.id));
    if let Some(a) = &s.phrase.redirected_from {
        out.push_str(&format!(", redirected from alias {a}"));
    }
    out.push('\n');
    if let Some(u) = &s.user {
        out.push_str(&format!("shopper profile: {u} (personalised order)\n"));
    }
    let personal = s.user.is_some();
    render_list(&mut out, "broader", &s.broader, personal);
    render_list(&mut out, "narrower", &s.narrower, personal);
    render_list(&mut out, "siblings", &s.siblings, personal);
    out.push_str(&s.preview_line());
    out.push('\n');
    out
}
