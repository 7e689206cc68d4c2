//! The tree builder: divisive hierarchical clustering of phrase Gaussians.
//!
//! For a cluster of phrases (at first: all of them):
//! 1. the **representative** is the phrase whose summed similarity to the other members is
//!    highest (log expected-likelihood kernel, Bhattacharyya coefficient or negative
//!    symmetric KL); it becomes the node, the others are split below it. Up to
//!    [`BuildParams::exact_limit`] members the sum is exact (O(m²·d)); above it every member
//!    is screened against a fixed random sample of [`BuildParams::sample_size`] members and
//!    the [`BuildParams::refine`] best of the screening are rescored exactly (O(m·(s + r)·d));
//! 2. the number of sub-clusters k is chosen by the **elbow** of the k-means inertia curve
//!    for k = 2..k_max (k-means fits) with kneedle (Satopaa et al. 2011, sensitivity S).
//!    k never exceeds half the cluster (sub-clusters of two members on average) nor its
//!    number of distinct feature vectors. Without a knee, the smallest k whose inertia drop
//!    from k = 1 (the total sum of squares, also in the report) reaches
//!    [`BuildParams::fallback_share`] of the drop from k = 1 to k_max is taken. For
//!    clusters larger than [`BuildParams::elbow_sample`] the curve is computed on a fixed
//!    random subsample of that size; the partition itself always uses every member.
//!    (The curve's fits use [`BuildParams::elbow_restarts`] runs each, 1 by default.)
//! 3. the members are partitioned by k-means (k-means++ init, `kmeans_restarts` runs,
//!    fixed seed) on the feature vector: the mean, followed by `with_variance · ln σ²` when that weight is
//!    positive, so that breadth takes part;
//! 4. each sub-cluster is built the same way (in parallel) and its representative becomes a
//!    child of this node, until the maximum depth, a cluster smaller than `min_cluster` (its
//!    members become children of the representative), or a single phrase.
//!
//! Every random choice draws from a generator seeded from [`BuildParams::seed`] and the
//! node's position in the tree, and every parallel result is combined in a fixed order, so
//! the same input, parameters and seed give byte-identical output.
//!
//! Files: [`params`](BuildParams) (the parameters and their check), `representative`
//! (step 1; its similarity sums are in `model::kernels`), `kselect` (step 2),
//! `partition` (step 3), `driver` (step 4 and [`build`]), `report` (what is written).

mod driver;
mod kselect;
mod params;
mod partition;
mod report;
mod representative;
#[cfg(test)]
mod tests;

use crate::model::gaussian::PhraseId;
use crate::model::kmeans::KMeansError;
use crate::model::kneedle::KneedleError;

pub use driver::build;
pub use params::{BuildParams, CheckedBuildParams, MAX_DEPTH_LIMIT, ParamError};
pub use partition::feature_rows;
pub use report::{
    BuildMethod, BuildReport, BuiltTree, InclusionReport, NodeReport, REPORT_FORMAT, REPORT_VERSION,
};
pub use representative::{Representative, exact_scores, representative};

/// Progress of a running build.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct BuildProgress {
    /// Phrases placed in the tree so far.
    pub placed: usize,
    /// Phrases to place.
    pub total: usize,
    /// Depth of the node just placed.
    pub depth: usize,
}

/// Why a build did not produce a tree.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum BuildError {
    /// The cancel flag was set.
    #[error("build cancelled")]
    Cancelled,
    /// There is no phrase to build from.
    #[error("nothing to build: no phrase given")]
    Empty,
    /// The phrase table and the embeddings disagree.
    #[error("the phrase table has {phrases} phrases but the embeddings have {gaussians} rows")]
    Mismatch {
        /// Phrases in the table.
        phrases: usize,
        /// Rows of the embeddings.
        gaussians: usize,
    },
    /// A row given to the builder is not a phrase.
    #[error("row {row} is not a phrase (the table has {len})")]
    UnknownRow {
        /// The row.
        row: PhraseId,
        /// Table length.
        len: usize,
    },
    /// A phrase is given twice.
    #[error("phrase \"{0}\" is given twice")]
    DuplicateRow(String),
    /// A parameter is out of range.
    #[error(transparent)]
    Param(#[from] ParamError),
    /// k-means failed.
    #[error(transparent)]
    KMeans(#[from] KMeansError),
    /// The knee search failed.
    #[error(transparent)]
    Kneedle(#[from] KneedleError),
    /// The inclusion method failed (where a front end runs either method).
    #[error(transparent)]
    Inclusion(#[from] crate::model::inclusion::InclusionError),
}

/// splitmix64: a well-mixed seed for a child from its parent's seed and its index.
fn mix(seed: u64, salt: u64) -> u64 {
    let mut z = seed ^ salt.wrapping_mul(0x9E37_79B9_7F4A_7C15);
    z = z.wrapping_add(0x9E37_79B9_7F4A_7C15);
    z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    z ^ (z >> 31)
}

/// Salts of the different random choices at one node.
const SALT_REPRESENTATIVE: u64 = 1;
const SALT_ELBOW_SAMPLE: u64 = 2;
const SALT_KMEANS: u64 = 3;
const SALT_CHILD: u64 = 1 << 32;
