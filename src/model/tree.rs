//! A rooted tree over a subset of the phrases: parent array plus sorted children lists.
//!
//! Phrases that are not in the tree are *unplaced*. Children are kept sorted by phrase row so
//! every traversal is deterministic.

use std::collections::BTreeMap;

use serde::{Deserialize, Serialize};

use super::gaussian::PhraseId;
use super::phrase::PhraseTable;

/// Marker for "no parent" in the parent array.
pub const NO_PARENT: PhraseId = PhraseId::MAX;

/// A rooted tree of phrases.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Tree {
    root: PhraseId,
    parent: Vec<PhraseId>,
    children: Vec<Vec<PhraseId>>,
    placed: Vec<bool>,
}

/// Why a tree is not valid. Ids are the stable string ids.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
pub enum TreeError {
    /// The root is not given.
    #[error("no root given")]
    MissingRoot,
    /// An id in the tree is not a phrase.
    #[error("{field}: unknown phrase id \"{id}\"")]
    UnknownId {
        /// Where it appeared ("root", "parent of x", ...).
        field: String,
        /// The id.
        id: String,
    },
    /// The root has a parent.
    #[error("root \"{0}\" is given a parent")]
    RootHasParent(String),
    /// A phrase is given two different parents.
    #[error("\"{child}\" is given two parents: \"{first}\" and \"{second}\"")]
    TwoParents {
        /// The child.
        child: String,
        /// First parent.
        first: String,
        /// Second parent.
        second: String,
    },
    /// A node whose ancestry does not reach the declared root.
    #[error("several roots: \"{other}\" has no parent but is not the root \"{root}\"")]
    SeveralRoots {
        /// The declared root.
        root: String,
        /// Another parentless node.
        other: String,
    },
    /// A cycle.
    #[error("cycle: {0}")]
    Cycle(String),
}

impl Tree {
    /// A tree holding only `root`, with `n` phrases in the table.
    pub fn singleton(n: usize, root: PhraseId) -> Self {
        let mut placed = vec![false; n];
        placed[root as usize] = true;
        Tree {
            root,
            parent: vec![NO_PARENT; n],
            children: vec![Vec::new(); n],
            placed,
        }
    }

    /// Build from a child → parent list over phrase rows. Validates: one root, no cycles,
    /// no phrase with two parents, every parent chain reaching the root.
    pub fn from_edges(
        phrases: &PhraseTable,
        root: PhraseId,
        edges: &[(PhraseId, PhraseId)],
    ) -> Result<Self, TreeError> {
        let n = phrases.len();
        let mut t = Tree::singleton(n, root);
        for &(c, p) in edges {
            if c == root {
                return Err(TreeError::RootHasParent(phrases.id(root).to_string()));
            }
            let ci = c as usize;
            if t.parent[ci] != NO_PARENT && t.parent[ci] != p {
                return Err(TreeError::TwoParents {
                    child: phrases.id(c).to_string(),
                    first: phrases.id(t.parent[ci]).to_string(),
                    second: phrases.id(p).to_string(),
                });
            }
            if c == p {
                return Err(TreeError::Cycle(format!(
                    "\"{}\" is its own parent",
                    phrases.id(c)
                )));
            }
            t.parent[ci] = p;
            t.placed[ci] = true;
            t.placed[p as usize] = true;
        }
        // every placed node must reach the root; detect cycles with a colour walk
        let mut state = vec![0u8; n]; // 0 unknown, 1 on path, 2 reaches root
        state[root as usize] = 2;
        for start in 0..n {
            if !t.placed[start] || state[start] == 2 {
                continue;
            }
            let mut path = Vec::new();
            let mut cur = start as PhraseId;
            loop {
                let ci = cur as usize;
                if state[ci] == 2 {
                    break;
                }
                if state[ci] == 1 {
                    let pos = path.iter().position(|&x| x == cur).unwrap_or(0);
                    let mut names: Vec<&str> = path[pos..].iter().map(|&x| phrases.id(x)).collect();
                    names.push(phrases.id(cur));
                    return Err(TreeError::Cycle(names.join(" → ")));
                }
                state[ci] = 1;
                path.push(cur);
                let p = t.parent[ci];
                if p == NO_PARENT {
                    return Err(TreeError::SeveralRoots {
                        root: phrases.id(root).to_string(),
                        other: phrases.id(cur).to_string(),
                    });
                }
                cur = p;
            }
            for x in path {
                state[x as usize] = 2;
            }
        }
        for c in 0..n {
            let p = t.parent[c];
            if p != NO_PARENT {
                t.children[p as usize].push(c as PhraseId);
            }
        }
        Ok(t)
    }

    /// Build from string ids (as in `tree.json`).
    pub fn from_id_map(
        phrases: &PhraseTable,
        root: &str,
        parent: &BTreeMap<String, String>,
    ) -> Result<Self, TreeError> {
        if root.is_empty() {
            return Err(TreeError::MissingRoot);
        }
        let root_id = phrases.get(root).ok_or_else(|| TreeError::UnknownId {
            field: "root".into(),
            id: root.into(),
        })?;
        let mut edges = Vec::with_capacity(parent.len());
        // the children come in id order (a merge walk over the table's id order); parents
        // repeat (a million-phrase tree has ~10⁵ distinct ones), so they are remembered
        let mut from = 0;
        let mut parent_rows: std::collections::HashMap<&str, PhraseId> = Default::default();
        for (c, p) in parent {
            let ci = phrases
                .get_sorted(c, &mut from)
                .ok_or_else(|| TreeError::UnknownId {
                    field: "parent (child key)".into(),
                    id: c.clone(),
                })?;
            let known = parent_rows.get(p.as_str()).copied();
            let pi = known
                .or_else(|| phrases.get(p))
                .ok_or_else(|| TreeError::UnknownId {
                    field: format!("parent of \"{c}\""),
                    id: p.clone(),
                })?;
            if known.is_none() {
                parent_rows.insert(p, pi);
            }
            edges.push((ci, pi));
        }
        Tree::from_edges(phrases, root_id, &edges)
    }

    /// The tree file form: root id and child → parent ids.
    pub fn to_file(&self, phrases: &PhraseTable) -> TreeFile {
        let mut parent = BTreeMap::new();
        for c in 0..self.parent.len() {
            let p = self.parent[c];
            if p != NO_PARENT {
                parent.insert(
                    phrases.id(c as PhraseId).to_string(),
                    phrases.id(p).to_string(),
                );
            }
        }
        TreeFile {
            root: phrases.id(self.root).to_string(),
            parent,
        }
    }

    /// Root node.
    pub fn root(&self) -> PhraseId {
        self.root
    }

    /// Number of phrases in the table (placed or not).
    pub fn table_len(&self) -> usize {
        self.parent.len()
    }

    /// Parent of a node (None for the root and for unplaced phrases).
    pub fn parent(&self, p: PhraseId) -> Option<PhraseId> {
        let x = self.parent[p as usize];
        (x != NO_PARENT).then_some(x)
    }

    /// Children of a node, sorted by row.
    pub fn children(&self, p: PhraseId) -> &[PhraseId] {
        &self.children[p as usize]
    }

    /// Whether the phrase is a node of the tree.
    pub fn is_placed(&self, p: PhraseId) -> bool {
        self.placed[p as usize]
    }

    /// Number of nodes.
    pub fn node_count(&self) -> usize {
        self.placed.iter().filter(|&&b| b).count()
    }

    /// Phrases not in the tree, in row order.
    pub fn unplaced(&self) -> Vec<PhraseId> {
        (0..self.placed.len() as PhraseId)
            .filter(|&p| !self.placed[p as usize])
            .collect()
    }

    /// Nodes in depth-first pre-order from the root (children in row order).
    pub fn preorder(&self) -> Vec<PhraseId> {
        let mut out = Vec::with_capacity(self.node_count());
        let mut stack = vec![self.root];
        while let Some(x) = stack.pop() {
            out.push(x);
            for &c in self.children(x).iter().rev() {
                stack.push(c);
            }
        }
        out
    }

    /// Depth of every phrase (root 0); unplaced phrases get `u32::MAX`.
    pub fn depths(&self) -> Vec<u32> {
        let mut d = vec![u32::MAX; self.parent.len()];
        for x in self.preorder() {
            d[x as usize] = match self.parent(x) {
                Some(p) => d[p as usize] + 1,
                None => 0,
            };
        }
        d
    }

    /// Depth of the deepest node.
    pub fn max_depth(&self) -> u32 {
        self.depths()
            .into_iter()
            .filter(|&d| d != u32::MAX)
            .max()
            .unwrap_or(0)
    }

    /// Largest number of children of any node.
    pub fn max_fanout(&self) -> usize {
        self.children.iter().map(Vec::len).max().unwrap_or(0)
    }

    /// Ancestors of a node from its parent up to the root.
    pub fn ancestors(&self, p: PhraseId) -> Vec<PhraseId> {
        let mut out = Vec::new();
        let mut cur = self.parent(p);
        while let Some(x) = cur {
            out.push(x);
            cur = self.parent(x);
        }
        out
    }

    /// True when `a` is a proper ancestor of `b`.
    pub fn is_ancestor(&self, a: PhraseId, b: PhraseId) -> bool {
        let mut cur = self.parent(b);
        while let Some(x) = cur {
            if x == a {
                return true;
            }
            cur = self.parent(x);
        }
        false
    }

    /// Number of nodes in each node's subtree (itself included); 0 for unplaced.
    pub fn subtree_sizes(&self) -> Vec<u32> {
        let mut s = vec![0u32; self.parent.len()];
        for x in self.preorder().into_iter().rev() {
            s[x as usize] += 1;
            if let Some(p) = self.parent(x) {
                s[p as usize] += s[x as usize];
            }
        }
        s
    }
}

/// `tree.json`: `{"root": "...", "parent": {"child": "parent", ...}}`.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct TreeFile {
    /// Root id.
    pub root: String,
    /// Child id → parent id (sorted by child id when written).
    #[serde(default)]
    pub parent: BTreeMap<String, String>,
}

#[cfg(test)]
mod tests {
    use super::*;

    fn table(ids: &[&str]) -> PhraseTable {
        PhraseTable::from_ids(ids).unwrap()
    }

    fn map(pairs: &[(&str, &str)]) -> BTreeMap<String, String> {
        pairs
            .iter()
            .map(|(a, b)| (a.to_string(), b.to_string()))
            .collect()
    }

    #[test]
    fn builds_and_measures() {
        let t = table(&["root", "a", "b", "c", "loose"]);
        let tree = Tree::from_id_map(
            &t,
            "root",
            &map(&[("a", "root"), ("b", "root"), ("c", "a")]),
        )
        .unwrap();
        assert_eq!(tree.node_count(), 4);
        assert_eq!(tree.unplaced(), vec![4]);
        assert_eq!(tree.max_depth(), 2);
        assert_eq!(tree.max_fanout(), 2);
        assert_eq!(tree.preorder(), vec![0, 1, 3, 2]);
        assert_eq!(tree.ancestors(3), vec![1, 0]);
        assert!(tree.is_ancestor(0, 3) && !tree.is_ancestor(2, 3));
        assert_eq!(tree.subtree_sizes()[0], 4);
        let back = tree.to_file(&t);
        assert_eq!(
            Tree::from_id_map(&t, &back.root, &back.parent).unwrap(),
            tree
        );
    }

    #[test]
    fn invalid_trees_are_refused() {
        let t = table(&["root", "a", "b", "c"]);
        let cyc = Tree::from_id_map(&t, "root", &map(&[("a", "b"), ("b", "a")])).unwrap_err();
        assert!(matches!(cyc, TreeError::Cycle(_)), "{cyc}");
        let two = Tree::from_id_map(&t, "root", &map(&[("a", "root"), ("b", "c")])).unwrap_err();
        assert!(matches!(two, TreeError::SeveralRoots { .. }), "{two}");
        let unk = Tree::from_id_map(&t, "root", &map(&[("a", "zzz")])).unwrap_err();
        assert_eq!(
            unk.to_string(),
            "parent of \"a\": unknown phrase id \"zzz\""
        );
        let missing = Tree::from_id_map(&t, "nope", &map(&[])).unwrap_err();
        assert!(matches!(missing, TreeError::UnknownId { .. }));
        let rp = Tree::from_id_map(&t, "root", &map(&[("root", "a")])).unwrap_err();
        assert!(matches!(rp, TreeError::RootHasParent(_)));
    }
}
