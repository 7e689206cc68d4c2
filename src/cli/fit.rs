//! `treewright fit OCCURRENCES --out PROJECT`: Gaussians fitted from occurrence vectors
//! (see `model::fit` for the estimators), written as a new project.

use std::path::PathBuf;

use clap::Args;

use super::CliError;
use crate::model::fit::FitOptions;
use crate::model::phrase::PhraseTable;
use crate::model::project::{
    DEFAULT_ID_COLUMN, ProjectWriter, fit_npy, fit_parquet, is_parquet_path,
};

/// Arguments of `fit`.
#[derive(Debug, Args)]
pub struct FitArgs {
    /// Occurrence vectors: a Parquet table (id and vector columns) or an `.npy` matrix
    /// (one row per occurrence, with `--ids`).
    pub occurrences: PathBuf,
    /// The project folder to write.
    #[arg(long)]
    pub out: PathBuf,
    /// Parquet: the id column.
    #[arg(long, default_value = DEFAULT_ID_COLUMN)]
    pub id: String,
    /// Parquet: the vector column (lists of floats).
    #[arg(long, default_value = "vector")]
    pub vector: String,
    /// `.npy` input: a JSON list of phrase ids, one per matrix row.
    #[arg(long)]
    pub ids: Option<PathBuf>,
    /// Phrases with fewer occurrences are left out (and listed).
    #[arg(long, default_value_t = 2)]
    pub min_count: usize,
    /// Prior degrees of freedom of the variance moderation (0 turns it off).
    #[arg(long, default_value_t = 4.0)]
    pub prior_df: f64,
    /// Full covariance with Ledoit–Wolf shrinkage (dimension ≤ 64).
    #[arg(long)]
    pub full: bool,
    /// Project name.
    #[arg(long, default_value = "fitted")]
    pub name: String,
}

/// Fit and write the project.
pub fn run(args: &FitArgs) -> Result<(), CliError> {
    let file = args.occurrences.display().to_string();
    let opt = FitOptions {
        min_count: args.min_count,
        prior_df: args.prior_df,
        full: args.full,
    };
    // streamed: one batch of rows in memory at a time (model::project::occurrences)
    let acc = if is_parquet_path(&args.occurrences) {
        fit_parquet(&args.occurrences, &args.id, &args.vector, &opt)?
    } else {
        let Some(idp) = &args.ids else {
            return Err(CliError::bad_input(format!(
                "{file}: an .npy matrix needs --ids IDS.json (a JSON list of phrase ids, one per row)"
            )));
        };
        fit_npy(&args.occurrences, idp, &opt)?
    };
    let (d, rows) = (acc.dim(), acc.rows());
    let f = acc
        .finish()
        .map_err(|e| CliError::bad_input(format!("{file}: {e}")))?;
    let id_refs: Vec<&str> = f.ids.iter().map(String::as_str).collect();
    let phrases = PhraseTable::from_ids(&id_refs).map_err(CliError::bad_input)?;
    let means: Vec<f32> = f.means.iter().map(|&v| v as f32).collect();
    let vars: Vec<f32> = f.variances.iter().map(|&v| v as f32).collect();
    let w = ProjectWriter {
        name: &args.name,
        phrases: &phrases,
        dim: d,
        means: &means,
        variances: &vars,
        users: &[],
        tree: None,
    };
    let out = args.out.display().to_string();
    match &f.covariances {
        Some(c) => w.write_full_covariance(&args.out, c),
        None => w.write(&args.out),
    }
    .map_err(|e| CliError::bad_input(format!("{out}: cannot write: {e}")))?;
    println!(
        "fitted {} phrases (dimension {d}) from {} occurrences into {out}",
        f.ids.len(),
        rows
    );
    println!(
        "{}",
        if args.full {
            "covariance: full, Ledoit–Wolf shrinkage".to_string()
        } else {
            format!(
                "covariance: diagonal, variances moderated towards the pooled variance (prior df {})",
                args.prior_df
            )
        }
    );
    println!(
        "left out, fewer than {} occurrences ({}){}",
        args.min_count,
        f.left_out.len(),
        if f.left_out.is_empty() { "" } else { ":" }
    );
    for (id, n) in &f.left_out {
        println!("  {id} ({n})");
    }
    Ok(())
}
