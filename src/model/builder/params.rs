//! The build parameters in two states, as linfa does it: [`BuildParams`] is plain data
//! (written into the build report, edited by the dialog and the CLI) and
//! [`BuildParams::check`] turns it into a [`CheckedBuildParams`], the only form the
//! builder runs on, or a [`ParamError`] naming the parameter and the rule it breaks.

use std::ops::Deref;

use serde::{Deserialize, Serialize};

use crate::model::gaussian::Similarity;

/// Largest accepted [`BuildParams::max_depth`] (keeps the recursion shallow).
pub const MAX_DEPTH_LIMIT: usize = 64;

/// Everything that steers a build. Written into the build report.
///
/// Reports written before the renames spell `kmeans_restarts`, `elbow_restarts` and
/// `max_iterations` as `n_init`, `elbow_n_init` and `max_iter`; both spellings are read.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct BuildParams {
    /// Seed of every random choice (k-means++, samples).
    pub seed: u64,
    /// Maximum depth of the tree (root = 0); nodes at this depth are leaves. 1 ..= 64.
    pub max_depth: usize,
    /// Largest k tried by the elbow method. ≥ 2.
    pub k_max: usize,
    /// A cluster whose non-representative members are fewer than this is not split: they
    /// all become children of the representative. ≥ 2.
    pub min_cluster: usize,
    /// Similarity used to pick representatives.
    pub similarity: Similarity,
    /// Weight of ln σ² in the k-means feature vector (0 = means only). ≥ 0.
    pub with_variance: f64,
    /// k-means++ restarts per fit of the partition; the lowest inertia wins. ≥ 1.
    #[serde(alias = "n_init")]
    pub kmeans_restarts: usize,
    /// k-means++ restarts per fit of the elbow curve (the partition uses
    /// `kmeans_restarts`). ≥ 1.
    #[serde(alias = "elbow_n_init")]
    pub elbow_restarts: usize,
    /// Kneedle sensitivity S. ≥ 0.
    pub sensitivity: f64,
    /// Without a knee: the smallest k reaching this share of the inertia drop. In (0, 1].
    pub fallback_share: f64,
    /// Clusters up to this size get the exact representative. ≥ 1.
    pub exact_limit: usize,
    /// Above `exact_limit`, candidates are screened against a random sample of this size. ≥ 1.
    pub sample_size: usize,
    /// Above `exact_limit`, this many best-screened candidates are rescored exactly. ≥ 1.
    pub refine: usize,
    /// The elbow curve of a larger cluster is computed on a random subsample of this size. ≥ 3.
    pub elbow_sample: usize,
    /// k-means iteration cap per run. ≥ 1.
    #[serde(alias = "max_iter")]
    pub max_iterations: usize,
    /// k-means convergence tolerance on the centroid shift. > 0.
    pub tolerance: f64,
}

impl Default for BuildParams {
    fn default() -> Self {
        BuildParams {
            seed: 0,
            max_depth: 6,
            k_max: 8,
            min_cluster: 4,
            similarity: Similarity::Elk,
            with_variance: 0.0,
            kmeans_restarts: 3,
            elbow_restarts: 1,
            sensitivity: 1.0,
            fallback_share: 0.9,
            exact_limit: 160,
            sample_size: 128,
            refine: 32,
            elbow_sample: 1024,
            max_iterations: 100,
            tolerance: 1e-4,
        }
    }
}

/// A build parameter out of its range. The `Display` names the parameter, its value and
/// the rule, e.g. "parameter k_max is 1: it must be ≥ 2".
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum ParamError {
    /// A count outside a closed range.
    #[error("parameter {field} is {value}: it must be between {min} and {max}")]
    OutOfRange {
        /// The parameter.
        field: &'static str,
        /// Its value.
        value: usize,
        /// Smallest accepted value.
        min: usize,
        /// Largest accepted value.
        max: usize,
    },
    /// A count below its minimum.
    #[error("parameter {field} is {value}: it must be ≥ {min}")]
    TooSmall {
        /// The parameter.
        field: &'static str,
        /// Its value.
        value: usize,
        /// Smallest accepted value.
        min: usize,
    },
    /// A weight that must be finite and not negative.
    #[error("parameter {field} is {value}: it must be a finite number ≥ 0")]
    NotNonNegative {
        /// The parameter.
        field: &'static str,
        /// Its value.
        value: f64,
    },
    /// A number that must be finite and positive.
    #[error("parameter {field} is {value}: it must be a finite number > 0")]
    NotPositive {
        /// The parameter.
        field: &'static str,
        /// Its value.
        value: f64,
    },
    /// A share that must lie in (0, 1].
    #[error("parameter {field} is {value}: it must be in (0, 1]")]
    NotAShare {
        /// The parameter.
        field: &'static str,
        /// Its value.
        value: f64,
    },
}

impl ParamError {
    /// The parameter the error is about.
    pub fn field(&self) -> &'static str {
        match self {
            ParamError::OutOfRange { field, .. }
            | ParamError::TooSmall { field, .. }
            | ParamError::NotNonNegative { field, .. }
            | ParamError::NotPositive { field, .. }
            | ParamError::NotAShare { field, .. } => field,
        }
    }
}

/// [`BuildParams`] that passed [`BuildParams::check`]. Read-only: it dereferences to the
/// parameters.
#[derive(Debug, Clone, PartialEq)]
pub struct CheckedBuildParams(BuildParams);

impl Deref for CheckedBuildParams {
    type Target = BuildParams;

    fn deref(&self) -> &BuildParams {
        &self.0
    }
}

impl CheckedBuildParams {
    /// The checked parameters as plain data again (e.g. to edit them).
    pub fn into_inner(self) -> BuildParams {
        self.0
    }
}

impl BuildParams {
    /// Check every range rule (in field order; the first broken one is reported).
    pub fn check(self) -> Result<CheckedBuildParams, ParamError> {
        self.check_ref()?;
        Ok(CheckedBuildParams(self))
    }

    /// Check every range rule without giving up the parameters.
    pub fn validate(&self) -> Result<(), ParamError> {
        self.check_ref()
    }

    fn check_ref(&self) -> Result<(), ParamError> {
        fn at_least(field: &'static str, value: usize, min: usize) -> Result<(), ParamError> {
            if value >= min {
                Ok(())
            } else {
                Err(ParamError::TooSmall { field, value, min })
            }
        }
        fn non_negative(field: &'static str, value: f64) -> Result<(), ParamError> {
            if value.is_finite() && value >= 0.0 {
                Ok(())
            } else {
                Err(ParamError::NotNonNegative { field, value })
            }
        }
        if !(1..=MAX_DEPTH_LIMIT).contains(&self.max_depth) {
            return Err(ParamError::OutOfRange {
                field: "max_depth",
                value: self.max_depth,
                min: 1,
                max: MAX_DEPTH_LIMIT,
            });
        }
        at_least("k_max", self.k_max, 2)?;
        at_least("min_cluster", self.min_cluster, 2)?;
        non_negative("with_variance", self.with_variance)?;
        at_least("kmeans_restarts", self.kmeans_restarts, 1)?;
        at_least("elbow_restarts", self.elbow_restarts, 1)?;
        non_negative("sensitivity", self.sensitivity)?;
        if !(self.fallback_share > 0.0 && self.fallback_share <= 1.0) {
            return Err(ParamError::NotAShare {
                field: "fallback_share",
                value: self.fallback_share,
            });
        }
        at_least("exact_limit", self.exact_limit, 1)?;
        at_least("sample_size", self.sample_size, 1)?;
        at_least("refine", self.refine, 1)?;
        at_least("elbow_sample", self.elbow_sample, 3)?;
        at_least("max_iterations", self.max_iterations, 1)?;
        if !(self.tolerance.is_finite() && self.tolerance > 0.0) {
            return Err(ParamError::NotPositive {
                field: "tolerance",
                value: self.tolerance,
            });
        }
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn errors_name_the_parameter_and_the_rule() {
        let e = |p: BuildParams| p.check().unwrap_err().to_string();
        let d = BuildParams::default;
        assert_eq!(
            e(BuildParams {
                max_depth: 65,
                ..d()
            }),
            "parameter max_depth is 65: it must be between 1 and 64"
        );
        assert_eq!(
            e(BuildParams { k_max: 1, ..d() }),
            "parameter k_max is 1: it must be ≥ 2"
        );
        assert_eq!(
            e(BuildParams {
                with_variance: -0.5,
                ..d()
            }),
            "parameter with_variance is -0.5: it must be a finite number ≥ 0"
        );
        assert_eq!(
            e(BuildParams {
                kmeans_restarts: 0,
                ..d()
            }),
            "parameter kmeans_restarts is 0: it must be ≥ 1"
        );
        assert_eq!(
            e(BuildParams {
                elbow_restarts: 0,
                ..d()
            }),
            "parameter elbow_restarts is 0: it must be ≥ 1"
        );
        assert_eq!(
            e(BuildParams {
                fallback_share: 1.5,
                ..d()
            }),
            "parameter fallback_share is 1.5: it must be in (0, 1]"
        );
        assert_eq!(
            e(BuildParams {
                max_iterations: 0,
                ..d()
            }),
            "parameter max_iterations is 0: it must be ≥ 1"
        );
        assert_eq!(
            e(BuildParams {
                tolerance: 0.0,
                ..d()
            }),
            "parameter tolerance is 0: it must be a finite number > 0"
        );
        let checked = d().check().unwrap();
        assert_eq!(checked.kmeans_restarts, 3);
        assert_eq!(checked.into_inner(), d());
    }

    #[test]
    fn old_parameter_names_are_read_new_ones_written() {
        let json = serde_json::to_string(&BuildParams::default()).unwrap();
        assert!(json.contains("\"kmeans_restarts\":3"), "{json}");
        assert!(json.contains("\"elbow_restarts\":1"), "{json}");
        assert!(json.contains("\"max_iterations\":100"), "{json}");
        assert!(
            !json.contains("n_init") && !json.contains("max_iter\""),
            "{json}"
        );
        let old = json
            .replace("kmeans_restarts", "n_init")
            .replace("elbow_restarts", "elbow_n_init")
            .replace("max_iterations", "max_iter");
        let p: BuildParams = serde_json::from_str(&old).unwrap();
        assert_eq!(p, BuildParams::default());
    }
}
