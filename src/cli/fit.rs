//! `treewright fit OCCURRENCES --out PROJECT`: Gaussians fitted from occurrence vectors
//! (see `model::fit` for the estimators), written as a new project.

use std::path::PathBuf;

use clap::Args;

use super::CliError;
use crate::model::fit::{FitOptions, fit};
use crate::model::phrase::PhraseTable;
use crate::model::project::{
    DEFAULT_ID_COLUMN, Limits, ProjectWriter, is_parquet_path, parse_npy2, read_json,
    read_parquet_columns,
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
    let limits = Limits::default();
    let (ids, data, d) = if is_parquet_path(&args.occurrences) {
        let c = read_parquet_columns(
            &args.occurrences,
            &[&args.id],
            &[&args.vector],
            &limits,
            Some(usize::MAX),
        )?;
        let (d, data) = c.lists.into_iter().next().unwrap_or_default();
        (c.strings.into_iter().next().unwrap_or_default(), data, d)
    } else {
        let Some(idp) = &args.ids else {
            return Err(CliError::bad_input(format!(
                "{file}: an .npy matrix needs --ids IDS.json (a JSON list of phrase ids, one per row)"
            )));
        };
        let bytes = std::fs::read(&args.occurrences)
            .map_err(|e| CliError::bad_input(format!("{file}: cannot read: {e}")))?;
        let (n, d, data) = parse_npy2(&bytes, &file)?;
        let ids: Vec<String> = read_json(idp)?;
        if ids.len() != n {
            return Err(CliError::bad_input(format!(
                "{}: {} ids for the {n} rows of {file}",
                idp.display(),
                ids.len()
            )));
        }
        (ids, data, d)
    };
    let opt = FitOptions {
        min_count: args.min_count,
        prior_df: args.prior_df,
        full: args.full,
    };
    let f = fit(&ids, &data, d, &opt).map_err(|e| CliError::bad_input(format!("{file}: {e}")))?;
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
        ids.len()
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
