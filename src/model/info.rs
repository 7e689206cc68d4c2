//! A one-screen summary of a project, as printed by `treewright info`.

use serde::Serialize;

use super::gaussian::PhraseId;
use super::project::Project;

/// Minimum, median and maximum of a set of values.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Spread {
    /// Smallest value.
    pub min: f64,
    /// Median (mean of the two middle values for an even count).
    pub median: f64,
    /// Largest value.
    pub max: f64,
}

/// Min / median / max of `values` (None when empty).
pub fn spread(values: &[f64]) -> Option<Spread> {
    if values.is_empty() {
        return None;
    }
    let mut v = values.to_vec();
    v.sort_by(f64::total_cmp);
    let n = v.len();
    let median = if n % 2 == 1 {
        v[n / 2]
    } else {
        0.5 * (v[n / 2 - 1] + v[n / 2])
    };
    Some(Spread {
        min: v[0],
        median,
        max: v[n - 1],
    })
}

/// Tree shape figures.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct TreeInfo {
    /// Root id.
    pub root: String,
    /// Number of nodes.
    pub nodes: usize,
    /// Depth of the deepest node (root = 0).
    pub depth: u32,
    /// Largest number of children of a node.
    pub max_fanout: usize,
}

/// The summary of a project.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ProjectInfo {
    /// Project name.
    pub name: String,
    /// Number of phrases.
    pub phrases: usize,
    /// Embedding dimension.
    pub dim: usize,
    /// `diagonal` or `full`.
    pub covariance: String,
    /// Generality (ln det Σ) over all phrases.
    pub generality: Spread,
    /// Number of shopper profiles.
    pub users: usize,
    /// Tree figures, when the project has a tree.
    pub tree: Option<TreeInfo>,
    /// Ids of phrases not in the tree (all phrases when there is no tree).
    pub unplaced: Vec<String>,
    /// The languages of the labels, default first (empty for a single-language project).
    #[serde(skip_serializing_if = "Vec::is_empty")]
    pub languages: Vec<String>,
    /// Phrases whose labels are equal after NFC and case folding, in one language or across
    /// two (reported, never merged).
    #[serde(skip_serializing_if = "Vec::is_empty")]
    pub label_clashes: Vec<crate::model::label_clash::LabelClash>,
}

impl ProjectInfo {
    /// Summarise a loaded project.
    pub fn of(p: &Project) -> Self {
        let g = &p.gaussians;
        let generality = spread(g.log_dets()).unwrap_or(Spread {
            min: 0.0,
            median: 0.0,
            max: 0.0,
        });
        let (tree, unplaced): (Option<TreeInfo>, Vec<PhraseId>) = match &p.tree {
            Some(t) => (
                Some(TreeInfo {
                    root: p.phrases.id(t.root()).to_string(),
                    nodes: t.node_count(),
                    depth: t.max_depth(),
                    max_fanout: t.max_fanout(),
                }),
                t.unplaced(),
            ),
            None => (None, (0..p.phrases.len() as PhraseId).collect()),
        };
        ProjectInfo {
            name: p.manifest.name.clone(),
            phrases: p.phrases.len(),
            dim: g.dim(),
            covariance: g.kind().as_str().to_string(),
            generality,
            users: p.users.len(),
            tree,
            unplaced: unplaced
                .into_iter()
                .map(|x| p.phrases.id(x).to_string())
                .collect(),
            languages: p
                .phrases
                .languages()
                .map(|l| l.languages())
                .unwrap_or_default(),
            label_clashes: crate::model::label_clash::table_clashes(&p.phrases),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn spread_of_even_and_odd() {
        let s = spread(&[3.0, 1.0, 2.0]).unwrap();
        assert_eq!((s.min, s.median, s.max), (1.0, 2.0, 3.0));
        assert_eq!(spread(&[4.0, 1.0, 2.0, 3.0]).unwrap().median, 2.5);
        assert!(spread(&[]).is_none());
    }
}
