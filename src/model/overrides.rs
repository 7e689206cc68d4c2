//! The override layer: the ordered list of human edits, how it is applied to a base tree,
//! and how it is stored (`overrides.json`).
//!
//! [`apply`] is a pure function: base tree + edits → effective tree + problems. Edits are
//! applied in file order; an edit that no longer fits (its phrase vanished after re-training,
//! a reparent that would make a cycle, a merge into an excluded node, ...) is skipped and
//! reported as an [`ApplyProblem`] with its index and reason, never dropped from the file.
//!
//! File format (version 2; version 1, without the hash chain, is still read):
//! `{"format": "treewright-overrides", "version": 2, "edits": [EditRecord + "prev", ...]}`.
//! The chain and reverts are [`super::history`].

use std::path::Path;

use sha2::{Digest, Sha256};

use super::edit::{Edit, EditRecord, ReviewStatus};
use super::effective::{ApplyProblem, EffectiveTree};
use super::fsutil;
use super::gaussian::PhraseId;
use super::history;
use super::lang::PhraseLanguages;
use super::lock::{LockError, ProjectLock};
use super::phrase::PhraseTable;
pub use super::refusal::{EditRefusal, Role};
use super::tree::Tree;

pub use super::time::{now_rfc3339, rfc3339_from_unix};

mod append_only;
mod file_format;
pub use file_format::{
    parse_override_file, parse_overrides, serialize_override_file, serialize_overrides,
};

/// The `format` value of an override file.
pub const OVERRIDES_FORMAT: &str = "treewright-overrides";
/// The override file version this build writes (it also reads version 1).
pub const OVERRIDES_VERSION: u32 = 2;

/// Why the override layer could not be loaded or saved. Every variant names the file.
#[derive(Debug, thiserror::Error)]
pub enum OverrideError {
    /// Reading or writing failed.
    #[error("{file}: {source}")]
    Io {
        /// The file.
        file: String,
        /// The OS error.
        source: std::io::Error,
    },
    /// The file is not valid JSON of the expected shape.
    #[error("{file}:{line}:{column}: {message}")]
    Corrupt {
        /// The file.
        file: String,
        /// 1-based line.
        line: usize,
        /// 1-based column.
        column: usize,
        /// serde_json's message.
        message: String,
    },
    /// The `format` field is not `treewright-overrides`.
    #[error("{file}: format: is \"{found}\", expected \"{OVERRIDES_FORMAT}\"")]
    WrongFormat {
        /// The file.
        file: String,
        /// What the file says.
        found: String,
    },
    /// The file has a version this build cannot read.
    #[error("{file}: version: is {found}, this build reads versions 1 and {OVERRIDES_VERSION}")]
    UnknownVersion {
        /// The file.
        file: String,
        /// What the file says.
        found: u64,
    },
    /// Someone else changed the file since it was loaded or last saved.
    #[error(
        "{file}: changed on disk since it was loaded; not overwriting it (reload to see the other changes)"
    )]
    ChangedOnDisk {
        /// The file.
        file: String,
    },
    /// The project lock could not be taken (another writer held it too long).
    #[error(transparent)]
    Lock(#[from] LockError),
    /// The file is the result of a merge with conflicts that are not resolved yet.
    #[error(
        "{file}: conflicts: {count} unresolved merge conflict(s) ({ids}); resolve each with `treewright resolve PROJECT ID ours|theirs` (or in the workbench) before using the file"
    )]
    Unresolved {
        /// The file.
        file: String,
        /// How many conflicts.
        count: usize,
        /// Their ids, comma-separated.
        ids: String,
    },
    /// The hash chain does not hold: a past edit was deleted, reordered or changed.
    #[error("{file}: {detail}")]
    HistoryChanged {
        /// The file.
        file: String,
        /// `edit #N does not follow #N-1: history was changed`.
        detail: String,
    },
    /// A save would remove or change an edit that is already in the file.
    #[error(
        "{file}: edit #{index} would be removed or changed; the history is append-only (undo appends a revert)"
    )]
    AppendOnly {
        /// The file.
        file: String,
        /// The first edit that would change.
        index: usize,
    },
}

/// What the file looked like when we last read or wrote it.
#[derive(Debug, Clone, PartialEq, Eq)]
enum Fingerprint {
    /// The file did not exist.
    Missing,
    /// Length and SHA-256 of its bytes.
    Present { len: u64, sha256: [u8; 32] },
}

impl Fingerprint {
    fn of_bytes(bytes: &[u8]) -> Self {
        Fingerprint::Present {
            len: bytes.len() as u64,
            sha256: Sha256::digest(bytes).into(),
        }
    }

    fn of_file(path: &Path) -> Result<Self, OverrideError> {
        match std::fs::read(path) {
            Ok(b) => Ok(Self::of_bytes(&b)),
            Err(e) if e.kind() == std::io::ErrorKind::NotFound => Ok(Fingerprint::Missing),
            Err(source) => Err(OverrideError::Io {
                file: path.display().to_string(),
                source,
            }),
        }
    }
}

/// The ordered edits of a project with undo/redo stacks and the on-disk fingerprint.
#[derive(Debug, Clone)]
pub struct OverrideLayer {
    /// The edits in file order.
    pub edits: Vec<EditRecord>,
    redo: Vec<Redo>,
    saved: Vec<EditRecord>,
    disk: Fingerprint,
    merges: Vec<MergeStep>,
    author: String,
}

/// The edits with the saving reference point (edits and file as last loaded or saved): what
/// undoing or redoing a merge with the file on disk puts back.
#[derive(Debug, Clone)]
pub struct LayerState {
    edits: Vec<EditRecord>,
    saved: Vec<EditRecord>,
    disk: Fingerprint,
}

/// A merge with the file on disk as one undo step: the layer before and after it.
#[derive(Debug, Clone)]
struct MergeStep {
    before: LayerState,
    after: LayerState,
}

/// One step on the redo stack.
#[derive(Debug, Clone)]
enum Redo {
    Edit(EditRecord),
    Merge(Box<MergeStep>),
    /// Undo appended a revert: redo reverts it (or drops it while it is unsaved).
    Revert,
}

/// What one undo or redo step did.
#[derive(Debug, Clone, PartialEq)]
pub enum Step {
    /// One edit was dropped (undo) or re-appended (redo).
    Edit(EditRecord),
    /// A whole merge with the file on disk was undone or redone: the edit count went from
    /// `from` to `to`.
    Merge {
        /// Edits before the step.
        from: usize,
        /// Edits after the step.
        to: usize,
    },
}

impl Default for OverrideLayer {
    fn default() -> Self {
        OverrideLayer {
            edits: Vec::new(),
            redo: Vec::new(),
            saved: Vec::new(),
            disk: Fingerprint::Missing,
            merges: Vec::new(),
            author: "workbench".into(),
        }
    }
}

impl OverrideLayer {
    /// An empty layer whose file does not exist yet.
    pub fn new() -> Self {
        Self::default()
    }

    /// Load `path`. A missing file is an empty layer; a corrupt file or an unknown
    /// format/version is an error, never an empty layer.
    pub fn load(path: &Path) -> Result<Self, OverrideError> {
        let file = path.display().to_string();
        let bytes = match std::fs::read(path) {
            Ok(b) => b,
            Err(e) if e.kind() == std::io::ErrorKind::NotFound => return Ok(Self::default()),
            Err(source) => return Err(OverrideError::Io { file, source }),
        };
        let edits = parse_overrides(&bytes, &file)?;
        Ok(OverrideLayer {
            saved: edits.clone(),
            edits,
            redo: Vec::new(),
            disk: Fingerprint::of_bytes(&bytes),
            merges: Vec::new(),
            author: "workbench".into(),
        })
    }

    /// Save atomically (temporary file, fsync, rename, folder fsync) keeping the previous
    /// file as `<name>.bak`, under the project lock (see [`super::lock`]). Refuses with
    /// [`OverrideError::ChangedOnDisk`] when the file was changed by someone else since it was
    /// loaded or last saved; the check and the write happen under the lock, so no other
    /// writer can slip in between them.
    pub fn save(&mut self, path: &Path) -> Result<(), OverrideError> {
        let lock = ProjectLock::acquire(&super::lock::dir_of(path))?;
        self.save_locked(path, &lock)
    }

    /// [`OverrideLayer::save`] for a caller that already holds the project lock.
    pub fn save_locked(&mut self, path: &Path, _lock: &ProjectLock) -> Result<(), OverrideError> {
        let file = path.display().to_string();
        if self.changed_on_disk(path)? {
            return Err(OverrideError::ChangedOnDisk { file });
        }
        if let Some(index) =
            (0..self.saved.len()).find(|&i| self.edits.get(i) != Some(&self.saved[i]))
        {
            return Err(OverrideError::AppendOnly { file, index });
        }
        self.write_unchecked(path)
    }

    pub(crate) fn write_unchecked(&mut self, path: &Path) -> Result<(), OverrideError> {
        let file = path.display().to_string();
        let bytes = serialize_overrides(&self.edits);
        fsutil::atomic_write(path, &bytes, true)
            .map_err(|source| OverrideError::Io { file, source })?;
        self.disk = Fingerprint::of_bytes(&bytes);
        self.saved = self.edits.clone();
        Ok(())
    }

    /// Whether `path` differs from what this layer last loaded or saved (a missing file
    /// counts as what it was: missing).
    pub fn changed_on_disk(&self, path: &Path) -> Result<bool, OverrideError> {
        Ok(Fingerprint::of_file(path)? != self.disk)
    }

    /// The edits as they were last loaded or saved: the common ancestor when the file on
    /// disk changed meanwhile (see [`super::merge`]).
    pub fn saved_edits(&self) -> &[EditRecord] {
        &self.saved
    }

    /// Read the file on disk as the new reference point for saving and return its edits
    /// (the other side of a merge); the layer's own edits are left as they are. After the
    /// caller puts the merged edits in [`OverrideLayer::edits`], [`OverrideLayer::save`]
    /// writes them unless the file changed yet again. A file with unresolved conflicts is
    /// refused.
    pub fn take_disk(&mut self, path: &Path) -> Result<Vec<EditRecord>, OverrideError> {
        let file = path.display().to_string();
        let (edits, disk) = match std::fs::read(path) {
            Ok(b) => (parse_overrides(&b, &file)?, Fingerprint::of_bytes(&b)),
            Err(e) if e.kind() == std::io::ErrorKind::NotFound => {
                (Vec::new(), Fingerprint::Missing)
            }
            Err(source) => return Err(OverrideError::Io { file, source }),
        };
        self.disk = disk;
        self.saved = edits.clone();
        Ok(edits)
    }

    /// Append an edit; clears the redo stack.
    pub fn push(&mut self, r: EditRecord) {
        self.edits.push(r);
        self.redo.clear();
    }

    /// Re-append the last undone edit (`None` when the next redo is a merge, see
    /// [`OverrideLayer::redo_step`]).
    pub fn redo(&mut self) -> Option<EditRecord> {
        if matches!(self.redo.last()?, Redo::Merge(_)) {
            return None;
        }
        match self.redo_step()? {
            Step::Edit(r) => Some(r),
            Step::Merge { .. } => None,
        }
    }

    /// The layer as it stands, to pass to [`OverrideLayer::record_merge`] after a merge.
    pub fn state(&self) -> LayerState {
        LayerState {
            edits: self.edits.clone(),
            saved: self.saved.clone(),
            disk: self.disk.clone(),
        }
    }

    /// Record that a merge with the file on disk turned `before` into the layer as it stands
    /// now, so that one undo step takes the whole merge back. Undoing it also puts back the
    /// reference point of `before`: the merged file is still on disk, so the next save is
    /// refused as changed on disk and offers the merge again instead of writing the other
    /// side's edits away. Clears the redo stack like any new step.
    pub fn record_merge(&mut self, before: LayerState) {
        let after = self.state();
        self.merges.push(MergeStep { before, after });
        self.redo.clear();
    }

    /// Whether the last step is a merge (edits unchanged since it). A merge whose edits are
    /// gone some other way is forgotten.
    fn merge_on_top(&mut self) -> bool {
        while let Some(m) = self.merges.last() {
            if self.edits.len() < m.after.edits.len() {
                self.merges.pop();
                continue;
            }
            return self.edits == m.after.edits;
        }
        false
    }

    fn put_back(&mut self, s: &LayerState) {
        self.edits = s.edits.clone();
        self.saved = s.saved.clone();
        self.disk = s.disk.clone();
    }

    /// Undo the last step: one edit, or a whole merge with the file on disk (see
    /// [`OverrideLayer::record_merge`]).
    pub fn undo_step(&mut self) -> Option<Step> {
        if self.merge_on_top() {
            let m = self.merges.pop()?;
            let from = self.edits.len();
            self.put_back(&m.before);
            let to = self.edits.len();
            self.redo.push(Redo::Merge(Box::new(m)));
            return Some(Step::Merge { from, to });
        }
        self.undo().map(Step::Edit)
    }

    /// Redo the last undone step.
    pub fn redo_step(&mut self) -> Option<Step> {
        match self.redo.pop()? {
            Redo::Edit(r) => {
                self.edits.push(r.clone());
                Some(Step::Edit(r))
            }
            Redo::Revert => self.redo_revert().map(Step::Edit),
            Redo::Merge(m) => {
                let from = self.edits.len();
                self.put_back(&m.after);
                let to = self.edits.len();
                self.merges.push(*m);
                Some(Step::Merge { from, to })
            }
        }
    }

    /// Whether there is a step to undo.
    pub fn can_undo(&self) -> bool {
        history::undo_target(&self.edits).is_some()
            || self.merges.last().is_some_and(|m| m.after.edits.is_empty())
    }

    /// Whether there is an undone step to redo.
    pub fn can_redo(&self) -> bool {
        !self.redo.is_empty()
    }

    /// Whether the edits differ from what was last loaded or saved.
    pub fn is_dirty(&self) -> bool {
        self.edits != self.saved
    }
}

/// Wrap an edit with its author, the current time and an optional note.
pub fn record(edit: Edit, author: &str, note: Option<String>) -> EditRecord {
    EditRecord {
        edit,
        author: author.to_string(),
        time: now_rfc3339(),
        note,
    }
}

/// The check of a rename (in the default or another language).
mod rename;

/// Working state of [`apply`]: a mutable tree plus the per-phrase layers.
#[derive(Debug, Clone)]
struct State {
    root: PhraseId,
    parent: Vec<Option<PhraseId>>,
    children: Vec<Vec<PhraseId>>,
    placed: Vec<bool>,
    labels: Vec<String>,
    alias_of: Vec<Option<PhraseId>>,
    aliases: Vec<Vec<PhraseId>>,
    excluded: Vec<bool>,
    pinned: Vec<bool>,
    review: Vec<ReviewStatus>,
    review_comment: Vec<String>,
    /// Default language and labels in the other languages.
    languages: PhraseLanguages,
    /// For an excluded phrase: the parent it had and the children that moved up, so that
    /// `include` can put them back.
    excluded_from: Vec<Option<(PhraseId, Vec<PhraseId>)>>,
    /// Base-tree parent of every phrase (include's fallback).
    base_parent: Vec<Option<PhraseId>>,
}

impl State {
    fn from_effective(eff: &EffectiveTree) -> Self {
        let n = eff.labels.len();
        let t = &eff.tree;
        let parent: Vec<Option<PhraseId>> = (0..n as PhraseId).map(|p| t.parent(p)).collect();
        State {
            root: t.root(),
            children: (0..n as PhraseId).map(|p| t.children(p).to_vec()).collect(),
            placed: (0..n as PhraseId).map(|p| t.is_placed(p)).collect(),
            base_parent: parent.clone(),
            parent,
            labels: eff.labels.clone(),
            alias_of: eff.alias_of.clone(),
            aliases: eff.aliases.clone(),
            excluded: eff.excluded.clone(),
            pinned: eff.pinned.clone(),
            review: eff.review.clone(),
            review_comment: eff.review_comment.clone(),
            languages: eff.languages.clone(),
            excluded_from: vec![None; n],
        }
    }

    fn detach(&mut self, c: PhraseId) {
        if let Some(p) = self.parent[c as usize].take() {
            let ch = &mut self.children[p as usize];
            if let Some(i) = ch.iter().position(|&x| x == c) {
                ch.remove(i);
            }
        }
    }

    fn attach(&mut self, c: PhraseId, p: PhraseId) {
        self.detach(c);
        self.parent[c as usize] = Some(p);
        self.children[p as usize].push(c);
        self.placed[c as usize] = true;
    }

    /// Take a node out of the tree, moving its children to `to`.
    fn unplace(&mut self, x: PhraseId, to: PhraseId) -> Vec<PhraseId> {
        let kids = std::mem::take(&mut self.children[x as usize]);
        for &c in &kids {
            self.parent[c as usize] = None;
            self.attach(c, to);
        }
        self.detach(x);
        self.placed[x as usize] = false;
        kids
    }

    fn into_effective(self, phrases: &PhraseTable) -> Option<EffectiveTree> {
        let n = self.labels.len();
        let edges: Vec<(PhraseId, PhraseId)> = (0..n as PhraseId)
            .filter_map(|c| self.parent[c as usize].map(|p| (c, p)))
            .collect();
        let tree = Tree::from_edges(phrases, self.root, &edges).ok()?;
        let mut aliases = self.aliases;
        for a in &mut aliases {
            a.sort_unstable();
        }
        Some(EffectiveTree {
            tree,
            labels: self.labels,
            alias_of: self.alias_of,
            aliases,
            excluded: self.excluded,
            pinned: self.pinned,
            review: self.review,
            review_comment: self.review_comment,
            languages: self.languages,
        })
    }
}

/// Read access to the layered state, shared by [`apply`]'s working state and by a finished
/// [`EffectiveTree`] so that [`check_edit`] validates without copying the tree.
trait View {
    fn root(&self) -> PhraseId;
    fn parent(&self, p: PhraseId) -> Option<PhraseId>;
    fn is_node(&self, p: PhraseId) -> bool;
    fn alias_of(&self, p: PhraseId) -> Option<PhraseId>;
    fn excluded(&self, p: PhraseId) -> bool;
    fn pinned(&self, p: PhraseId) -> bool;
    fn label(&self, p: PhraseId) -> &str;
    /// The default language and the labels in the others.
    fn languages(&self) -> &PhraseLanguages;
    /// True when `a` is a proper ancestor of `b`.
    fn is_ancestor(&self, a: PhraseId, b: PhraseId) -> bool {
        let mut cur = self.parent(b);
        while let Some(x) = cur {
            if x == a {
                return true;
            }
            cur = self.parent(x);
        }
        false
    }
}

impl View for State {
    fn root(&self) -> PhraseId {
        self.root
    }
    fn parent(&self, p: PhraseId) -> Option<PhraseId> {
        self.parent[p as usize]
    }
    fn is_node(&self, p: PhraseId) -> bool {
        self.placed[p as usize]
    }
    fn alias_of(&self, p: PhraseId) -> Option<PhraseId> {
        self.alias_of[p as usize]
    }
    fn excluded(&self, p: PhraseId) -> bool {
        self.excluded[p as usize]
    }
    fn pinned(&self, p: PhraseId) -> bool {
        self.pinned[p as usize]
    }
    fn label(&self, p: PhraseId) -> &str {
        &self.labels[p as usize]
    }
    fn languages(&self) -> &PhraseLanguages {
        &self.languages
    }
}

impl View for EffectiveTree {
    fn root(&self) -> PhraseId {
        self.tree.root()
    }
    fn parent(&self, p: PhraseId) -> Option<PhraseId> {
        self.tree.parent(p)
    }
    fn is_node(&self, p: PhraseId) -> bool {
        self.tree.is_placed(p)
    }
    fn alias_of(&self, p: PhraseId) -> Option<PhraseId> {
        self.alias_of[p as usize]
    }
    fn excluded(&self, p: PhraseId) -> bool {
        self.excluded[p as usize]
    }
    fn pinned(&self, p: PhraseId) -> bool {
        self.pinned[p as usize]
    }
    fn label(&self, p: PhraseId) -> &str {
        &self.labels[p as usize]
    }
    fn languages(&self) -> &PhraseLanguages {
        &self.languages
    }
}

/// What a validated edit will do, with ids resolved to rows.
enum Plan {
    Move(PhraseId, PhraseId),
    Pin(PhraseId, PhraseId),
    Unpin(PhraseId),
    Merge(Vec<PhraseId>, PhraseId),
    Rename(PhraseId, String),
    RenameIn(PhraseId, String, String),
    Exclude(PhraseId),
    Include(PhraseId),
    Review(PhraseId, ReviewStatus, String),
    Nothing,
}

fn lookup(phrases: &PhraseTable, id: &str) -> Result<PhraseId, EditRefusal> {
    phrases
        .get(id)
        .ok_or_else(|| EditRefusal::Stale { id: id.to_string() })
}

/// Why `p` cannot take part as a tree node, if it cannot.
fn node_problem(
    s: &impl View,
    phrases: &PhraseTable,
    p: PhraseId,
    role: Role,
) -> Option<EditRefusal> {
    let id = phrases.id(p).to_string();
    if let Some(t) = s.alias_of(p) {
        return Some(EditRefusal::RoleMerged {
            role,
            id,
            into: phrases.id(t).to_string(),
        });
    }
    if s.excluded(p) {
        return Some(EditRefusal::RoleExcluded { role, id });
    }
    if !s.is_node(p) {
        return Some(EditRefusal::RoleNotInTree { role, id });
    }
    None
}

fn validate(s: &impl View, phrases: &PhraseTable, edit: &Edit) -> Result<Plan, EditRefusal> {
    let id = |p: PhraseId| phrases.id(p).to_string();
    let own = |x: &str| x.to_string();
    match edit {
        Edit::Reparent { node, parent } | Edit::Pin { node, parent } => {
            let is_pin = matches!(edit, Edit::Pin { .. });
            let x = lookup(phrases, node)?;
            let p = lookup(phrases, parent)?;
            if x == s.root() {
                return Err(EditRefusal::RootHasNoParent { node: own(node) });
            }
            if x == p {
                return Err(EditRefusal::OwnParent { node: own(node) });
            }
            if let Some(t) = s.alias_of(x) {
                return Err(EditRefusal::Merged {
                    node: own(node),
                    into: id(t),
                });
            }
            if s.excluded(x) {
                return Err(EditRefusal::ExcludedIncludeFirst { node: own(node) });
            }
            if is_pin && !s.is_node(x) {
                return Err(EditRefusal::NotInTree { node: own(node) });
            }
            if let Some(why) = node_problem(s, phrases, p, Role::Parent) {
                return Err(why);
            }
            if s.is_node(x) && s.is_ancestor(x, p) {
                return Err(EditRefusal::Cycle {
                    node: own(node),
                    parent: own(parent),
                });
            }
            if !is_pin && s.pinned(x) && s.parent(x) != Some(p) {
                return Err(EditRefusal::Pinned {
                    node: own(node),
                    under: s.parent(x).map(id).unwrap_or_default(),
                });
            }
            Ok(if is_pin {
                Plan::Pin(x, p)
            } else {
                Plan::Move(x, p)
            })
        }
        Edit::Unpin { node } => {
            let x = lookup(phrases, node)?;
            if !s.pinned(x) {
                return Err(EditRefusal::NotPinned { node: own(node) });
            }
            Ok(Plan::Unpin(x))
        }
        Edit::Merge { sources, into } => {
            let t = lookup(phrases, into)?;
            if sources.is_empty() {
                return Err(EditRefusal::NoSource);
            }
            if let Some(why) = node_problem(s, phrases, t, Role::Target) {
                return Err(why);
            }
            let mut rows = Vec::with_capacity(sources.len());
            for src in sources {
                let x = lookup(phrases, src)?;
                if x == t {
                    return Err(EditRefusal::MergeIntoItself {
                        source_id: own(src),
                    });
                }
                if rows.contains(&x) {
                    return Err(EditRefusal::ListedTwice {
                        source_id: own(src),
                    });
                }
                if x == s.root() {
                    return Err(EditRefusal::SourceIsRoot {
                        source_id: own(src),
                    });
                }
                if let Some(why) = node_problem(s, phrases, x, Role::Source) {
                    return Err(why);
                }
                rows.push(x);
            }
            Ok(Plan::Merge(rows, t))
        }
        Edit::Rename {
            node,
            label,
            language,
        } => rename::plan(s, phrases, node, label, language.as_deref()),
        Edit::Exclude { node } => {
            let x = lookup(phrases, node)?;
            if x == s.root() {
                return Err(EditRefusal::RootExcluded { node: own(node) });
            }
            if let Some(t) = s.alias_of(x) {
                return Err(EditRefusal::Merged {
                    node: own(node),
                    into: id(t),
                });
            }
            if s.excluded(x) {
                return Err(EditRefusal::AlreadyExcluded { node: own(node) });
            }
            Ok(Plan::Exclude(x))
        }
        Edit::Include { node } => {
            let x = lookup(phrases, node)?;
            if !s.excluded(x) {
                return Err(EditRefusal::NotExcluded { node: own(node) });
            }
            Ok(Plan::Include(x))
        }
        Edit::Review {
            node,
            status,
            comment,
        } => {
            let x = lookup(phrases, node)?;
            if let Some(t) = s.alias_of(x) {
                return Err(EditRefusal::Merged {
                    node: own(node),
                    into: id(t),
                });
            }
            Ok(Plan::Review(x, *status, comment.clone()))
        }
        // a revert is checked against the edits ([`history::revert_problem`]), not the tree
        Edit::Signoff { .. } | Edit::Revert { .. } => Ok(Plan::Nothing),
    }
}

fn execute(s: &mut State, plan: Plan) {
    match plan {
        Plan::Move(x, p) => s.attach(x, p),
        Plan::Pin(x, p) => {
            s.attach(x, p);
            s.pinned[x as usize] = true;
        }
        Plan::Unpin(x) => s.pinned[x as usize] = false,
        Plan::Merge(sources, t) => {
            for x in sources {
                if s.is_ancestor(x, t) {
                    // the target takes the source's place before the source's children move
                    if let Some(gp) = s.parent[x as usize] {
                        s.attach(t, gp);
                    }
                }
                s.unplace(x, t);
                s.pinned[x as usize] = false;
                s.alias_of[x as usize] = Some(t);
                let moved = std::mem::take(&mut s.aliases[x as usize]);
                for &a in &moved {
                    s.alias_of[a as usize] = Some(t);
                }
                s.aliases[t as usize].push(x);
                s.aliases[t as usize].extend(moved);
            }
        }
        Plan::Rename(x, label) => s.labels[x as usize] = label,
        Plan::RenameIn(x, language, label) => {
            s.languages
                .other
                .entry(x)
                .or_default()
                .insert(language, label);
        }
        Plan::Exclude(x) => {
            if s.is_node(x) {
                let up = s.parent[x as usize].unwrap_or(s.root);
                let kids = s.unplace(x, up);
                s.excluded_from[x as usize] = Some((up, kids));
            } else {
                s.excluded_from[x as usize] = None;
            }
            s.pinned[x as usize] = false;
            s.excluded[x as usize] = true;
        }
        Plan::Include(x) => {
            s.excluded[x as usize] = false;
            let Some((up, kids)) = s.excluded_from[x as usize].take() else {
                return;
            };
            // back under the parent it had, or the node that parent was merged into, or the
            // nearest such base ancestor, or the root
            let usable = |s: &State, p: PhraseId| {
                let mut r = p;
                while let Some(t) = s.alias_of[r as usize] {
                    r = t;
                }
                (s.is_node(r) && r != x).then_some(r)
            };
            let mut target = usable(s, up);
            let mut cur = s.base_parent[x as usize];
            while target.is_none() {
                match cur {
                    Some(a) => {
                        target = usable(s, a);
                        cur = s.base_parent[a as usize];
                    }
                    None => target = Some(s.root),
                }
            }
            let target = target.unwrap_or(s.root);
            s.attach(x, target);
            for c in kids {
                let ci = c as usize;
                if s.is_node(c) && s.parent[ci] == Some(target) && !s.pinned[ci] {
                    s.attach(c, x);
                }
            }
        }
        Plan::Review(x, status, comment) => {
            s.review[x as usize] = status;
            s.review_comment[x as usize] = comment;
        }
        Plan::Nothing => {}
    }
}

/// Apply `edits` in order to `base`: the effective tree and the edits that were skipped.
///
/// Deterministic and pure. The result is always a valid tree with the base root: every
/// phrase is exactly one of a node, an alias, an excluded phrase or an unplaced phrase.
pub fn apply(
    base: &Tree,
    phrases: &PhraseTable,
    edits: &[EditRecord],
) -> (EffectiveTree, Vec<ApplyProblem>) {
    let start = EffectiveTree::from_base(base, phrases);
    let mut s = State::from_effective(&start);
    let mut problems = Vec::new();
    let reverted = history::reverted_by(edits);
    for (index, r) in edits.iter().enumerate() {
        if reverted[index].is_some() {
            continue;
        }
        if let Some(reason) = history::revert_problem(edits, index) {
            problems.push(ApplyProblem {
                index,
                op: r.edit.op().to_string(),
                reason,
            });
            continue;
        }
        match validate(&s, phrases, &r.edit) {
            Ok(plan) => execute(&mut s, plan),
            Err(reason) => problems.push(ApplyProblem {
                index,
                op: r.edit.op().to_string(),
                reason: reason.to_string(),
            }),
        }
    }
    match s.into_effective(phrases) {
        Some(eff) => (eff, problems),
        // unreachable by construction (each step keeps one root and no cycle); stay safe
        None => {
            problems.push(ApplyProblem {
                index: edits.len(),
                op: "apply".into(),
                reason: "internal: the edits produced an invalid tree; showing the base tree"
                    .into(),
            });
            (start, problems)
        }
    }
}

/// Would `edit` apply to the effective tree as it stands? `Err` carries the reason shown to
/// the user (the GUI refuses a drop with it, the CLI exits 2 with it).
pub fn check_edit(
    eff: &EffectiveTree,
    phrases: &PhraseTable,
    edit: &Edit,
) -> Result<(), EditRefusal> {
    if eff.labels.len() != phrases.len() {
        return Err(EditRefusal::ForeignTree);
    }
    validate(eff, phrases, edit).map(|_| ())
}

/// Nodes of the effective tree whose review state is `unreviewed`.
pub fn unreviewed_count(eff: &EffectiveTree) -> usize {
    (0..eff.labels.len() as PhraseId)
        .filter(|&p| eff.tree.is_placed(p) && eff.review[p as usize] == ReviewStatus::Unreviewed)
        .count()
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::collections::BTreeMap;

    pub(crate) fn table(ids: &[&str]) -> PhraseTable {
        PhraseTable::from_ids(ids).unwrap()
    }

    fn tree(t: &PhraseTable, root: &str, pairs: &[(&str, &str)]) -> Tree {
        let m: BTreeMap<String, String> = pairs
            .iter()
            .map(|(a, b)| (a.to_string(), b.to_string()))
            .collect();
        Tree::from_id_map(t, root, &m).unwrap()
    }

    fn rec(e: Edit) -> EditRecord {
        EditRecord {
            edit: e,
            author: "ines".into(),
            time: "2026-12-02T10:00:00Z".into(),
            note: None,
        }
    }

    fn garden() -> (PhraseTable, Tree) {
        let t = table(&[
            "plants",
            "drought-tolerant",
            "succulent",
            "cactus",
            "shade-loving",
            "fern",
            "hosta",
            "compost",
        ]);
        let tr = tree(
            &t,
            "plants",
            &[
                ("drought-tolerant", "plants"),
                ("succulent", "drought-tolerant"),
                ("cactus", "succulent"),
                ("shade-loving", "plants"),
                ("fern", "shade-loving"),
                ("hosta", "shade-loving"),
            ],
        );
        (t, tr)
    }

    fn parent_id<'a>(eff: &EffectiveTree, t: &'a PhraseTable, id: &str) -> Option<&'a str> {
        eff.tree.parent(t.get(id).unwrap()).map(|p| t.id(p))
    }

    #[test]
    fn rfc3339_matches_known_instants() {
        // Unix epoch by definition (POSIX.1-2017, "Seconds Since the Epoch")
        assert_eq!(rfc3339_from_unix(0), "1970-01-01T00:00:00Z");
        // the widely reported one-billion-second instant, 2001-09-09 01:46:40 UTC
        assert_eq!(rfc3339_from_unix(1_000_000_000), "2001-09-09T01:46:40Z");
        // leap day of a year divisible by 400 (Gregorian rule): 2000-02-29 = day 11016
        assert_eq!(rfc3339_from_unix(11_016 * 86_400), "2000-02-29T00:00:00Z");
        assert_eq!(rfc3339_from_unix(-1), "1969-12-31T23:59:59Z");
        let now = now_rfc3339();
        assert_eq!(now.len(), 20, "{now}");
        assert!(now.ends_with('Z'));
    }

    #[test]
    fn merge_moves_children_and_keeps_aliases() {
        let (t, base) = garden();
        let e = [rec(Edit::Merge {
            sources: vec!["shade-loving".into()],
            into: "drought-tolerant".into(),
        })];
        let (eff, probs) = apply(&base, &t, &e);
        assert!(probs.is_empty(), "{probs:?}");
        let sl = t.get("shade-loving").unwrap();
        let dt = t.get("drought-tolerant").unwrap();
        assert_eq!(eff.alias_of[sl as usize], Some(dt));
        assert_eq!(eff.aliases[dt as usize], vec![sl]);
        assert!(!eff.tree.is_placed(sl));
        assert_eq!(parent_id(&eff, &t, "fern"), Some("drought-tolerant"));
        assert_eq!(eff.resolve(sl), dt);
    }

    #[test]
    fn merging_an_ancestor_into_its_descendant_keeps_a_tree() {
        let (t, base) = garden();
        let e = [rec(Edit::Merge {
            sources: vec!["drought-tolerant".into()],
            into: "cactus".into(),
        })];
        let (eff, probs) = apply(&base, &t, &e);
        assert!(probs.is_empty(), "{probs:?}");
        assert_eq!(parent_id(&eff, &t, "cactus"), Some("plants"));
        assert_eq!(parent_id(&eff, &t, "succulent"), Some("cactus"));
    }

    #[test]
    fn refusals_are_reported_with_index() {
        let (t, base) = garden();
        let e = [
            rec(Edit::Reparent {
                node: "drought-tolerant".into(),
                parent: "cactus".into(),
            }),
            rec(Edit::Exclude {
                node: "plants".into(),
            }),
            rec(Edit::Exclude {
                node: "compost".into(),
            }),
            rec(Edit::Merge {
                sources: vec!["fern".into()],
                into: "compost".into(),
            }),
            rec(Edit::Rename {
                node: "gone".into(),
                label: "x".into(),
                language: None,
            }),
        ];
        let (eff, probs) = apply(&base, &t, &e);
        let idx: Vec<usize> = probs.iter().map(|p| p.index).collect();
        assert_eq!(idx, vec![0, 1, 3, 4], "{probs:?}");
        assert!(probs[0].reason.contains("cycle"));
        assert!(probs[1].reason.contains("root"));
        assert!(probs[2].reason.contains("excluded"));
        assert!(probs[3].is_stale());
        assert!(!probs[0].is_stale());
        assert!(eff.excluded[t.get("compost").unwrap() as usize]);
        assert_eq!(eff.tree, base);
    }

    #[test]
    fn exclude_then_include_restores_structure() {
        let (t, base) = garden();
        let ex = rec(Edit::Exclude {
            node: "shade-loving".into(),
        });
        let (eff, _) = apply(&base, &t, std::slice::from_ref(&ex));
        assert_eq!(parent_id(&eff, &t, "fern"), Some("plants"));
        assert!(!eff.tree.is_placed(t.get("shade-loving").unwrap()));
        let inc = rec(Edit::Include {
            node: "shade-loving".into(),
        });
        let (eff2, probs) = apply(&base, &t, &[ex, inc]);
        assert!(probs.is_empty());
        assert_eq!(eff2.tree, base);
    }

    #[test]
    fn pins_hold_and_block_reparent() {
        let (t, base) = garden();
        let e = [
            rec(Edit::Pin {
                node: "hosta".into(),
                parent: "drought-tolerant".into(),
            }),
            rec(Edit::Reparent {
                node: "hosta".into(),
                parent: "fern".into(),
            }),
            rec(Edit::Unpin {
                node: "hosta".into(),
            }),
            rec(Edit::Review {
                node: "hosta".into(),
                status: ReviewStatus::Approved,
                comment: "ok".into(),
            }),
        ];
        let (eff, probs) = apply(&base, &t, &e);
        assert_eq!(probs.len(), 1);
        assert_eq!(probs[0].index, 1);
        assert!(probs[0].reason.contains("pinned"));
        assert_eq!(parent_id(&eff, &t, "hosta"), Some("drought-tolerant"));
        let h = t.get("hosta").unwrap() as usize;
        assert!(!eff.pinned[h]);
        assert_eq!(eff.review[h], ReviewStatus::Approved);
        assert_eq!(unreviewed_count(&eff), 6);
        assert!(check_edit(&eff, &t, &e[1].edit).is_ok());
    }

    #[test]
    fn file_round_trip_and_errors() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("overrides.json");
        let mut layer = OverrideLayer::load(&p).unwrap();
        assert!(layer.edits.is_empty() && !layer.is_dirty());
        layer.push(rec(Edit::Exclude {
            node: "fern".into(),
        }));
        assert!(layer.is_dirty());
        layer.save(&p).unwrap();
        assert!(!layer.is_dirty());
        let text = std::fs::read_to_string(&p).unwrap();
        assert!(text.contains("\"format\": \"treewright-overrides\""));
        assert!(text.contains("\"version\": 2"));
        assert!(text.contains(&format!("\"prev\": \"{}\"", history::header_sha256())));
        let back = OverrideLayer::load(&p).unwrap();
        assert_eq!(back.edits, layer.edits);

        std::fs::write(
            &p,
            "{\"format\":\"treewright-overrides\",\"version\":7,\"edits\":[{}]}",
        )
        .unwrap();
        let e = OverrideLayer::load(&p).unwrap_err();
        assert!(
            matches!(e, OverrideError::UnknownVersion { found: 7, .. }),
            "{e}"
        );
        std::fs::write(
            &p,
            "{\"format\":\"treewright-overrides\",\"version\":1,\"edits\":[",
        )
        .unwrap();
        let e = OverrideLayer::load(&p).unwrap_err();
        assert!(matches!(e, OverrideError::Corrupt { .. }), "{e}");
        assert!(e.to_string().contains("overrides.json"));
        std::fs::write(&p, "{\"format\":\"other\",\"version\":1}").unwrap();
        assert!(matches!(
            OverrideLayer::load(&p).unwrap_err(),
            OverrideError::WrongFormat { .. }
        ));
    }

    #[test]
    fn save_refuses_when_changed_on_disk() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("overrides.json");
        let mut a = OverrideLayer::load(&p).unwrap();
        let mut b = OverrideLayer::load(&p).unwrap();
        a.push(rec(Edit::Exclude {
            node: "fern".into(),
        }));
        a.save(&p).unwrap();
        b.push(rec(Edit::Exclude {
            node: "hosta".into(),
        }));
        let e = b.save(&p).unwrap_err();
        assert!(matches!(e, OverrideError::ChangedOnDisk { .. }), "{e}");
        assert!(e.to_string().contains("changed on disk"));
        // the file still holds a's edit, untouched
        assert_eq!(OverrideLayer::load(&p).unwrap().edits, a.edits);
        // same length, different content is caught too (hash, not only length)
        let mut c = OverrideLayer::load(&p).unwrap();
        let text = std::fs::read_to_string(&p).unwrap().replace("fern", "fenr");
        std::fs::write(&p, text).unwrap();
        c.push(rec(Edit::Unpin { node: "x".into() }));
        assert!(matches!(
            c.save(&p).unwrap_err(),
            OverrideError::ChangedOnDisk { .. }
        ));
        // deleting the file under us is a change as well
        std::fs::remove_file(&p).unwrap();
        assert!(c.save(&p).is_err());
    }

    #[test]
    fn crash_between_write_and_rename_leaves_the_old_file() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("overrides.json");
        let mut layer = OverrideLayer::load(&p).unwrap();
        layer.push(rec(Edit::Exclude {
            node: "fern".into(),
        }));
        layer.save(&p).unwrap();
        let old = std::fs::read(&p).unwrap();
        // the crash: the new version was (partly) written to the temporary file that
        // fsutil::atomic_write renames over the target, and the rename never happened
        let mut next = layer.edits.clone();
        next.push(rec(Edit::Exclude {
            node: "hosta".into(),
        }));
        let new_bytes = serialize_overrides(&next);
        let tmp = dir
            .path()
            .join(format!(".overrides.json.{}.tmp", std::process::id()));
        std::fs::write(&tmp, &new_bytes[..new_bytes.len() / 2]).unwrap();
        std::fs::copy(&p, dir.path().join("overrides.json.bak")).unwrap();
        // the next load sees the old file, whole
        let reloaded = OverrideLayer::load(&p).unwrap();
        assert_eq!(std::fs::read(&p).unwrap(), old);
        assert_eq!(reloaded.edits, layer.edits);
        // and saving afterwards replaces the stale temporary file and leaves none behind
        let mut again = reloaded;
        again.push(next[1].clone());
        again.save(&p).unwrap();
        assert_eq!(std::fs::read(&p).unwrap(), new_bytes);
        assert_eq!(
            std::fs::read(dir.path().join("overrides.json.bak")).unwrap(),
            old
        );
        assert!(!tmp.exists());
        // a torn main file (not produced by save) is an error, never an empty layer
        std::fs::write(&p, &new_bytes[..new_bytes.len() - 5]).unwrap();
        assert!(matches!(
            OverrideLayer::load(&p).unwrap_err(),
            OverrideError::Corrupt { .. }
        ));
    }

    #[test]
    fn retrained_base_pins_hold_and_vanished_phrases_go_stale() {
        let (_, base) = garden();
        let (t_old, _) = garden();
        let edits = [
            rec(Edit::Pin {
                node: "hosta".into(),
                parent: "shade-loving".into(),
            }),
            rec(Edit::Rename {
                node: "cactus".into(),
                label: "cacti".into(),
                language: None,
            }),
            rec(Edit::Merge {
                sources: vec!["fern".into()],
                into: "shade-loving".into(),
            }),
        ];
        let (before, p0) = apply(&base, &t_old, &edits);
        assert!(p0.is_empty());
        assert_eq!(parent_id(&before, &t_old, "hosta"), Some("shade-loving"));
        // re-trained: "cactus" and "fern" vanished, rows reordered, hosta moved
        let t_new = table(&[
            "compost",
            "hosta",
            "plants",
            "shade-loving",
            "succulent",
            "drought-tolerant",
        ]);
        let new_base = tree(
            &t_new,
            "plants",
            &[
                ("drought-tolerant", "plants"),
                ("succulent", "drought-tolerant"),
                ("hosta", "succulent"),
                ("shade-loving", "plants"),
            ],
        );
        let (after, probs) = apply(&new_base, &t_new, &edits);
        assert_eq!(parent_id(&after, &t_new, "hosta"), Some("shade-loving"));
        assert!(after.pinned[t_new.get("hosta").unwrap() as usize]);
        let stale: Vec<usize> = probs
            .iter()
            .filter(|p| p.is_stale())
            .map(|p| p.index)
            .collect();
        assert_eq!(stale, vec![1, 2], "{probs:?}");
        assert!(probs[0].reason.contains("\"cactus\""));
    }

    #[test]
    fn undo_redo_stacks() {
        let mut l = OverrideLayer::new();
        assert!(!l.can_undo() && !l.can_redo());
        l.push(rec(Edit::Exclude { node: "a".into() }));
        l.push(rec(Edit::Exclude { node: "b".into() }));
        let u = l.undo().unwrap();
        assert_eq!(u.edit, Edit::Exclude { node: "b".into() });
        assert!(l.can_redo());
        assert_eq!(l.redo().unwrap(), u);
        l.undo();
        l.push(rec(Edit::Exclude { node: "c".into() }));
        assert!(!l.can_redo());
        assert_eq!(l.edits.len(), 2);
    }

    #[test]
    fn a_recorded_merge_undoes_and_redoes_as_one_step() {
        let mut l = OverrideLayer::new();
        l.push(rec(Edit::Exclude { node: "a".into() }));
        let before = l.state();
        l.edits.push(rec(Edit::Exclude { node: "b".into() }));
        l.edits.push(rec(Edit::Exclude { node: "c".into() }));
        l.saved = l.edits.clone();
        l.disk = Fingerprint::of_bytes(b"merged");
        l.record_merge(before);
        assert!(l.undo().is_none(), "plain undo never takes a merge apart");
        assert_eq!(l.undo_step(), Some(Step::Merge { from: 3, to: 1 }));
        assert_eq!(l.edits.len(), 1);
        assert_eq!(
            l.disk,
            Fingerprint::Missing,
            "the old reference point is back"
        );
        assert!(l.redo().is_none(), "plain redo never redoes a merge");
        assert_eq!(l.redo_step(), Some(Step::Merge { from: 1, to: 3 }));
        assert_eq!(l.disk, Fingerprint::of_bytes(b"merged"));
        l.push(rec(Edit::Exclude { node: "d".into() }));
        assert!(matches!(l.undo_step(), Some(Step::Edit(_))));
        assert!(matches!(l.undo_step(), Some(Step::Merge { .. })));
        assert!(matches!(l.undo_step(), Some(Step::Edit(_))));
        assert!(l.undo_step().is_none() && !l.can_undo());
    }

    /// A path that cannot be read for another reason than "not found" (here a folder) is
    /// an error wherever the layer reads its file, never an empty or missing layer: a layer
    /// that took an unreadable file for a missing one would save over it (common practice,
    /// no source; found by mutation testing, which made every read error "missing").
    #[test]
    fn an_unreadable_file_is_an_error_not_a_missing_one() {
        let dir = tempfile::tempdir().unwrap();
        let folder = dir.path().join("overrides.json");
        std::fs::create_dir(&folder).unwrap();
        assert!(matches!(
            OverrideLayer::load(&folder).unwrap_err(),
            OverrideError::Io { .. }
        ));
        let mut layer = OverrideLayer::new();
        assert!(matches!(
            layer.changed_on_disk(&folder).unwrap_err(),
            OverrideError::Io { .. }
        ));
        assert!(matches!(
            layer.take_disk(&folder).unwrap_err(),
            OverrideError::Io { .. }
        ));
        // a missing file is no error: an empty layer, unchanged from a new one
        let missing = dir.path().join("none.json");
        assert!(OverrideLayer::load(&missing).unwrap().edits.is_empty());
        assert!(!layer.changed_on_disk(&missing).unwrap());
        assert_eq!(layer.take_disk(&missing).unwrap(), Vec::<EditRecord>::new());
    }

    /// `saved_edits` is what was last loaded or saved (the merge's common ancestor), not
    /// what is in memory; `take_disk` returns the file's edits and makes them the new
    /// reference, so a save on top succeeds (common practice, no source).
    #[test]
    fn saved_edits_and_take_disk_follow_the_file() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("overrides.json");
        let mut a = OverrideLayer::load(&p).unwrap();
        a.push(rec(Edit::Exclude {
            node: "fern".into(),
        }));
        assert!(a.saved_edits().is_empty(), "not saved yet");
        a.save(&p).unwrap();
        assert_eq!(a.saved_edits(), a.edits.as_slice());
        let mut b = OverrideLayer::load(&p).unwrap();
        assert_eq!(b.saved_edits(), a.edits.as_slice());
        a.push(rec(Edit::Exclude {
            node: "hosta".into(),
        }));
        a.save(&p).unwrap();
        b.push(rec(Edit::Unpin { node: "x".into() }));
        // b's reference is now stale; take_disk hands over the file's two edits
        assert!(b.changed_on_disk(&p).unwrap());
        let theirs = b.take_disk(&p).unwrap();
        assert_eq!(theirs, a.edits);
        assert_eq!(b.saved_edits(), a.edits.as_slice());
        assert!(!b.changed_on_disk(&p).unwrap());
        let mut merged = theirs.clone();
        merged.push(b.edits[1].clone());
        b.edits = merged.clone();
        b.save(&p).unwrap();
        assert_eq!(OverrideLayer::load(&p).unwrap().edits, merged);
    }

    /// `can_undo` (what greys the workbench's Undo) says yes exactly when `undo_step` has a
    /// step to take: an edit, or a merge, also one whose result holds no edit at all
    /// (common practice, no source; found by mutation testing: a `can_undo` that always
    /// said no, or that wanted both an edit and an empty merge, passed every test).
    #[test]
    fn can_undo_agrees_with_undo_step() {
        let mut l = OverrideLayer::new();
        assert!(!l.can_undo() && l.clone().undo_step().is_none());
        l.push(rec(Edit::Exclude { node: "a".into() }));
        assert!(l.can_undo());
        assert!(matches!(l.undo_step(), Some(Step::Edit(_))));
        assert!(!l.can_undo());
        // a merge with the file on disk that left no edit (the other side undid everything)
        let mut m = OverrideLayer::new();
        let before = m.state();
        m.disk = Fingerprint::of_bytes(b"[]");
        m.record_merge(before);
        assert!(m.edits.is_empty());
        assert!(m.can_undo(), "the merge itself can be undone");
        assert_eq!(m.undo_step(), Some(Step::Merge { from: 0, to: 0 }));
        assert_eq!(m.disk, Fingerprint::Missing);
    }

    /// The root is refused as the node of a reparent or an exclusion wherever it sits in
    /// the phrase table, and the phrase of row 0 is an ordinary node when it is not the
    /// root (common practice, no source; found by mutation testing: every test tree had its
    /// root at row 0, so a working state that called row 0 the root passed).
    #[test]
    fn the_root_is_the_tree_root_not_row_zero() {
        let t = table(&["compost", "plants", "fern"]);
        let base = tree(&t, "plants", &[("compost", "plants"), ("fern", "plants")]);
        let edits = vec![
            rec(Edit::Exclude {
                node: "plants".into(),
            }),
            rec(Edit::Reparent {
                node: "plants".into(),
                parent: "fern".into(),
            }),
            rec(Edit::Reparent {
                node: "compost".into(),
                parent: "fern".into(),
            }),
        ];
        let (eff, probs) = apply(&base, &t, &edits);
        let refused: Vec<usize> = probs.iter().map(|p| p.index).collect();
        assert_eq!(refused, vec![0, 1], "{probs:?}");
        assert_eq!(eff.tree.root(), t.get("plants").unwrap());
        assert_eq!(parent_id(&eff, &t, "compost"), Some("fern"));
        // the same checks on a finished effective tree (the edit dialogs' check)
        let exclude_root = Edit::Exclude {
            node: "plants".into(),
        };
        assert!(matches!(
            check_edit(&eff, &t, &exclude_root),
            Err(EditRefusal::RootExcluded { .. })
        ));
        let back = Edit::Reparent {
            node: "compost".into(),
            parent: "plants".into(),
        };
        assert_eq!(check_edit(&eff, &t, &back), Ok(()));
    }

    /// A rename in the project's default language, named explicitly, renames the main label
    /// (the working state reads the default language from the project; common practice,
    /// no source; found by mutation testing: a working state with no languages passed).
    #[test]
    fn a_rename_in_the_default_language_renames_the_main_label() {
        let (t, base) = garden();
        let (eff0, _) = apply(&base, &t, &[]);
        let default = eff0.languages.default.clone();
        assert!(!default.is_empty());
        let edits = vec![rec(Edit::Rename {
            node: "fern".into(),
            label: "hart's tongue".into(),
            language: Some(default.clone()),
        })];
        let (eff, probs) = apply(&base, &t, &edits);
        assert!(probs.is_empty(), "{probs:?}");
        assert_eq!(eff.labels[t.get("fern").unwrap() as usize], "hart's tongue");
        assert!(
            eff.languages.other.is_empty(),
            "no label in another language"
        );
    }

    /// An excluded node that is included again goes back under the parent it had, with the
    /// children that had moved up (common practice, no source; found by mutation testing:
    /// an include that never found the old parent usable, and so put the node under the
    /// root, passed).
    #[test]
    fn include_puts_the_node_back_where_it_was() {
        let (t, base) = garden();
        let edits = vec![
            rec(Edit::Exclude {
                node: "succulent".into(),
            }),
            rec(Edit::Include {
                node: "succulent".into(),
            }),
        ];
        let (eff, probs) = apply(&base, &t, &edits[..1]);
        assert!(probs.is_empty(), "{probs:?}");
        assert_eq!(parent_id(&eff, &t, "cactus"), Some("drought-tolerant"));
        let (eff, probs) = apply(&base, &t, &edits);
        assert!(probs.is_empty(), "{probs:?}");
        assert_eq!(parent_id(&eff, &t, "succulent"), Some("drought-tolerant"));
        assert_eq!(parent_id(&eff, &t, "cactus"), Some("succulent"));
    }

    /// On a finished effective tree, a rename to the current label in the default language
    /// named explicitly is refused as no change (common practice, no source; found by
    /// mutation testing: a tree view with no languages took it for another language).
    #[test]
    fn check_edit_knows_the_default_language() {
        let (t, base) = garden();
        let (eff, _) = apply(&base, &t, &[]);
        let default = eff.languages.default.clone();
        let fern = eff.labels[t.get("fern").unwrap() as usize].clone();
        let same = Edit::Rename {
            node: "fern".into(),
            label: fern,
            language: Some(default),
        };
        assert!(matches!(
            check_edit(&eff, &t, &same),
            Err(EditRefusal::SameLabel { .. })
        ));
    }
}
