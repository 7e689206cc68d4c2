//! `treewright build PROJECT [--out FILE] [--report FILE] [--seed N] [--max-depth N]
//! [--k-max N] [--min-cluster N] [--similarity elk|bhattacharyya|kl] [--with-variance W]`:
//! regenerate the machine-built tree from the embeddings.
//!
//! The tree goes to the project's tree file unless `--out` says otherwise; the file it
//! replaces is kept as `<name>.bak`. The report goes to `build-report.json` beside the tree
//! unless `--report` says otherwise. Both are written atomically, and only after the build
//! finished: a failed or cancelled build leaves every file untouched.

use std::io::Write;
use std::path::{Path, PathBuf};
use std::sync::atomic::AtomicBool;

use clap::Args;

use super::CliError;
use super::progress;
use crate::model::builder::{BuildParams, BuildProgress, BuiltTree, build};
use crate::model::fsutil;
use crate::model::overrides::OverrideLayer;
use crate::model::project::Project;
use crate::model::workspace::tree_bytes;
use crate::model::{AuditMode, PhraseTable, Similarity, Workspace};

/// Arguments of `build`.
#[derive(Debug, Args)]
pub struct BuildArgs {
    /// Project folder or its project.json.
    pub project: PathBuf,
    /// Where to write the tree (default: the project's tree file). `.csv` writes a
    /// `child,parent` edge list, anything else JSON.
    #[arg(long, value_name = "FILE")]
    pub out: Option<PathBuf>,
    /// Where to write the build report (default: build-report.json beside the tree).
    #[arg(long, value_name = "FILE")]
    pub report: Option<PathBuf>,
    /// Seed of every random choice (default 0).
    #[arg(long, value_name = "N")]
    pub seed: Option<u64>,
    /// Maximum depth of the tree, root = 0 (default 6).
    #[arg(long, value_name = "N")]
    pub max_depth: Option<usize>,
    /// Largest number of sub-clusters tried per node (default 8).
    #[arg(long, value_name = "N")]
    pub k_max: Option<usize>,
    /// Clusters with fewer non-representative members are not split (default 4).
    #[arg(long, value_name = "N")]
    pub min_cluster: Option<usize>,
    /// Similarity for picking representatives (default elk).
    #[arg(long, value_name = "NAME", value_parser = parse_similarity)]
    pub similarity: Option<Similarity>,
    /// Weight of ln σ² in the k-means features (default 0: means only).
    #[arg(long, value_name = "W")]
    pub with_variance: Option<f64>,
}

fn parse_similarity(s: &str) -> Result<Similarity, String> {
    match s {
        "elk" => Ok(Similarity::Elk),
        "bhattacharyya" => Ok(Similarity::Bhattacharyya),
        "kl" => Ok(Similarity::Kl),
        other => Err(format!(
            "unknown similarity \"{other}\" (expected elk, bhattacharyya or kl)"
        )),
    }
}

impl BuildArgs {
    /// The build parameters: the defaults with every given option applied.
    pub fn params(&self) -> BuildParams {
        let d = BuildParams::default();
        BuildParams {
            seed: self.seed.unwrap_or(d.seed),
            max_depth: self.max_depth.unwrap_or(d.max_depth),
            k_max: self.k_max.unwrap_or(d.k_max),
            min_cluster: self.min_cluster.unwrap_or(d.min_cluster),
            similarity: self.similarity.unwrap_or(d.similarity),
            with_variance: self.with_variance.unwrap_or(d.with_variance),
            ..d
        }
    }
}

pub use crate::model::workspace::tree_csv;

fn write(path: &Path, bytes: &[u8], backup: bool) -> Result<(), CliError> {
    fsutil::atomic_write(path, bytes, backup)
        .map_err(|e| CliError::bad_input(format!("{}: cannot write: {e}", path.display())))
}

/// Build and write the tree and the report.
///
/// Into the project (no `--out`), the new tree goes through [`Workspace::set_base`]: under
/// the project lock, refused when the tree file or the manifest changed on disk during the
/// build.
pub fn run(args: &BuildArgs) -> Result<(), CliError> {
    let params = args.params();
    params.validate().map_err(CliError::bad_input)?;
    let project = Project::load(&args.project)?;
    let out = args.out.clone().unwrap_or_else(|| project.tree_path());
    let report_path = args.report.clone().unwrap_or_else(|| {
        out.parent()
            .map(|d| d.join("build-report.json"))
            .unwrap_or_else(|| PathBuf::from("build-report.json"))
    });
    // the edits play no part in installing a base tree; the workspace remembers what the
    // tree file and the manifest looked like before the build
    let mut ws = Workspace::from_project(project, OverrideLayer::new(), AuditMode::Off)?;
    let built = run_build(&ws.project.gaussians, &ws.project.phrases, &params)?;

    if args.out.is_none() {
        ws.set_base_reporting(&built.tree_file, Some((&built.report, &report_path)))?;
    } else {
        let tree_bytes = tree_bytes(&built.tree_file, &out)
            .map_err(|e| CliError::bad_input(format!("{}: {e}", out.display())))?;
        write(&out, &tree_bytes, true)?;
        write(&report_path, &fsutil::to_json_pretty(&built.report), false)?;
    }
    // a closed pipe (`| head`) is not an error worth a panic: the files are written
    let mut o = std::io::stdout().lock();
    let _ = writeln!(
        o,
        "built a tree of {} phrases (depth {}, {} internal nodes, root \"{}\")",
        built.report.phrases,
        built.report.depth,
        built.report.nodes.len(),
        built.report.root
    );
    let _ = writeln!(o, "tree    {}", out.display());
    let _ = writeln!(o, "report  {}", report_path.display());
    Ok(())
}

fn run_build(
    g: &crate::model::Gaussians,
    phrases: &PhraseTable,
    params: &BuildParams,
) -> Result<BuiltTree, CliError> {
    let bar = progress::bar(phrases.len() as u64, "building");
    let cancel = AtomicBool::new(false);
    let on_progress = |p: BuildProgress| bar.set_position(p.placed as u64);
    let result = build(g, phrases, None, params, &on_progress, &cancel);
    bar.finish_and_clear();
    result.map_err(CliError::bad_input)
}
