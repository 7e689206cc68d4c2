//! What a build produces: the tree file and `build-report.json`.

use serde::{Deserialize, Serialize};

use super::params::BuildParams;
use crate::model::inclusion::{InclusionNode, InclusionParams, InclusionStats};
use crate::model::tree::TreeFile;

/// How a tree was built.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum BuildMethod {
    /// Top-down: k-means on the means, a representative per cluster (`model::builder`).
    #[default]
    Divisive,
    /// Each phrase under the broader phrase that contains it best, chosen for the whole tree
    /// at once as a minimum-cost arborescence (`model::inclusion`).
    Inclusion,
}

impl BuildMethod {
    /// Every method, in the order menus list them.
    pub const ALL: [BuildMethod; 2] = [BuildMethod::Divisive, BuildMethod::Inclusion];

    /// The name used on the command line and in `build-report.json`.
    pub fn name(self) -> &'static str {
        match self {
            BuildMethod::Divisive => "divisive",
            BuildMethod::Inclusion => "inclusion",
        }
    }

    /// One line for the user: what the method does.
    pub fn explanation(self) -> &'static str {
        match self {
            BuildMethod::Divisive => {
                "clusters the means top-down (k-means, elbow) and lifts a representative per cluster"
            }
            BuildMethod::Inclusion => {
                "puts each phrase under the broader phrase that contains it best (lowest KL), \
                 chosen for the whole tree at once"
            }
        }
    }
}

impl std::str::FromStr for BuildMethod {
    type Err = String;
    fn from_str(s: &str) -> Result<Self, String> {
        BuildMethod::ALL
            .into_iter()
            .find(|m| m.name() == s)
            .ok_or_else(|| format!("unknown build method \"{s}\" (expected divisive or inclusion)"))
    }
}

/// What an inclusion build did: its parameters and, per phrase, the chosen parent's cost and
/// the runner-up candidate.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct InclusionReport {
    /// The parameters of the inclusion build.
    pub params: InclusionParams,
    /// Total edge cost of the tree.
    pub total_cost: f64,
    /// Counts of what the build did.
    pub stats: InclusionStats,
    /// Every non-root phrase, in row order.
    pub nodes: Vec<InclusionNode>,
}

impl InclusionReport {
    /// The record of a non-root phrase by id.
    pub fn node(&self, id: &str) -> Option<&InclusionNode> {
        self.nodes.iter().find(|n| n.node == id)
    }
}

/// Format name written into every build report.
pub const REPORT_FORMAT: &str = "treewright-build-report";
/// Build report version.
pub const REPORT_VERSION: u32 = 1;

/// What the builder did at one internal node (a node with children).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct NodeReport {
    /// The node (the cluster's representative), stable id.
    pub node: String,
    /// Depth of the node (root = 0).
    pub depth: usize,
    /// Members of the cluster, the representative included.
    pub size: usize,
    /// Mean similarity of the representative to the other members (always exact).
    pub representative_score: f64,
    /// 0 when every member was scored exactly; otherwise the size of the sample the members
    /// were screened against before the best `refine` were rescored exactly.
    pub score_sample: usize,
    /// The k values of the elbow curve (1 = the total sum of squares); empty when not split.
    pub k_tried: Vec<usize>,
    /// Inertia (sum of squared feature distances to the centroids) for each of `k_tried`.
    pub inertia: Vec<f64>,
    /// Rows the elbow curve was computed on (the whole cluster or a subsample).
    pub elbow_rows: usize,
    /// Number of sub-clusters (0 when the others became children directly).
    pub chosen_k: usize,
    /// Why this k (or why no split): "knee", "fallback", "only k = 2", "max depth", ...
    pub reason: String,
    /// Size of each sub-cluster (or 1 per direct child), in child order.
    pub cluster_sizes: Vec<usize>,
}

/// `build-report.json`: the parameters and one [`NodeReport`] per internal node.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct BuildReport {
    /// Always [`REPORT_FORMAT`].
    pub format: String,
    /// [`REPORT_VERSION`].
    pub version: u32,
    /// How the tree was built (reports written before the inclusion method: divisive).
    #[serde(default)]
    pub method: BuildMethod,
    /// The parameters of the build (the seed included).
    pub params: BuildParams,
    /// Phrases placed.
    pub phrases: usize,
    /// Dimension of the embeddings.
    pub dim: usize,
    /// Root id.
    pub root: String,
    /// Depth of the deepest node.
    pub depth: usize,
    /// Internal nodes in pre-order (sub-clusters in child order); empty for an inclusion
    /// build.
    pub nodes: Vec<NodeReport>,
    /// The inclusion build's record (inclusion builds only).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub inclusion: Option<InclusionReport>,
}

impl BuildReport {
    /// The report of an internal node by id (None for leaves and unknown ids).
    pub fn node(&self, id: &str) -> Option<&NodeReport> {
        self.nodes.iter().find(|n| n.node == id)
    }
}

/// A finished build: the tree file and its report.
#[derive(Debug, Clone, PartialEq)]
pub struct BuiltTree {
    /// The tree (`tree.json`), covering every given phrase exactly once.
    pub tree_file: TreeFile,
    /// The report (`build-report.json`).
    pub report: BuildReport,
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::fsutil::to_json_pretty;

    #[test]
    fn a_report_written_with_the_old_parameter_names_still_loads() {
        let report = BuildReport {
            format: REPORT_FORMAT.into(),
            version: REPORT_VERSION,
            method: BuildMethod::Divisive,
            params: BuildParams {
                kmeans_restarts: 5,
                elbow_restarts: 2,
                max_iterations: 70,
                ..BuildParams::default()
            },
            phrases: 3,
            dim: 2,
            root: "a".into(),
            depth: 1,
            nodes: Vec::new(),
            inclusion: None,
        };
        let new = String::from_utf8(to_json_pretty(&report)).unwrap();
        assert!(new.contains("\"kmeans_restarts\": 5"), "{new}");
        let old = new
            .replace("\"kmeans_restarts\"", "\"n_init\"")
            .replace("\"elbow_restarts\"", "\"elbow_n_init\"")
            .replace("\"max_iterations\"", "\"max_iter\"")
            // reports from before the inclusion method have no method: they are divisive
            .replace("\"method\": \"divisive\",", "");
        assert_ne!(old, new);
        let back: BuildReport = serde_json::from_str(&old).unwrap();
        assert_eq!(back, report);
    }
}
