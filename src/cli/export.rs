//! `treewright export PROJECT --format skos|csv|json --out FILE [--base-iri IRI]
//! [--require-signoff]`.

use std::path::PathBuf;

use clap::{Args, ValueEnum};

use super::CliError;
use super::edit::Session;
use crate::model::export::{DEFAULT_BASE_IRI, export_csv, export_json, export_skos};
use crate::model::fsutil::atomic_write;
use crate::model::signoff::verify;

/// Export formats.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum Format {
    /// W3C SKOS in Turtle.
    Skos,
    /// `id,label,parent,depth,aliases,status`.
    Csv,
    /// tree.json schema plus aliases and exclusions.
    Json,
}

/// Arguments of `export`.
#[derive(Debug, Args)]
pub struct ExportArgs {
    /// Project folder or its project.json.
    pub project: PathBuf,
    /// Output format.
    #[arg(long, value_enum)]
    pub format: Format,
    /// Output file.
    #[arg(long)]
    pub out: PathBuf,
    /// Base IRI of the SKOS concepts (concept = base + phrase id).
    #[arg(long, default_value = DEFAULT_BASE_IRI)]
    pub base_iri: String,
    /// Label of the SKOS concept scheme (default: the project name).
    #[arg(long)]
    pub scheme_label: Option<String>,
    /// Refuse (exit 1) unless the latest sign-off matches the current effective tree.
    #[arg(long)]
    pub require_signoff: bool,
}

/// Write the export.
pub fn run(args: &ExportArgs) -> Result<(), CliError> {
    let s = Session::open(&args.project)?;
    let phrases = &s.project.phrases;
    if args.require_signoff {
        let v = verify(&s.base, phrases, &s.layer.edits);
        if !v.is_valid() {
            return Err(CliError::check_failed(format!(
                "--require-signoff: not exporting\n{}",
                super::verify::render(&v).trim_end()
            )));
        }
    }
    let (eff, problems) = s.effective();
    let text = match args.format {
        Format::Skos => {
            let label = args
                .scheme_label
                .clone()
                .unwrap_or_else(|| s.project.manifest.name.clone());
            export_skos(&eff, phrases, &args.base_iri, &label).map_err(CliError::bad_input)?
        }
        Format::Csv => export_csv(&eff, phrases),
        Format::Json => export_json(&eff, phrases),
    };
    atomic_write(&args.out, text.as_bytes(), false)
        .map_err(|e| CliError::bad_input(format!("{}: {e}", args.out.display())))?;
    println!(
        "wrote {} ({} nodes; {} edits skipped)",
        args.out.display(),
        eff.tree.node_count(),
        problems.len()
    );
    Ok(())
}
