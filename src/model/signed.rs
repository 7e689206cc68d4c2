//! What a sign-off signed, kept: the canonical effective tree stored at sign-off as
//! `signoffs/<hash>.json` in the project folder, read back, and compared with the current
//! effective tree with the cause of every change.
//!
//! The snapshot file holds exactly the bytes that were hashed ([`super::signoff::canonical_tree`]),
//! so it is found by the sign-off's `tree_hash` and checked on load: a file whose SHA-256 is
//! not its name is refused. Beside it, `signoffs/<hash>.base.json` records the SHA-256 of the
//! base tree file at sign-off, so that a later comparison can tell "the base tree was
//! replaced" from "the phrase table changed".
//!
//! [`diff`] lists, for every phrase id whose role or label differs between two canonical
//! trees, one [`Change`] (plus a rename when the label changed too). The list is complete:
//! [`SignedTree::apply`] of `diff(a, b)` to `a` gives `b` exactly (the property test in
//! `tests/verify_signed.rs`).

use std::collections::{BTreeMap, BTreeSet};
use std::fmt;
use std::path::{Path, PathBuf};

use serde::{Deserialize, Serialize};

use super::edit::{Edit, EditRecord};
use super::effective::EffectiveTree;
use super::fsutil::{atomic_write, to_json_pretty};
use super::lock::ProjectLock;
use super::overrides::apply as apply_edits;
use super::phrase::PhraseTable;
use super::signoff::{canonical_tree, describe_edit, sha256_hex};
use super::tree::Tree;

/// Folder of the snapshots, inside the project folder.
pub const SNAPSHOT_DIR: &str = "signoffs";

/// The role of a phrase in a canonical tree.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Role {
    /// A node under this parent (`None` for the root).
    Node(Option<String>),
    /// An alias of this node.
    Alias(String),
    /// Left out of the deployed tree.
    Excluded,
}

/// One phrase of a canonical tree: its role and its label.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Entry {
    /// Role.
    pub role: Role,
    /// Effective label.
    pub label: String,
}

/// A canonical tree read back into a map from phrase id to [`Entry`]; phrases absent from
/// the map are not in the deployed tree (unplaced, or not phrases at all).
#[derive(Debug, Clone, PartialEq, Eq, Default)]
pub struct SignedTree {
    /// The root id.
    pub root: String,
    /// Every phrase the canonical tree names.
    pub entries: BTreeMap<String, Entry>,
}

#[derive(Serialize, Deserialize)]
struct OwnLabel {
    id: String,
    label: String,
}

#[derive(Serialize, Deserialize)]
struct OwnNode {
    id: String,
    label: String,
    parent: Option<String>,
    aliases: Vec<OwnLabel>,
}

#[derive(Serialize, Deserialize)]
struct OwnCanon {
    format: String,
    root: String,
    nodes: Vec<OwnNode>,
    excluded: Vec<OwnLabel>,
}

const CANON_FORMAT: &str = "treewright-canonical-tree/1";

impl SignedTree {
    /// Read a canonical tree (the text [`canonical_tree`] writes).
    pub fn parse(text: &str) -> Result<Self, String> {
        let c: OwnCanon = serde_json::from_str(text).map_err(|e| e.to_string())?;
        if c.format != CANON_FORMAT {
            return Err(format!(
                "format is \"{}\", not \"{CANON_FORMAT}\"",
                c.format
            ));
        }
        let mut entries = BTreeMap::new();
        for n in &c.nodes {
            for a in &n.aliases {
                entries.insert(
                    a.id.clone(),
                    Entry {
                        role: Role::Alias(n.id.clone()),
                        label: a.label.clone(),
                    },
                );
            }
        }
        for x in c.excluded {
            entries.entry(x.id).or_insert(Entry {
                role: Role::Excluded,
                label: x.label,
            });
        }
        for n in c.nodes {
            entries.entry(n.id).or_insert(Entry {
                role: Role::Node(n.parent),
                label: n.label,
            });
        }
        Ok(SignedTree {
            root: c.root,
            entries,
        })
    }

    /// The canonical tree of an effective tree, read back.
    pub fn of(eff: &EffectiveTree, phrases: &PhraseTable) -> Self {
        // the canonical text is written by this crate and always parses
        Self::parse(&canonical_tree(eff, phrases)).unwrap_or_default()
    }

    /// The canonical text (byte for byte what [`canonical_tree`] gives for the same tree).
    pub fn to_canonical(&self) -> String {
        let mut nodes: BTreeMap<&str, OwnNode> = BTreeMap::new();
        let mut excluded = Vec::new();
        for (id, e) in &self.entries {
            match &e.role {
                Role::Node(parent) => {
                    nodes.insert(
                        id,
                        OwnNode {
                            id: id.clone(),
                            label: e.label.clone(),
                            parent: parent.clone(),
                            aliases: Vec::new(),
                        },
                    );
                }
                Role::Excluded => excluded.push(OwnLabel {
                    id: id.clone(),
                    label: e.label.clone(),
                }),
                Role::Alias(_) => {}
            }
        }
        // entries iterate by id, so every alias list comes out sorted by id
        for (id, e) in &self.entries {
            if let Role::Alias(t) = &e.role
                && let Some(n) = nodes.get_mut(t.as_str())
            {
                n.aliases.push(OwnLabel {
                    id: id.clone(),
                    label: e.label.clone(),
                });
            }
        }
        let c = OwnCanon {
            format: CANON_FORMAT.to_string(),
            root: self.root.clone(),
            nodes: nodes.into_values().collect(),
            excluded,
        };
        serde_json::to_string(&c).unwrap_or_default()
    }

    /// SHA-256 of [`SignedTree::to_canonical`].
    pub fn hash(&self) -> String {
        sha256_hex(self.to_canonical().as_bytes())
    }

    /// Apply a list of changes (as [`diff`] gives them) to this tree.
    pub fn apply(&mut self, changes: &[Change]) {
        let parent = |p: &str| (!p.is_empty()).then(|| p.to_string());
        for c in changes {
            let node = c.node().to_string();
            let (role, label) = match c {
                Change::Moved { to, .. } => (Some(Role::Node(parent(to))), None),
                Change::Merged { into, label, .. } => {
                    (Some(Role::Alias(into.clone())), label.as_ref())
                }
                Change::Excluded { label, .. } => (Some(Role::Excluded), label.as_ref()),
                Change::Included { parent: p, .. } => (Some(Role::Node(parent(p))), None),
                Change::Placed {
                    parent: p, label, ..
                } => (Some(Role::Node(parent(p))), label.as_ref()),
                Change::Unplaced { .. } | Change::Vanished { .. } => {
                    self.entries.remove(&node);
                    continue;
                }
                Change::Renamed { to, .. } => {
                    if let Some(e) = self.entries.get_mut(&node) {
                        e.label = to.clone();
                    }
                    continue;
                }
            };
            let e = self.entries.entry(node.clone()).or_insert(Entry {
                role: Role::Excluded,
                label: node,
            });
            if let Some(r) = role {
                e.role = r;
            }
            if let Some(l) = label {
                e.label = l.clone();
            }
        }
        let roots: Vec<&String> = self
            .entries
            .iter()
            .filter(|(_, e)| e.role == Role::Node(None))
            .map(|(id, _)| id)
            .collect();
        if let [r] = roots[..] {
            self.root = r.clone();
        }
    }
}

/// One difference for one phrase between the signed tree and another canonical tree. A
/// `label` is given when the phrase was not in the signed tree at all.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
#[serde(tag = "kind", rename_all = "kebab-case")]
pub enum Change {
    /// A node with another parent (`""` stands for "none": the root).
    Moved {
        /// Node id.
        node: String,
        /// Old parent.
        from: String,
        /// New parent.
        to: String,
    },
    /// Now an alias of `into`.
    Merged {
        /// Phrase id.
        node: String,
        /// The node it is an alias of.
        into: String,
        /// Its label, when it was not in the signed tree.
        #[serde(skip_serializing_if = "Option::is_none")]
        label: Option<String>,
    },
    /// Now left out of the deployed tree.
    Excluded {
        /// Phrase id.
        node: String,
        /// Its label, when it was not in the signed tree.
        #[serde(skip_serializing_if = "Option::is_none")]
        label: Option<String>,
    },
    /// Excluded when signed, a node again.
    Included {
        /// Node id.
        node: String,
        /// Its parent.
        parent: String,
    },
    /// Not a node when signed (an alias, or not in the signed tree), a node now.
    Placed {
        /// Node id.
        node: String,
        /// Its parent.
        parent: String,
        /// Its label, when it was not in the signed tree.
        #[serde(skip_serializing_if = "Option::is_none")]
        label: Option<String>,
    },
    /// Still a phrase of the project but no longer in the deployed tree.
    Unplaced {
        /// Phrase id.
        node: String,
    },
    /// In the signed tree, and no longer a phrase of the project.
    Vanished {
        /// Phrase id.
        node: String,
    },
    /// The label changed.
    Renamed {
        /// Phrase id.
        node: String,
        /// Old label.
        from: String,
        /// New label.
        to: String,
    },
}

impl Change {
    /// The phrase id the change is about.
    pub fn node(&self) -> &str {
        match self {
            Change::Moved { node, .. }
            | Change::Merged { node, .. }
            | Change::Excluded { node, .. }
            | Change::Included { node, .. }
            | Change::Placed { node, .. }
            | Change::Unplaced { node }
            | Change::Vanished { node }
            | Change::Renamed { node, .. } => node,
        }
    }
}

fn or_root(p: &str) -> &str {
    if p.is_empty() { "(none: root)" } else { p }
}

impl fmt::Display for Change {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Change::Moved { node, from, to } => {
                write!(f, "moved     {node}: {} → {}", or_root(from), or_root(to))
            }
            Change::Merged { node, into, .. } => write!(f, "merged    {node} into {into}"),
            Change::Excluded { node, .. } => write!(f, "excluded  {node}"),
            Change::Included { node, parent } => {
                write!(f, "included  {node} under {}", or_root(parent))
            }
            Change::Placed { node, parent, .. } => {
                write!(f, "placed    {node} under {}", or_root(parent))
            }
            Change::Unplaced { node } => write!(f, "unplaced  {node}"),
            Change::Vanished { node } => write!(f, "vanished  {node} (no longer a phrase)"),
            Change::Renamed { node, from, to } => {
                write!(f, "renamed   {node}: \"{from}\" → \"{to}\"")
            }
        }
    }
}

/// Differences from `old` to `new`, ordered by phrase id (a rename after the role change of
/// the same phrase). `is_phrase` tells whether an id is still a phrase of the project (to
/// tell "unplaced" from "vanished").
pub fn diff(old: &SignedTree, new: &SignedTree, is_phrase: &dyn Fn(&str) -> bool) -> Vec<Change> {
    let ids: BTreeSet<&String> = old.entries.keys().chain(new.entries.keys()).collect();
    let mut out = Vec::new();
    let s = |p: &Option<String>| p.clone().unwrap_or_default();
    for id in ids {
        let node = id.clone();
        let (a, b) = (old.entries.get(id), new.entries.get(id));
        if a.map(|e| &e.role) != b.map(|e| &e.role) {
            let label = match a {
                None => b.map(|e| e.label.clone()),
                Some(_) => None,
            };
            out.push(match (a.map(|e| &e.role), b.map(|e| &e.role)) {
                (_, None) if is_phrase(id) => Change::Unplaced { node: node.clone() },
                (_, None) => Change::Vanished { node: node.clone() },
                (_, Some(Role::Alias(t))) => Change::Merged {
                    node: node.clone(),
                    into: t.clone(),
                    label,
                },
                (_, Some(Role::Excluded)) => Change::Excluded {
                    node: node.clone(),
                    label,
                },
                (Some(Role::Node(f)), Some(Role::Node(t))) => Change::Moved {
                    node: node.clone(),
                    from: s(f),
                    to: s(t),
                },
                (Some(Role::Excluded), Some(Role::Node(t))) => Change::Included {
                    node: node.clone(),
                    parent: s(t),
                },
                (_, Some(Role::Node(t))) => Change::Placed {
                    node: node.clone(),
                    parent: s(t),
                    label,
                },
            });
        }
        if let (Some(a), Some(b)) = (a, b)
            && a.label != b.label
        {
            out.push(Change::Renamed {
                node,
                from: a.label.clone(),
                to: b.label.clone(),
            });
        }
    }
    out
}

#[derive(PartialEq)]
enum Aspect {
    Role(Role),
    Label(String),
}

/// A change with what caused it.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct CausedChange {
    /// The change.
    #[serde(flatten)]
    pub change: Change,
    /// Why: `"edit #7 (rename …)"`, or the base tree / phrase table note, or both.
    pub causes: Vec<String>,
}

impl fmt::Display for CausedChange {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}    [{}]", self.change, self.causes.join("; "))
    }
}

/// Where the signed tree of a comparison came from.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum SignedSource {
    /// The stored snapshot `signoffs/<hash>.json`.
    Snapshot,
    /// No snapshot, but the edits up to the sign-off on today's base tree give the signed
    /// hash, so they rebuild the signed tree exactly.
    Replayed,
    /// No snapshot, and the replay does not give the signed hash: the signed tree is not
    /// known and the list shows only what the edits since the sign-off changed.
    Missing,
}

/// The signed tree against the current effective tree.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct SinceSignoff {
    /// Index of the sign-off edit.
    pub index: usize,
    /// Where the signed tree came from.
    pub signed_tree: SignedSource,
    /// True when the list is every difference (the signed tree is known).
    pub complete: bool,
    /// What happened to the base tree or the phrase table, when the signed edits on
    /// today's base tree no longer give the signed tree.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub base_changed: Option<String>,
    /// Nodes (phrase ids) concerned by at least one change.
    pub nodes_changed: usize,
    /// The changes, by phrase id, each with its causes.
    pub changes: Vec<CausedChange>,
}

/// Why a snapshot cannot be used.
#[derive(Debug, thiserror::Error)]
pub enum SnapshotError {
    /// The file's SHA-256 is not the signed hash: it was edited.
    #[error(
        "{file}: the snapshot's SHA-256 is {found}, not the signed hash {signed}; it was edited after the sign-off and is refused"
    )]
    Tampered {
        /// The snapshot file.
        file: String,
        /// Hash the sign-off recorded.
        signed: String,
        /// Hash of the file as found.
        found: String,
    },
    /// The snapshot could not be read or written.
    #[error("{file}: {source}")]
    Io {
        /// The file.
        file: String,
        /// The OS error.
        source: std::io::Error,
    },
    /// The snapshot is not a canonical tree.
    #[error("{file}: not a canonical tree: {message}")]
    Bad {
        /// The file.
        file: String,
        /// What is wrong.
        message: String,
    },
    /// The edit at this index is not a sign-off.
    #[error("edit #{index} is not a sign-off")]
    NotASignoff {
        /// The index asked for.
        index: usize,
    },
}

/// `signoffs/<hash>.json` in `dir`.
pub fn snapshot_path(dir: &Path, hash: &str) -> PathBuf {
    dir.join(SNAPSHOT_DIR).join(format!("{hash}.json"))
}

/// `signoffs/<hash>.base.json` in `dir`.
pub fn base_note_path(dir: &Path, hash: &str) -> PathBuf {
    dir.join(SNAPSHOT_DIR).join(format!("{hash}.base.json"))
}

/// What `signoffs/<hash>.base.json` records.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
pub struct BaseAtSignoff {
    /// The base tree file, relative to the project folder.
    pub tree_file: String,
    /// SHA-256 of its bytes at sign-off.
    pub sha256: String,
}

/// Write the snapshot of `canonical` (and the base tree note) atomically. The project lock
/// must be held (`_lock`). A snapshot already there with the right hash is left alone.
pub fn write_snapshot(
    dir: &Path,
    canonical: &str,
    base: &BaseAtSignoff,
    _lock: &ProjectLock,
) -> Result<String, SnapshotError> {
    let hash = sha256_hex(canonical.as_bytes());
    let path = snapshot_path(dir, &hash);
    let io = |p: &Path| {
        let file = p.display().to_string();
        move |source| SnapshotError::Io { file, source }
    };
    let folder = dir.join(SNAPSHOT_DIR);
    std::fs::create_dir_all(&folder).map_err(io(&folder))?;
    let fine = std::fs::read(&path).is_ok_and(|b| sha256_hex(&b) == hash);
    if !fine {
        atomic_write(&path, canonical.as_bytes(), false).map_err(io(&path))?;
    }
    let note = base_note_path(dir, &hash);
    atomic_write(&note, &to_json_pretty(base), false).map_err(io(&note))?;
    Ok(hash)
}

/// Read the snapshot of `hash`: `None` when there is none; refused when its SHA-256 is
/// not `hash`.
pub fn load_snapshot(dir: &Path, hash: &str) -> Result<Option<SignedTree>, SnapshotError> {
    let path = snapshot_path(dir, hash);
    let file = path.display().to_string();
    let bytes = match std::fs::read(&path) {
        Ok(b) => b,
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => return Ok(None),
        Err(source) => return Err(SnapshotError::Io { file, source }),
    };
    let found = sha256_hex(&bytes);
    if found != hash {
        return Err(SnapshotError::Tampered {
            file,
            signed: hash.to_string(),
            found,
        });
    }
    let text = String::from_utf8_lossy(&bytes);
    SignedTree::parse(&text)
        .map(Some)
        .map_err(|message| SnapshotError::Bad { file, message })
}

/// The base tree note of `hash`, if one was written.
pub fn load_base_note(dir: &Path, hash: &str) -> Option<BaseAtSignoff> {
    let b = std::fs::read(base_note_path(dir, hash)).ok()?;
    serde_json::from_slice(&b).ok()
}

/// Compare the sign-off at `index` of `edits` with the current effective tree of `base` and
/// `edits`. `snapshot` is the stored signed tree (`None` when there is none); `base_note`
/// describes what happened to the base tree or the phrase table, used as the cause of a
/// change the edits do not explain.
pub fn since_signoff(
    base: &Tree,
    phrases: &PhraseTable,
    edits: &[EditRecord],
    index: usize,
    snapshot: Option<SignedTree>,
    base_note: &str,
) -> Result<SinceSignoff, SnapshotError> {
    compare_with_signed(base, phrases, edits, index, snapshot, Some(base_note))
}

/// [`since_signoff`] without the causes (every `causes` list is empty): two applications
/// of the edits instead of one per edit since the sign-off. For a count on every change of
/// the tree (the workbench's status bar).
pub fn since_signoff_uncaused(
    base: &Tree,
    phrases: &PhraseTable,
    edits: &[EditRecord],
    index: usize,
    snapshot: Option<SignedTree>,
) -> Result<SinceSignoff, SnapshotError> {
    compare_with_signed(base, phrases, edits, index, snapshot, None)
}

fn compare_with_signed(
    base: &Tree,
    phrases: &PhraseTable,
    edits: &[EditRecord],
    index: usize,
    snapshot: Option<SignedTree>,
    base_note: Option<&str>,
) -> Result<SinceSignoff, SnapshotError> {
    let caused_wanted = base_note.is_some();
    let base_note = base_note.unwrap_or_default();
    let Some(Edit::Signoff { tree_hash, .. }) = edits.get(index).map(|r| &r.edit) else {
        return Err(SnapshotError::NotASignoff { index });
    };
    let state =
        |upto: usize| SignedTree::of(&apply_edits(base, phrases, &edits[..upto]).0, phrases);
    let now = state(edits.len());
    let replay = state(index);
    let (signed, source) = match snapshot {
        Some(s) => (s, SignedSource::Snapshot),
        None if replay.hash() == *tree_hash => (replay.clone(), SignedSource::Replayed),
        None => (replay.clone(), SignedSource::Missing),
    };
    let is_phrase = |id: &str| phrases.get(id).is_some();
    let changes = diff(&signed, &now, &is_phrase);
    // a change is about a phrase's role, or (a rename) about its label
    let aspect = |t: &SignedTree, c: &Change| {
        let e = t.entries.get(c.node());
        match c {
            Change::Renamed { .. } => e.map(|e| Aspect::Label(e.label.clone())),
            _ => e.map(|e| Aspect::Role(e.role.clone())),
        }
    };
    let differs = |a: &SignedTree, b: &SignedTree, c: &Change| aspect(a, c) != aspect(b, c);
    // which edits since the sign-off changed each change's aspect
    let mut by_edit: Vec<Vec<usize>> = vec![Vec::new(); changes.len()];
    if caused_wanted && replay != now {
        let mut prev = replay.clone();
        for j in index + 1..edits.len() {
            let cur = state(j + 1);
            for (k, c) in changes.iter().enumerate() {
                if differs(&prev, &cur, c) {
                    by_edit[k].push(j);
                }
            }
            prev = cur;
        }
    }
    let nodes_changed = changes
        .iter()
        .map(Change::node)
        .collect::<BTreeSet<&str>>()
        .len();
    let base_differs = signed != replay;
    let caused = changes
        .iter()
        .zip(by_edit)
        .map(|(change, steps)| {
            let mut causes = Vec::new();
            if !caused_wanted {
                return CausedChange {
                    change: change.clone(),
                    causes,
                };
            }
            if differs(&signed, &replay, change) {
                causes.push(base_note.to_string());
            }
            for j in steps {
                causes.push(format!("edit #{j} ({})", describe_edit(&edits[j].edit)));
            }
            if causes.is_empty() {
                causes.push("cause not known".to_string());
            }
            CausedChange {
                change: change.clone(),
                causes,
            }
        })
        .collect();
    Ok(SinceSignoff {
        index,
        signed_tree: source,
        complete: source != SignedSource::Missing,
        base_changed: (caused_wanted && (base_differs || source == SignedSource::Missing))
            .then(|| base_note.to_string()),
        nodes_changed,
        changes: caused,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn entry(role: Role, label: &str) -> Entry {
        Entry {
            role,
            label: label.into(),
        }
    }

    fn tree(items: &[(&str, Role, &str)]) -> SignedTree {
        let mut t = SignedTree {
            root: "plants".into(),
            entries: BTreeMap::new(),
        };
        for (id, r, l) in items {
            t.entries.insert(id.to_string(), entry(r.clone(), l));
        }
        t
    }

    #[test]
    fn every_kind_of_change_applies_back() {
        let n = |p: &str| Role::Node(Some(p.to_string()));
        let old = tree(&[
            ("plants", Role::Node(None), "Plants"),
            ("fern", n("plants"), "Fern"),
            ("moss", n("plants"), "Moss"),
            ("cactus", n("plants"), "Cactus"),
            ("aloe", Role::Alias("cactus".into()), "Aloe"),
            ("hosta", Role::Excluded, "Hosta"),
            ("ivy", n("fern"), "Ivy"),
        ]);
        let new = tree(&[
            ("plants", Role::Node(None), "Plants"),
            ("fern", n("moss"), "Ferns"),
            ("moss", n("plants"), "Moss"),
            ("cactus", Role::Alias("moss".into()), "Cactus"),
            ("aloe", n("plants"), "Aloe"),
            ("hosta", n("fern"), "Hosta"),
            ("sedge", Role::Excluded, "Sedge"),
        ]);
        let is_phrase = |id: &str| id != "ivy";
        let d = diff(&old, &new, &is_phrase);
        let text: Vec<String> = d.iter().map(|c| c.to_string()).collect();
        assert_eq!(
            text,
            vec![
                "placed    aloe under plants",
                "merged    cactus into moss",
                "moved     fern: plants → moss",
                "renamed   fern: \"Fern\" → \"Ferns\"",
                "included  hosta under fern",
                "vanished  ivy (no longer a phrase)",
                "excluded  sedge",
            ]
        );
        let mut back = old.clone();
        back.apply(&d);
        assert_eq!(back, new);
        assert_eq!(back.to_canonical(), new.to_canonical());
    }
}
