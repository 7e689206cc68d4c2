//! What the shell and its views share: the [`Action`]s views return, the [`ViewCtx`] they
//! read, the [`Panel`] contract every panel implements, and the persisted [`Settings`].
//!
//! Layering: panels and dialogs import this module (and the model), never `app.rs`; the
//! app shell builds a [`ViewCtx`] each frame, draws the panels and applies the actions.
//!
//! Adding a panel:
//! 1. `src/gui/<name>_panel.rs` with a struct holding only view state, and
//!    `impl Panel for ...` (`kind` and `ui`); import from `super::context` and the model.
//! 2. A [`PanelKind`] variant and its place in [`PanelKind::ALL`].
//! 3. Whatever it asks the shell to do becomes an [`Action`] variant, applied in
//!    `App::apply`; whatever new it reads becomes a [`ViewCtx`] field filled in `app.rs`'s
//!    `view_ctx` (costly questions go on [`DocQueries`]).
//! 4. In `app.rs`: a field for the panel, its entry in `App::panel_kinds`, and a `draw` call
//!    where it belongs in `App::ui` (behind an [`Area`] and a `Settings` flag if it can hide).
//! 5. Tests: `tests/gui_panels.rs` then checks the kind is held and drawn and that the file
//!    does not import `app` or `doc`; add a kittest flow in `tests/gui.rs` through its labels.

use std::path::PathBuf;
use std::time::Duration;

use serde::{Deserialize, Serialize};

use crate::model::audit::{AuditReport, Severity};
use crate::model::builder::BuildReport;
use crate::model::edit::{Edit, EditRecord, ReviewStatus};
use crate::model::effective::{ApplyProblem, EffectiveTree};
use crate::model::tree::TreeFile;
use crate::model::{PhraseId, Project};

pub use super::doc::{SignState, severity_index};

/// Which kind of node the searchable picker chooses.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum PickerKind {
    /// A new parent for the node.
    Reparent,
    /// The node to merge into.
    Merge,
}

/// A dialog a view asks the shell to open.
#[derive(Debug, Clone, PartialEq)]
pub enum DialogRequest {
    /// Rename a node.
    Rename(PhraseId),
    /// Record a review decision with a comment.
    Review(PhraseId, ReviewStatus),
    /// Pick a target node for a reparent or merge.
    Picker(PickerKind, PhraseId),
    /// Build (or rebuild) the base tree.
    Build,
    /// Sign off the effective tree.
    Signoff,
    /// Compare trees.
    Diff,
    /// Export the effective tree.
    Export,
    /// Keyboard shortcuts.
    Shortcuts,
    /// About treewright.
    About,
    /// Compare trees, opened on the latest sign-off's tree.
    SignedDiff,
}

/// A private key for signing a sign-off, carried from the sign-off dialog to the shell. Its
/// debug form shows only the public key's fingerprint; two are equal when their public keys
/// are.
#[derive(Clone)]
pub struct SigningKey(pub Box<ssh_key::PrivateKey>);

impl std::fmt::Debug for SigningKey {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        let fp = crate::model::sshsig::fingerprint(self.0.public_key().key_data());
        write!(f, "SigningKey({fp})")
    }
}

impl PartialEq for SigningKey {
    fn eq(&self, other: &Self) -> bool {
        self.0.public_key() == other.0.public_key()
    }
}

/// Something a panel or dialog asks the shell to do. Views never change the document or
/// the settings themselves; the shell applies these in the order they were returned.
#[derive(Debug, Clone, PartialEq)]
pub enum Action {
    /// Select one node (replacing the selection).
    Select(PhraseId),
    /// Add a node to the selection or remove it (Ctrl-click).
    ToggleSelect(PhraseId),
    /// Replace the selection (Shift-click range, "select with children").
    SelectMany(Vec<PhraseId>),
    /// Select a node and scroll the tree to it, expanding its ancestors.
    Reveal(PhraseId),
    /// Apply one edit through the override layer (recorded with the current author).
    Edit(Edit),
    /// Apply one edit with a note stored beside it.
    EditWithNote(Edit, String),
    /// Record a sign-off signed with a key (read and decrypted by the dialog; the
    /// passphrase is not kept), with an optional note.
    SignedEdit(Edit, Option<String>, SigningKey),
    /// Undo the last edit.
    Undo,
    /// Redo the last undone edit.
    Redo,
    /// Write the override file.
    Save,
    /// Finish a merge with the file on disk: the conflicts resolved as chosen (by id).
    FinishMerge(
        Box<crate::model::merge::MergeOutcome>,
        std::collections::BTreeMap<String, crate::model::merge::Side>,
    ),
    /// Open a project folder.
    Open(PathBuf),
    /// Pick a project folder with the system dialog and open it.
    Browse,
    /// Open the Fernhollow demo project.
    OpenDemo,
    /// Open a dialog.
    Dialog(DialogRequest),
    /// Replace the base tree with a built one (edits are re-applied on top).
    NewBase(Box<TreeFile>, Box<Option<BuildReport>>),
    /// Show or hide an area of the window.
    ToggleArea(Area),
    /// Switch light / dark.
    SetDark(bool),
    /// Choose what the centre of the window shows.
    SetCentral(Central),
    /// Choose the language labels are shown in (`None`: the project's default).
    SetDisplayLanguage(Option<String>),
    /// Remember a new author name (stored with every later edit and offered as reviewer).
    /// Emit it before the edits it should apply to.
    SetAuthor(String),
    /// Expand every node of the tree panel.
    ExpandAll,
    /// Collapse every node but the root.
    CollapseAll,
    /// Show a message in the status bar.
    Notify(String),
    /// Put the keyboard focus into the tree's search box.
    FocusSearch,
    /// Write an export of the effective tree.
    Export {
        /// File format.
        format: crate::model::export::Format,
        /// Output file.
        path: PathBuf,
        /// SKOS base IRI.
        base_iri: String,
        /// SKOS concept-scheme label.
        scheme_label: String,
    },
    /// Pick a SKOS taxonomy file with the system dialog and import it.
    BrowseTaxonomy,
    /// Make a SKOS taxonomy (Turtle) the project's tree and reopen the project.
    ImportTaxonomy(PathBuf),
    /// Push edits recovered from the crash-recovery file (keeping their authors and times).
    Restore(Vec<EditRecord>),
    /// Delete the crash-recovery file without restoring it.
    DiscardRecovery,
    /// Close the window (asks first when edits are unsaved).
    Quit,
    /// Save, then close the window if the save worked.
    SaveAndQuit,
    /// Close the window, dropping unsaved edits and the recovery file.
    DiscardAndQuit,
    /// Pass over a node of the review queue for now.
    SkipQueued(PhraseId),
}

/// Every panel of the window; each has one [`Panel`] implementation that the app draws.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum PanelKind {
    /// The menu bar (top).
    MenuBar,
    /// The status bar (bottom).
    StatusBar,
    /// The tree (left).
    Tree,
    /// The findings list (right, upper part).
    Findings,
    /// Statistics of the selection (right, lower part).
    Stats,
    /// The ellipse projection (centre).
    Ellipses,
    /// What shoppers would be offered for a phrase (centre).
    Suggestions,
    /// The review queue (right, above the findings).
    Queue,
}

impl PanelKind {
    /// Every panel, in drawing order.
    pub const ALL: [PanelKind; 8] = [
        PanelKind::MenuBar,
        PanelKind::StatusBar,
        PanelKind::Tree,
        PanelKind::Findings,
        PanelKind::Stats,
        PanelKind::Ellipses,
        PanelKind::Suggestions,
        PanelKind::Queue,
    ];
}

/// The areas of the window that can be hidden (View menu).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Area {
    /// The tree panel (left).
    Tree,
    /// Findings and statistics (right).
    Inspector,
    /// The ellipse projection (centre).
    Ellipses,
}

/// The contract of every panel: draw into `ui` from what `ctx` shows, and return what the
/// shell should do. A panel keeps only view state (scroll, filters, caches keyed on
/// [`ViewCtx::generation`]); it never changes the document.
pub trait Panel {
    /// Which panel this is.
    fn kind(&self) -> PanelKind;
    /// Draw one frame.
    fn ui(&mut self, ui: &mut egui::Ui, ctx: &ViewCtx) -> Vec<Action>;
}

/// Settings kept between sessions (eframe persistence).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default)]
pub struct Settings {
    /// Most recently opened project folders, newest first.
    pub recent: Vec<PathBuf>,
    /// Dark theme.
    pub dark: bool,
    /// Show the tree panel.
    pub show_tree: bool,
    /// Show the statistics and findings panel.
    pub show_inspector: bool,
    /// Show the ellipse projection.
    pub show_ellipses: bool,
    /// Name stored with every edit and offered as reviewer.
    pub author: String,
    /// What the centre of the window shows.
    pub central: Central,
    /// Language the labels are shown in (a BCP 47 tag); `None`: the project's default. A
    /// phrase without a label in it shows its default-language label.
    pub display_language: Option<String>,
}

/// The views of the centre area.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, Default)]
#[serde(rename_all = "kebab-case")]
pub enum Central {
    /// The ellipse projection.
    #[default]
    Ellipses,
    /// What shoppers would be offered for a phrase.
    Suggestions,
}

impl Default for Settings {
    fn default() -> Self {
        Settings {
            recent: Vec::new(),
            dark: false,
            show_tree: true,
            show_inspector: true,
            show_ellipses: true,
            author: std::env::var("USER")
                .ok()
                .filter(|u| !u.is_empty())
                .unwrap_or_else(|| "curator".into()),
            central: Central::Ellipses,
            display_language: None,
        }
    }
}

/// Key of the settings in eframe's storage.
pub const SETTINGS_KEY: &str = "treewright-settings";
/// How many recent projects are kept.
pub const MAX_RECENT: usize = 8;
/// How often unsaved edits are written to the recovery file.
pub const AUTOSAVE_EVERY: Duration = Duration::from_secs(20);

/// Questions a view may ask the document that are too costly to answer every frame; the
/// shell implements this for its document.
pub trait DocQueries {
    /// Would an edit apply now? (`Err` says why not.)
    fn check(&self, edit: &Edit) -> Result<(), String>;
    /// Phrases outside the tree: (excluded, unplaced).
    fn outside(&self) -> (Vec<PhraseId>, Vec<PhraseId>);
    /// Whether the latest sign-off matches the current tree.
    fn sign_state(&self) -> SignState;
    /// Nodes changed since the latest sign-off's tree and whether that count is complete
    /// (`None`: not known here).
    fn changed_since_signoff(&self) -> Option<Result<(usize, bool), String>> {
        None
    }
    /// The latest sign-off's tree against the effective tree, each change with its causes.
    fn since_signoff(&self) -> Result<crate::model::signed::SinceSignoff, String> {
        Err("not available".into())
    }
    /// Sign-offs cancelled by a revert: one line each with who reverted it and why.
    fn reverted_signoffs(&self) -> Vec<String> {
        Vec::new()
    }

    /// What an edit would do, before it is made ([`crate::model::impact`]).
    fn preview(&self, _edit: &Edit) -> Result<crate::model::impact::Impact, String> {
        Err("not available".into())
    }
}

/// What every view reads: the document's state for this frame, the selection and the
/// settings. Built by the shell; views and dialogs never see the document itself.
pub struct ViewCtx<'a> {
    /// The project.
    pub project: &'a Project,
    /// Its effective tree, if it has a tree.
    pub eff: Option<&'a EffectiveTree>,
    /// Selected phrases (the first is the anchor).
    pub selection: &'a [PhraseId],
    /// Worst open finding of every phrase.
    pub worst: &'a [Option<Severity>],
    /// The audit (none while the first audit runs in the background).
    pub report: Option<&'a AuditReport>,
    /// Whether the first audit still runs in the background.
    pub auditing: bool,
    /// Open (not accepted) findings per severity, indexed by [`severity_index`].
    pub open_by_severity: [usize; 3],
    /// Placed nodes approved by a reviewer.
    pub approved: usize,
    /// Placed nodes still unreviewed.
    pub unreviewed: usize,
    /// Hash of the effective tree.
    pub tree_hash: Option<&'a str>,
    /// Edits that could not be applied.
    pub problems: &'a [ApplyProblem],
    /// The report of the last build.
    pub build_report: Option<&'a BuildReport>,
    /// Whether there are unsaved edits.
    pub dirty: bool,
    /// Whether there is an edit to undo.
    pub can_undo: bool,
    /// Whether there is an undone edit to redo.
    pub can_redo: bool,
    /// Changes whenever the effective tree or the audit changes.
    pub generation: u64,
    /// Settings (read-only: changes go through [`Action`]s).
    pub settings: &'a Settings,
    /// Last status message, and whether it is an error.
    pub message: Option<&'a (String, bool)>,
    /// Move the keyboard focus to the search box this frame.
    pub focus_search: bool,
    /// Costly questions to the document.
    pub queries: &'a dyn DocQueries,
    /// The review queue of this session (none before the first audit is done).
    pub queue: Option<&'a crate::model::queue::ReviewQueue>,
}

impl ViewCtx<'_> {
    /// Would an edit apply now? (`Err` says why not.)
    pub fn check(&self, edit: &Edit) -> Result<(), String> {
        self.queries.check(edit)
    }

    /// Open findings at or above `min`.
    pub fn open_findings(&self, min: Severity) -> usize {
        self.open_by_severity[severity_index(min)..].iter().sum()
    }

    /// A node's current label (effective tree first, else the phrase table), in the display
    /// language when it has a label in it, else in the project's default language.
    pub fn label(&self, p: PhraseId) -> &str {
        let lang = self.settings.display_language.as_deref();
        match (self.eff, lang) {
            (Some(e), Some(l)) => e.label_in(p, l),
            (Some(e), None) => e.label(p),
            (None, Some(l)) => self
                .project
                .phrases
                .label_in(p, l)
                .unwrap_or_else(|| self.project.phrases.label(p)),
            (None, None) => self.project.phrases.label(p),
        }
    }

    /// Whether any label of `p`, in any language, contains `query` after NFC and case
    /// folding (the search of the tree, the picker and the suggestion panel).
    pub fn matches_any_language(&self, p: PhraseId, query_folded: &str) -> bool {
        match self.eff {
            Some(e) => e.any_label_contains(p, query_folded),
            None => {
                let t = &self.project.phrases;
                crate::model::lang::fold(t.label(p), None).contains(query_folded)
                    || t.languages().is_some_and(|l| {
                        l.other.get(&p).is_some_and(|m| {
                            m.values()
                                .any(|v| crate::model::lang::fold(v, None).contains(query_folded))
                        })
                    })
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn all_lists_every_panel_kind_once() {
        let mut seen = std::collections::HashSet::new();
        for k in PanelKind::ALL {
            // exhaustive on purpose: a new variant fails to compile here until ALL is updated
            match k {
                PanelKind::MenuBar
                | PanelKind::StatusBar
                | PanelKind::Tree
                | PanelKind::Findings
                | PanelKind::Stats
                | PanelKind::Ellipses
                | PanelKind::Suggestions
                | PanelKind::Queue => {}
            }
            assert!(seen.insert(k), "{k:?} listed twice");
        }
        assert_eq!(seen.len(), 8);
    }
}
