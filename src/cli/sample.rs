//! `treewright sample --out DIR`: write the Fernhollow demo project, or with
//! `--synthetic N --dim D` a synthetic nested-cluster project with its true tree.

use std::path::PathBuf;

use clap::Args;

use super::CliError;
use crate::model::sample::{SyntheticSpec, write_demo, write_synthetic};

/// Arguments of `sample`.
#[derive(Debug, Args)]
pub struct SampleArgs {
    /// Output folder (created if missing; existing files are replaced).
    #[arg(long)]
    pub out: PathBuf,
    /// Write a synthetic project with this many phrases instead of the demo.
    #[arg(long, value_name = "N")]
    pub synthetic: Option<usize>,
    /// Dimension of the synthetic embeddings.
    #[arg(long, value_name = "D", requires = "synthetic", default_value_t = 16)]
    pub dim: usize,
    /// Children per synthetic cluster.
    #[arg(long, value_name = "B", requires = "synthetic", default_value_t = 4)]
    pub branching: usize,
    /// Synthetic cluster levels below the root.
    #[arg(long, value_name = "L", requires = "synthetic", default_value_t = 2)]
    pub depth: usize,
    /// Full covariances (covariances.npy) instead of diagonal ones.
    #[arg(long, requires = "synthetic")]
    pub full: bool,
    /// Seed of the synthetic generator.
    #[arg(long, value_name = "S", requires = "synthetic", default_value_t = 0)]
    pub seed: u64,
}

/// Write the requested project.
pub fn run(args: &SampleArgs) -> Result<(), CliError> {
    let out = args.out.display();
    match args.synthetic {
        None => write_demo(&args.out).map_err(|e| CliError::bad_input(format!("{out}: {e}")))?,
        Some(n) => {
            if n == 0 || args.dim == 0 || args.branching == 0 {
                return Err(CliError::bad_input(
                    "--synthetic, --dim and --branching must be at least 1",
                ));
            }
            let spec = SyntheticSpec {
                phrases: n,
                dim: args.dim,
                branching: args.branching,
                depth: args.depth,
                full_covariance: args.full,
                seed: args.seed,
            };
            write_synthetic(&args.out, &spec)
                .map_err(|e| CliError::bad_input(format!("{out}: {e}")))?;
        }
    }
    eprintln!("wrote {out}");
    Ok(())
}
