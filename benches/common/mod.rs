//! The bench tree shared by `benches/audit.rs` and `benches/impact.rs`: the nested synthetic
//! project of 100 000 phrases in 64 dimensions (diagonal covariance, 10 children per cluster,
//! 4 cluster levels, seed 2026) with 5 % of its leaves moved under clusters picked by a fixed
//! stride, so the audit has findings to rank (moving leaves keeps the tree valid).
// each bench uses only some of the fields
#![allow(dead_code)]

use treewright::model::Tree;
use treewright::model::gaussian::Gaussians;
use treewright::model::phrase::PhraseTable;
use treewright::model::sample::{SyntheticSpec, synthetic_gaussians};
use treewright::model::tree::TreeFile;

/// The bench project with its misplaced leaves.
pub struct Misplaced {
    pub phrases: PhraseTable,
    pub g: Gaussians,
    /// The tree file after the moves.
    pub tf: TreeFile,
    /// The tree after the moves.
    pub tree: Tree,
    /// Cluster ids (every parent), sorted.
    pub clusters: Vec<String>,
    /// Leaf ids (never a parent), in the tree file's order.
    pub leaves: Vec<String>,
}

/// Build the bench project (deterministic).
pub fn misplaced_100k() -> Misplaced {
    let spec = SyntheticSpec {
        phrases: 100_000,
        dim: 64,
        branching: 10,
        depth: 4,
        full_covariance: false,
        seed: 2026,
    };
    let (phrases, g, mut tf) = synthetic_gaussians(&spec);
    let clusters: Vec<String> = {
        let set: std::collections::BTreeSet<&String> = tf.parent.values().collect();
        set.into_iter().cloned().collect()
    };
    let leaves: Vec<String> = tf
        .parent
        .keys()
        .filter(|c| clusters.binary_search(c).is_err())
        .cloned()
        .collect();
    for (i, leaf) in leaves.iter().step_by(20).enumerate() {
        let to = clusters[(i * 7919) % clusters.len()].clone();
        tf.parent.insert(leaf.clone(), to);
    }
    let tree = Tree::from_id_map(&phrases, &tf.root, &tf.parent).expect("valid tree");
    Misplaced {
        phrases,
        g,
        tf,
        tree,
        clusters,
        leaves,
    }
}
