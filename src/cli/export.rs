//! `treewright export PROJECT --format skos|csv|json --out FILE [--base-iri IRI]
//! [--require-signoff]`.

use std::path::PathBuf;

use clap::builder::PossibleValue;
use clap::{Args, ValueEnum};

use super::CliError;
use crate::model::Workspace;
use crate::model::export::{DEFAULT_BASE_IRI, Format};
use crate::model::fsutil::atomic_write;

impl ValueEnum for Format {
    fn value_variants<'a>() -> &'a [Self] {
        &Format::ALL
    }

    fn to_possible_value(&self) -> Option<PossibleValue> {
        let help = match self {
            Format::Skos => "W3C SKOS in Turtle",
            Format::Csv => "`id,label,parent,depth,aliases,status`",
            Format::Json => "tree.json schema plus aliases and exclusions",
        };
        Some(PossibleValue::new(self.name()).help(help))
    }
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
    /// With --require-signoff: do not require the sign-off to be signed by an allowed key
    /// even when the project names an allowed-signers file.
    #[arg(long)]
    pub allow_unsigned: bool,
}

/// Write the export.
pub fn run(args: &ExportArgs) -> Result<(), CliError> {
    let ws = Workspace::open(&args.project)?;
    if args.require_signoff {
        let v = ws.verify()?;
        if !v.is_valid() {
            return Err(CliError::check_failed(format!(
                "--require-signoff: not exporting\n{}",
                super::verify::render(&v).trim_end()
            )));
        }
        let sig = super::verify::signature_check(&ws, args.allow_unsigned)?;
        if !sig.passes() {
            return Err(CliError::check_failed(format!(
                "--require-signoff: not exporting\n{}",
                sig.line().unwrap_or_default()
            )));
        }
    }
    let label = match &args.scheme_label {
        // the label rule of every other label (src/model/label.rs); the project name was
        // checked when the project loaded
        Some(l) => crate::model::label::clean_owned(l)
            .map_err(|e| CliError::bad_input(format!("--scheme-label: {e}")))?,
        None => ws.project.manifest.name.clone(),
    };
    let text = ws.export(args.format, &args.base_iri, &label)?;
    atomic_write(&args.out, text.as_bytes(), false)
        .map_err(|e| CliError::bad_input(format!("{}: {e}", args.out.display())))?;
    println!(
        "wrote {} ({} nodes; {} edits skipped)",
        args.out.display(),
        ws.effective()?.tree.node_count(),
        ws.problems.len()
    );
    Ok(())
}
