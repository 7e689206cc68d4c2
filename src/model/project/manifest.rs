//! `project.json`: the manifest schema and its constants.

use serde::{Deserialize, Serialize};

/// The `format` value every manifest carries.
pub const FORMAT_NAME: &str = "treewright-project";
/// The manifest version this build reads and writes.
pub const FORMAT_VERSION: u32 = 1;
/// The manifest's file name inside a project folder.
pub const MANIFEST_NAME: &str = "project.json";

/// What the second embedding array holds.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, Default)]
#[serde(rename_all = "snake_case")]
pub enum Scale {
    /// σ² (the default).
    #[default]
    Variance,
    /// σ: squared on load.
    Std,
    /// ln σ²: exponentiated on load.
    LogVariance,
}

/// Size guards applied while loading, so a huge or hostile input fails with a clear error
/// instead of exhausting memory. Set in the manifest's optional `limits` object.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(deny_unknown_fields, default)]
pub struct Limits {
    /// Largest file the loader reads, in MiB (default 8192).
    pub max_file_mb: u64,
    /// Most phrases (default 10 000 000).
    pub max_phrases: usize,
    /// Largest embedding dimension (default 4096).
    pub max_dim: usize,
}

impl Default for Limits {
    fn default() -> Self {
        Limits {
            max_file_mb: 8192,
            max_phrases: 10_000_000,
            max_dim: 4096,
        }
    }
}

/// Where the embeddings are.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
#[serde(untagged)]
pub enum EmbeddingsRef {
    /// One JSON file.
    Json(String),
    /// A Parquet table, one row per phrase matched by id: a string id column and
    /// list-of-float columns for means and variances (diagonal). Listed before
    /// [`EmbeddingsRef::Npy`] so the `parquet` key picks this form.
    Parquet {
        /// The table file.
        parquet: String,
        /// The id column (default `phrase_id`).
        #[serde(default, skip_serializing_if = "Option::is_none")]
        id: Option<String>,
        /// The label column, read when `phrases` names the same table (default `label`).
        #[serde(default, skip_serializing_if = "Option::is_none")]
        label: Option<String>,
        /// The means column (lists of d floats).
        means: String,
        /// The variances column (lists of d floats).
        variances: String,
    },
    /// A NumPy `.npz` archive (`np.savez` or `np.savez_compressed`) and the names of the
    /// arrays in it: means plus exactly one of variances or covariances. Listed before
    /// [`EmbeddingsRef::Npy`] so the `npz` key picks this form.
    Npz {
        /// The archive file.
        npz: String,
        /// Name of the `n × d` means array.
        means: String,
        /// Name of the `n × d` variances array (diagonal covariance).
        #[serde(default, skip_serializing_if = "Option::is_none")]
        variances: Option<String>,
        /// Name of the `n × d × d` covariances array (full covariance).
        #[serde(default, skip_serializing_if = "Option::is_none")]
        covariances: Option<String>,
    },
    /// NumPy files: means plus exactly one of variances (diagonal) or covariances (full).
    Npy {
        /// `n × d` means.
        means: String,
        /// `n × d` variances (diagonal covariance).
        #[serde(default, skip_serializing_if = "Option::is_none")]
        variances: Option<String>,
        /// `n × d × d` covariances (full covariance).
        #[serde(default, skip_serializing_if = "Option::is_none")]
        covariances: Option<String>,
    },
}

/// `project.json`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Manifest {
    /// Always `treewright-project`.
    pub format: String,
    /// Format version (1).
    pub version: u32,
    /// Display name.
    pub name: String,
    /// Phrase table file.
    pub phrases: String,
    /// Embedding files.
    pub embeddings: EmbeddingsRef,
    /// What the second embedding array holds.
    #[serde(default, skip_serializing_if = "is_default_scale")]
    pub scale: Scale,
    /// Variances below this are raised to it (default 1e-6).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub variance_floor: Option<f64>,
    /// Shopper profiles file.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub users: Option<String>,
    /// Machine-built tree file (`.json` or `.csv`).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub tree: Option<String>,
    /// Override layer file.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub overrides: Option<String>,
    /// Audit thresholds (read by the audit).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub audit: Option<serde_json::Value>,
    /// Size guards for loading (defaults when absent).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub limits: Option<Limits>,
    /// Who may sign off: with this section, `verify` and `export --require-signoff` accept
    /// only sign-offs signed by an allowed key of the named reviewer.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub signoff: Option<SignoffPolicyRef>,
    /// Traffic per phrase (`.json` or `.csv`), the reach of the review queue
    /// ([`crate::model::queue`]).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub weights: Option<String>,
    /// Language of the phrases' main labels (a BCP 47 tag; `en` when absent). Labels in
    /// other languages come from the `labels` map of each row of `phrases.json`.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub default_language: Option<String>,
}

/// The manifest's `signoff` section: files of the signer policy (see
/// [`crate::model::sshsig`]), relative to the project folder.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct SignoffPolicyRef {
    /// The allowed-signers file (`PRINCIPALS [namespaces="…"] KEYTYPE BASE64`).
    pub allowed_signers: String,
    /// Optional revoked-keys file (one public key a line).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub revoked_keys: Option<String>,
}

fn is_default_scale(s: &Scale) -> bool {
    *s == Scale::Variance
}
