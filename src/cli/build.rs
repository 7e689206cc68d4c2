//! `treewright build PROJECT [--method divisive|inclusion] [--out FILE] [--report FILE]
//! [--seed N] [--max-depth N] [--k-max N] [--min-cluster N]
//! [--similarity elk|bhattacharyya|kl] [--with-variance W] [--max-fanout N]`:
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
use crate::model::builder::{BuildMethod, BuildParams, BuildProgress, BuiltTree, build};
use crate::model::fsutil;
use crate::model::inclusion::{InclusionParams, InclusionProgress, build_inclusion};
use crate::model::overrides::OverrideLayer;
use crate::model::project::Project;
use crate::model::workspace::tree_bytes;
use crate::model::{AuditMode, PhraseTable, Similarity, Workspace};

/// Arguments of `build`.
#[derive(Debug, Args)]
pub struct BuildArgs {
    /// Project folder or its project.json.
    pub project: PathBuf,
    /// divisive: k-means on the means, top-down (the published recipe); inclusion: each
    /// phrase under the broader phrase that contains it best, chosen for the whole tree at
    /// once (minimum-cost arborescence over KL costs, then the coherence pass). Default:
    /// inclusion, or divisive when an option of the divisive method only is given.
    #[arg(long, value_name = "METHOD", value_parser = parse_method)]
    pub method: Option<BuildMethod>,
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
    /// Inclusion method only: most children per node (default: no limit).
    #[arg(long, value_name = "N")]
    pub max_fanout: Option<usize>,
}

fn parse_method(s: &str) -> Result<BuildMethod, String> {
    s.parse()
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
    /// The method: `--method`, else divisive when an option of the divisive method only
    /// (`--k-max`, `--min-cluster`, `--similarity`, `--with-variance`) is given, else
    /// inclusion (the default since issue 14: it agrees far better with real hierarchies;
    /// README "Two methods").
    pub fn method(&self) -> BuildMethod {
        match self.method {
            Some(m) => m,
            None if self.k_max.is_some()
                || self.min_cluster.is_some()
                || self.similarity.is_some()
                || self.with_variance.is_some() =>
            {
                BuildMethod::Divisive
            }
            None => BuildMethod::Inclusion,
        }
    }

    /// The build parameters: the defaults with every given option applied.
    pub fn params(&self) -> BuildParams {
        // (the divisive parameters; see `inclusion_params` for the other method)
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

impl BuildArgs {
    /// The inclusion build's parameters: the defaults with `--seed`, `--max-depth` and
    /// `--max-fanout` applied. Options of the divisive method are refused here, so that a
    /// flag never silently does nothing.
    pub fn inclusion_params(&self) -> Result<InclusionParams, CliError> {
        let divisive_only = [
            ("--k-max", self.k_max.is_some()),
            ("--min-cluster", self.min_cluster.is_some()),
            ("--similarity", self.similarity.is_some()),
            ("--with-variance", self.with_variance.is_some()),
        ];
        if let Some((flag, _)) = divisive_only.iter().find(|(_, given)| *given) {
            return Err(CliError::bad_input(format!(
                "{flag} applies to the divisive method only (--method divisive)"
            )));
        }
        let d = InclusionParams::default();
        Ok(InclusionParams {
            seed: self.seed.unwrap_or(d.seed),
            max_depth: self.max_depth.or(d.max_depth),
            max_fanout: self.max_fanout.or(d.max_fanout),
            ..d
        })
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
    let method = args.method();
    if method == BuildMethod::Divisive && args.max_fanout.is_some() {
        return Err(CliError::bad_input(
            "--max-fanout applies to the inclusion method only (--method inclusion)",
        ));
    }
    let inclusion = match method {
        BuildMethod::Inclusion => Some(
            args.inclusion_params()?
                .check()
                .map_err(CliError::bad_input)?,
        ),
        BuildMethod::Divisive => None,
    };
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
    let summary = if args.out.is_none() {
        // the effective tree plays no part in the build and is made again when the new
        // base is installed: free it for the build (less peak memory)
        ws.eff = None;
        // nor does the report of an earlier build, which this one replaces, nor the old
        // base tree (the build reads only the phrases and their Gaussians; both builders
        // hand freed pages back when they start, memtrim.rs)
        ws.build_report = None;
        ws.project.tree = None;
        let built = build_with(&ws.project, inclusion.as_ref(), &params)?;
        let summary = Summary::of(&built);
        // the tree file and the report are dropped once written, before the workspace
        // makes its effective tree again (less peak memory)
        ws.install_built(built.tree_file, Some((built.report, &report_path)))?;
        summary
    } else {
        // nothing is installed: keep the project alone and free the workspace's effective
        // tree before the build (less peak memory)
        let mut project = {
            let ws = ws;
            ws.project
        };
        // the build reads only the phrases and their Gaussians: free the old tree too (both
        // builders hand freed pages back when they start, memtrim.rs)
        project.tree = None;
        let built = build_with(&project, inclusion.as_ref(), &params)?;
        let tree_bytes = tree_bytes(&built.tree_file, &out)
            .map_err(|e| CliError::bad_input(format!("{}: {e}", out.display())))?;
        write(&out, &tree_bytes, true)?;
        // streamed: the same bytes as `fsutil::to_json_pretty`, without a copy in memory
        fsutil::atomic_write_with(&report_path, false, |w| {
            serde_json::to_writer_pretty(&mut *w, &built.report)?;
            w.write_all(b"\n")
        })
        .map_err(|e| {
            CliError::bad_input(format!("{}: cannot write: {e}", report_path.display()))
        })?;
        Summary::of(&built)
    };
    // a closed pipe (`| head`) is not an error worth a panic: the files are written
    let mut o = std::io::stdout().lock();
    let _ = writeln!(
        o,
        "built a tree of {} phrases (depth {}, {} internal nodes, root \"{}\")",
        summary.phrases, summary.depth, summary.internal, summary.root
    );
    let _ = writeln!(o, "tree    {}", out.display());
    let _ = writeln!(o, "report  {}", report_path.display());
    Ok(())
}

/// Build with the chosen method.
fn build_with(
    project: &Project,
    inclusion: Option<&crate::model::inclusion::CheckedInclusionParams>,
    params: &BuildParams,
) -> Result<BuiltTree, CliError> {
    match inclusion {
        Some(p) => run_inclusion(&project.gaussians, &project.phrases, p),
        None => run_build(&project.gaussians, &project.phrases, params),
    }
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

/// What the command prints about a build.
struct Summary {
    phrases: usize,
    depth: usize,
    internal: usize,
    root: String,
}

impl Summary {
    fn of(built: &BuiltTree) -> Self {
        Summary {
            phrases: built.report.phrases,
            depth: built.report.depth,
            internal: internal_nodes(built),
            root: built.report.root.clone(),
        }
    }
}

/// Nodes with children.
fn internal_nodes(built: &BuiltTree) -> usize {
    match built.report.method {
        BuildMethod::Divisive => built.report.nodes.len(),
        BuildMethod::Inclusion => {
            let parents: std::collections::BTreeSet<&str> = built
                .tree_file
                .parent
                .values()
                .map(String::as_str)
                .collect();
            parents.len()
        }
    }
}

fn run_inclusion(
    g: &crate::model::Gaussians,
    phrases: &PhraseTable,
    params: &crate::model::inclusion::CheckedInclusionParams,
) -> Result<BuiltTree, CliError> {
    let bar = progress::bar(phrases.len() as u64, "building");
    let cancel = AtomicBool::new(false);
    let on_progress = |p: InclusionProgress| {
        bar.set_length(p.total as u64);
        bar.set_position(p.done as u64);
    };
    let result = build_inclusion(g, phrases, None, &[], params, &on_progress, &cancel);
    bar.finish_and_clear();
    Ok(result
        .map_err(CliError::bad_input)?
        .into_built(g, phrases, params))
}
