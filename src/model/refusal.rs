//! Why an edit does not apply to the effective tree as it stands.
//!
//! [`EditRefusal`] is what [`super::overrides::check_edit`] returns and what
//! [`super::overrides::apply`] records (as text) for a skipped edit. Its `Display` is the
//! message shown to the user: the workbench refuses a drop with it, the CLI exits 2 with
//! `refused: <message>`.

use std::fmt;

use super::effective::STALE_PREFIX;

/// The part a node plays in an edit (named in some refusals).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Role {
    /// The new parent of a reparent or pin.
    Parent,
    /// The node a merge goes into.
    Target,
    /// A node merged away.
    Source,
}

impl fmt::Display for Role {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(match self {
            Role::Parent => "parent",
            Role::Target => "target",
            Role::Source => "source",
        })
    }
}

/// An edit that cannot be applied, with the ids involved. Ids are phrase ids as written in
/// the edit.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
pub enum EditRefusal {
    /// The edit names a phrase the phrase table no longer has (it went stale).
    #[error("{STALE_PREFIX} phrase \"{id}\" is no longer in the phrase table")]
    Stale {
        /// The missing id.
        id: String,
    },
    /// The effective tree was computed for another phrase table.
    #[error("the effective tree does not belong to this phrase table")]
    ForeignTree,
    /// The project has no tree yet, so no edit applies.
    #[error("the project has no tree yet")]
    NoTree,
    /// A node taking part in the edit is merged into another node.
    #[error("{role} \"{id}\" is merged into \"{into}\"")]
    RoleMerged {
        /// Its part in the edit.
        role: Role,
        /// The node.
        id: String,
        /// The node it is merged into.
        into: String,
    },
    /// A node taking part in the edit is excluded.
    #[error("{role} \"{id}\" is excluded")]
    RoleExcluded {
        /// Its part in the edit.
        role: Role,
        /// The node.
        id: String,
    },
    /// A node taking part in the edit is not placed in the tree.
    #[error("{role} \"{id}\" is not in the tree")]
    RoleNotInTree {
        /// Its part in the edit.
        role: Role,
        /// The node.
        id: String,
    },
    /// The root cannot be moved or pinned.
    #[error("\"{node}\" is the root and has no parent")]
    RootHasNoParent {
        /// The node.
        node: String,
    },
    /// A node cannot be its own parent.
    #[error("\"{node}\" cannot be its own parent")]
    OwnParent {
        /// The node.
        node: String,
    },
    /// The node is merged into another node.
    #[error("\"{node}\" is merged into \"{into}\"")]
    Merged {
        /// The node.
        node: String,
        /// The node it is merged into.
        into: String,
    },
    /// The node is excluded and must be included before it is moved.
    #[error("\"{node}\" is excluded; include it first")]
    ExcludedIncludeFirst {
        /// The node.
        node: String,
    },
    /// The node is not placed in the tree.
    #[error("\"{node}\" is not in the tree")]
    NotInTree {
        /// The node.
        node: String,
    },
    /// The new parent lies below the node.
    #[error("\"{parent}\" is below \"{node}\": that would make a cycle")]
    Cycle {
        /// The node.
        node: String,
        /// The proposed parent.
        parent: String,
    },
    /// The node is pinned under another parent.
    #[error("\"{node}\" is pinned under \"{under}\"; unpin it first")]
    Pinned {
        /// The node.
        node: String,
        /// Its pinned parent (empty when it has none).
        under: String,
    },
    /// Unpin of a node that is not pinned.
    #[error("\"{node}\" is not pinned")]
    NotPinned {
        /// The node.
        node: String,
    },
    /// A merge without sources.
    #[error("no source to merge")]
    NoSource,
    /// A merge source equal to its target.
    #[error("\"{source_id}\" cannot be merged into itself")]
    MergeIntoItself {
        /// The source.
        source_id: String,
    },
    /// A merge source given twice.
    #[error("\"{source_id}\" is listed twice")]
    ListedTwice {
        /// The source.
        source_id: String,
    },
    /// The root given as a merge source.
    #[error("\"{source_id}\" is the root; merge the other node into it instead")]
    SourceIsRoot {
        /// The source.
        source_id: String,
    },
    /// A rename to an empty label.
    #[error("the new label is empty")]
    EmptyLabel,
    /// A rename to a label the label rule refuses (a control character); see
    /// [`crate::model::label`].
    #[error("rename of \"{node}\": {why}")]
    BadLabel {
        /// The node.
        node: String,
        /// What is wrong with the label.
        why: crate::model::label::LabelError,
    },
    /// A rename names a language that is not a well-formed BCP 47 tag.
    #[error("rename of \"{node}\": {why}")]
    BadLanguage {
        /// The node.
        node: String,
        /// What is wrong with the tag.
        why: crate::model::lang::BadLanguageTag,
    },
    /// A rename to the label the node already has.
    #[error("\"{node}\" is already labelled \"{label}\"")]
    SameLabel {
        /// The node.
        node: String,
        /// The label.
        label: String,
    },
    /// The root cannot be excluded.
    #[error("\"{node}\" is the root and cannot be excluded")]
    RootExcluded {
        /// The node.
        node: String,
    },
    /// Exclude of an excluded node.
    #[error("\"{node}\" is already excluded")]
    AlreadyExcluded {
        /// The node.
        node: String,
    },
    /// Include of a node that is not excluded.
    #[error("\"{node}\" is not excluded")]
    NotExcluded {
        /// The node.
        node: String,
    },
    /// Pin of a node without a parent in the effective tree (the CLI's `pin` takes the
    /// current parent).
    #[error("\"{node}\" has no parent in the effective tree to pin it to")]
    NoParentToPin {
        /// The node.
        node: String,
    },
}

impl EditRefusal {
    /// Whether the refusal comes from a phrase that vanished from the phrase table.
    pub fn is_stale(&self) -> bool {
        matches!(self, EditRefusal::Stale { .. })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn messages_keep_their_wording() {
        let s = EditRefusal::Stale { id: "x".into() };
        assert_eq!(
            s.to_string(),
            "stale: phrase \"x\" is no longer in the phrase table"
        );
        let m = EditRefusal::RoleMerged {
            role: Role::Parent,
            id: "a".into(),
            into: "b".into(),
        };
        assert_eq!(m.to_string(), "parent \"a\" is merged into \"b\"");
        let c = EditRefusal::Cycle {
            node: "n".into(),
            parent: "p".into(),
        };
        assert_eq!(
            c.to_string(),
            "\"p\" is below \"n\": that would make a cycle"
        );
    }
}
