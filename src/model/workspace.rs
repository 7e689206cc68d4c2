//! The workspace: one owner for the pipeline "load project → load override layer → apply →
//! problems → audit" that every front end uses.
//!
//! A [`Workspace`] holds the project, its override layer, the effective tree, the edits that
//! could not be applied and (optionally) an incremental auditor. Every CLI verb and the
//! workbench's document go through it: checking and recording edits, undo and redo, saving
//! under the project lock, installing a new base tree, exporting, signing off, verifying and
//! finding a phrase by id or label all live here, once.
//!
//! Saving follows the rules of [`super::lock`]: take the project lock, compare what is on
//! disk with what was loaded, write atomically, release. [`Workspace::save`] refuses when the
//! file changed (the workbench keeps the edits in its recovery file); [`Workspace::append`]
//! (the CLI's one-edit verbs) re-applies its one edit on top of the newer file and checks it
//! again instead.

use std::path::{Path, PathBuf};
use std::sync::Arc;
use std::sync::mpsc::{Receiver, TryRecvError, channel};

use sha2::{Digest, Sha256};

use super::audit::{AuditConfig, AuditConfigError, AuditReport, Auditor, Severity, audit};
use super::builder::BuildReport;
use super::edit::{Edit, EditRecord, ReviewStatus};
use super::effective::{ApplyProblem, EffectiveTree};
use super::export::{ExportError, Format};
use super::fsutil::{atomic_write, atomic_write_with};
use super::lock::{LockError, ProjectLock};
use super::overrides::{self, OverrideError, OverrideLayer};
use super::project::{LoadError, MANIFEST_NAME};
use super::refusal::EditRefusal;
use super::signed::{self as signed_tree, BaseAtSignoff, SinceSignoff, SnapshotError};
use super::signoff::{self, Verification, latest_signoff, tree_hash};
use super::tree::TreeFile;

pub use super::project::{report_path_of, tree_bytes, tree_csv};
use super::{PhraseId, Project, Tree};

/// From this many phrases on, the first audit of a project runs on a worker thread when the
/// workspace is opened with [`AuditMode::for_size`].
pub const BACKGROUND_AUDIT_FROM: usize = 5_000;

/// Whether and how a workspace keeps an audit of its effective tree.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum AuditMode {
    /// No auditor (the CLI; [`Workspace::signoff_edit`] audits on demand).
    Off,
    /// The first audit runs in place; later ones are incremental.
    Inline,
    /// The first audit runs on a worker thread ([`Workspace::poll_audit`] picks it up);
    /// later ones are incremental and run in place.
    Background,
}

impl AuditMode {
    /// The workbench's choice: inline below [`BACKGROUND_AUDIT_FROM`] phrases, else in the
    /// background so the window stays responsive.
    pub fn for_size(phrases: usize) -> Self {
        if phrases < BACKGROUND_AUDIT_FROM {
            AuditMode::Inline
        } else {
            AuditMode::Background
        }
    }
}

/// Why a workspace operation failed. Every variant names the file or the input concerned.
#[derive(Debug, thiserror::Error)]
pub enum WorkspaceError {
    /// The project could not be loaded.
    #[error(transparent)]
    Load(#[from] LoadError),
    /// The override layer could not be loaded or saved (includes "changed on disk").
    #[error(transparent)]
    Overrides(#[from] OverrideError),
    /// The manifest's `audit` section is invalid.
    #[error(transparent)]
    AuditConfig(#[from] AuditConfigError),
    /// The project lock could not be taken.
    #[error(transparent)]
    Lock(#[from] LockError),
    /// The edit does not apply to the effective tree.
    #[error(transparent)]
    Refused(#[from] EditRefusal),
    /// The operation needs a tree and the project has none.
    #[error("{file}: the project has no tree yet; build one first")]
    NoTree {
        /// The tree file the manifest names (or would name).
        file: String,
    },
    /// No phrase has this id or label.
    #[error("no phrase with id or label \"{arg}\" in {dir}")]
    NotFound {
        /// What was looked for.
        arg: String,
        /// The project folder.
        dir: String,
    },
    /// Undo with no edit.
    #[error("{file}: no edit to undo")]
    NothingToUndo {
        /// The override file.
        file: String,
    },
    /// A new base tree does not fit the phrase table.
    #[error("built tree: {0}")]
    BadTree(String),
    /// A project file (tree, manifest, build report) changed on disk since it was loaded.
    #[error(
        "{file}: changed on disk since it was loaded; not overwriting it (reload to see the other changes)"
    )]
    ChangedOnDisk {
        /// The file.
        file: String,
    },
    /// Writing a file failed.
    #[error("{file}: {source}")]
    Write {
        /// The file.
        file: String,
        /// The OS error.
        source: std::io::Error,
    },
    /// The export could not be produced.
    #[error(transparent)]
    Export(#[from] ExportError),
    /// A sign-off snapshot could not be written, or was refused on load.
    #[error(transparent)]
    Snapshot(#[from] SnapshotError),
    /// A sign-off signature or the project's signer files failed a check.
    #[error(transparent)]
    Signature(#[from] super::sshsig::SignatureError),
    /// Reverting a sign-off without a reason.
    #[error(
        "{file}: edit #{index} is a sign-off by {reviewer}; reverting it needs a reason (--reason TEXT); it is recorded and shown by verify and the audit report"
    )]
    ReasonNeeded {
        /// The override file.
        file: String,
        /// The sign-off's index.
        index: usize,
        /// Its reviewer.
        reviewer: String,
    },
    /// Redo with no undone edit at the end of the history.
    #[error("{file}: nothing to redo (the history does not end with an undo)")]
    NothingToRedo {
        /// The override file.
        file: String,
    },
    /// No sign-off to compare with.
    #[error("{file}: no sign-off{at}")]
    NoSignoff {
        /// The override file.
        file: String,
        /// `" at edit #N"` when a given index was asked for.
        at: String,
    },
}

impl From<WorkspaceError> for String {
    fn from(e: WorkspaceError) -> String {
        e.to_string()
    }
}

/// Sign-off state of the effective tree.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum SignState {
    /// Never signed off.
    Unsigned,
    /// Signed off at the current tree hash.
    Signed {
        /// Reviewer name.
        reviewer: String,
        /// When.
        time: String,
    },
    /// Signed off earlier, but the tree changed since.
    Stale {
        /// Reviewer name.
        reviewer: String,
    },
}

enum AuditState {
    NotStarted,
    Running(Receiver<Auditor>),
    Ready(Box<Auditor>),
}

/// Position of a severity in [`Workspace::open_by_severity`].
pub fn severity_index(s: Severity) -> usize {
    match s {
        Severity::Info => 0,
        Severity::Warning => 1,
        Severity::Error => 2,
    }
}

/// SHA-256 of a file's bytes, `None` when it does not exist.
type DiskPrint = Option<[u8; 32]>;

fn disk_print(path: &Path) -> Result<DiskPrint, std::io::Error> {
    match std::fs::read(path) {
        Ok(b) => Ok(Some(Sha256::digest(&b).into())),
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => Ok(None),
        Err(e) => Err(e),
    }
}

/// A project opened for work: project, override layer, effective tree, problems and audit.
pub struct Workspace {
    /// The loaded project (its `tree` is the base tree).
    pub project: Project,
    /// The human edits.
    pub layer: OverrideLayer,
    /// The base tree with the edits applied (none while the project has no tree).
    pub eff: Option<EffectiveTree>,
    /// Edits that could not be applied.
    pub problems: Vec<ApplyProblem>,
    /// Worst open finding severity of every phrase (all `None` without an audit).
    pub worst: Vec<Option<Severity>>,
    /// Open (not accepted) findings per severity: info, warning, error.
    pub open_by_severity: [usize; 3],
    /// Bumped whenever the effective tree or the audit changes (views key caches on it).
    pub generation: u64,
    /// The report of the last build in this session or of `build-report.json`.
    pub build_report: Option<BuildReport>,
    /// Hash of the current effective tree.
    pub tree_hash: Option<String>,
    mode: AuditMode,
    audit_config: Option<AuditConfig>,
    audit: AuditState,
    approved: usize,
    unreviewed: usize,
    disk_tree: DiskPrint,
    disk_manifest: DiskPrint,
    since_cache: std::sync::Mutex<Option<(u64, SinceSummary)>>,
}

/// How far the effective tree is from the latest sign-off's tree (for the workbench's
/// status bar): `Ok((nodes changed, complete))`, or why it cannot be told.
pub type SinceSummary = Result<(usize, bool), String>;

impl Workspace {
    /// Open a project for the command line: it must have a tree; no auditor is kept.
    pub fn open(path: &Path) -> Result<Self, WorkspaceError> {
        let project = Project::load(path)?;
        if project.tree.is_none() {
            return Err(WorkspaceError::NoTree {
                file: project.tree_path().display().to_string(),
            });
        }
        let layer = OverrideLayer::load(&project.overrides_path())?;
        Self::from_project(project, layer, AuditMode::Off)
    }

    /// Open a project (with or without a tree) keeping an audit in `mode`.
    pub fn open_with(path: &Path, mode: AuditMode) -> Result<Self, WorkspaceError> {
        let project = Project::load(path)?;
        let layer = OverrideLayer::load(&project.overrides_path())?;
        Self::from_project(project, layer, mode)
    }

    /// Wrap a loaded project and layer. With an auditing `mode`, an invalid `audit`
    /// section of the manifest is an error.
    pub fn from_project(
        project: Project,
        layer: OverrideLayer,
        mode: AuditMode,
    ) -> Result<Self, WorkspaceError> {
        let audit_config = match mode {
            AuditMode::Off => AuditConfig::of_project(&project).ok(),
            _ => Some(AuditConfig::of_project(&project)?),
        };
        let report_path = report_path_of(&project);
        let build_report = std::fs::read(report_path)
            .ok()
            .and_then(|b| serde_json::from_slice(&b).ok());
        let write_err = |file: PathBuf| {
            move |source| WorkspaceError::Write {
                file: file.display().to_string(),
                source,
            }
        };
        let disk_tree = disk_print(&project.tree_path()).map_err(write_err(project.tree_path()))?;
        let manifest = project.dir.join(MANIFEST_NAME);
        let disk_manifest = disk_print(&manifest).map_err(write_err(manifest))?;
        let mut ws = Workspace {
            project,
            layer,
            eff: None,
            problems: Vec::new(),
            worst: Vec::new(),
            open_by_severity: [0; 3],
            generation: 0,
            build_report,
            tree_hash: None,
            mode,
            audit_config,
            audit: AuditState::NotStarted,
            approved: 0,
            unreviewed: 0,
            disk_tree,
            disk_manifest,
            since_cache: std::sync::Mutex::new(None),
        };
        ws.refresh();
        Ok(ws)
    }

    /// The folder the project lives in.
    pub fn dir(&self) -> &Path {
        &self.project.dir
    }

    /// The override file.
    pub fn overrides_path(&self) -> PathBuf {
        self.project.overrides_path()
    }

    /// The audit mode chosen at open.
    pub fn audit_mode(&self) -> AuditMode {
        self.mode
    }

    /// The audit configuration of the manifest (an invalid section is an error naming it).
    pub fn audit_config(&self) -> Result<AuditConfig, WorkspaceError> {
        match &self.audit_config {
            Some(c) => Ok(c.clone()),
            None => Ok(AuditConfig::of_project(&self.project)?),
        }
    }

    /// The base tree, or [`WorkspaceError::NoTree`].
    pub fn base(&self) -> Result<&Tree, WorkspaceError> {
        self.project.tree.as_ref().ok_or_else(|| self.no_tree())
    }

    /// The effective tree, or [`WorkspaceError::NoTree`].
    pub fn effective(&self) -> Result<&EffectiveTree, WorkspaceError> {
        self.eff.as_ref().ok_or_else(|| self.no_tree())
    }

    fn no_tree(&self) -> WorkspaceError {
        WorkspaceError::NoTree {
            file: self.project.tree_path().display().to_string(),
        }
    }

    /// Take the project lock (bounded wait, see [`super::lock`]).
    pub fn lock(&self) -> Result<ProjectLock, WorkspaceError> {
        Ok(ProjectLock::acquire(&self.project.dir)?)
    }

    /// Re-apply every edit to the base tree and update the audit.
    pub fn refresh(&mut self) {
        self.generation += 1;
        let Some(base) = &self.project.tree else {
            self.eff = None;
            self.problems.clear();
            self.worst = vec![None; self.project.phrases.len()];
            self.tree_hash = None;
            return;
        };
        let (eff, problems) = overrides::apply(base, &self.project.phrases, &self.layer.edits);
        let (g, phrases) = (&*self.project.gaussians, &self.project.phrases);
        let cfg = self.audit_config.clone();
        match (&mut self.audit, self.mode, cfg) {
            (_, AuditMode::Off, _) | (_, _, None) => {}
            (AuditState::Ready(a), _, _) => {
                a.update(g, phrases, &eff, &problems);
                a.calibrate(g, phrases, base, &self.layer.edits);
            }
            (AuditState::Running(_), _, _) => {}
            (AuditState::NotStarted, AuditMode::Inline, Some(cfg)) => {
                let mut a = Auditor::new(g, phrases, &eff, &problems, cfg);
                a.calibrate(g, phrases, base, &self.layer.edits);
                self.audit = AuditState::Ready(Box::new(a));
            }
            (AuditState::NotStarted, AuditMode::Background, Some(cfg)) => {
                let (tx, rx) = channel();
                let g = Arc::clone(&self.project.gaussians);
                let phrases = phrases.clone();
                let (eff, problems) = (eff.clone(), problems.clone());
                std::thread::spawn(move || {
                    // the workspace may be gone by the time the audit is done
                    let _ = tx.send(Auditor::new(&g, &phrases, &eff, &problems, cfg));
                });
                self.audit = AuditState::Running(rx);
            }
        }
        self.update_worst();
        let placed = eff.tree.preorder();
        self.approved = placed
            .iter()
            .filter(|&&p| eff.review[p as usize] == ReviewStatus::Approved)
            .count();
        self.unreviewed = placed
            .iter()
            .filter(|&&p| eff.review[p as usize] == ReviewStatus::Unreviewed)
            .count();
        self.tree_hash = Some(tree_hash(&eff, &self.project.phrases));
        self.eff = Some(eff);
        self.problems = problems;
    }

    fn update_worst(&mut self) {
        let mut worst = vec![None; self.project.phrases.len()];
        let mut open = [0usize; 3];
        if let AuditState::Ready(a) = &self.audit {
            for f in &a.report().findings {
                if f.accepted {
                    continue;
                }
                open[severity_index(f.severity)] += 1;
                let w: &mut Option<Severity> = &mut worst[f.node as usize];
                if w.is_none_or(|s| f.severity > s) {
                    *w = Some(f.severity);
                }
            }
        }
        self.worst = worst;
        self.open_by_severity = open;
    }

    /// Take the result of a background audit when it is done. Returns true when the report
    /// changed.
    pub fn poll_audit(&mut self) -> bool {
        let AuditState::Running(rx) = &self.audit else {
            return false;
        };
        match rx.try_recv() {
            Ok(a) => {
                self.finish_audit(a);
                true
            }
            Err(TryRecvError::Empty) => false,
            Err(TryRecvError::Disconnected) => {
                self.audit = AuditState::NotStarted;
                false
            }
        }
    }

    /// Block until a background audit is done (tests and benchmarks).
    pub fn wait_for_audit(&mut self) {
        if let AuditState::Running(rx) = &self.audit {
            match rx.recv() {
                Ok(a) => self.finish_audit(a),
                Err(_) => self.audit = AuditState::NotStarted,
            }
        }
    }

    /// Bring a finished background audit up to date with the edits made meanwhile.
    fn finish_audit(&mut self, mut a: Auditor) {
        if let Some(eff) = &self.eff {
            a.update(
                &self.project.gaussians,
                &self.project.phrases,
                eff,
                &self.problems,
            );
        }
        if let Some(base) = &self.project.tree {
            a.calibrate(
                &self.project.gaussians,
                &self.project.phrases,
                base,
                &self.layer.edits,
            );
        }
        self.audit = AuditState::Ready(Box::new(a));
        self.update_worst();
        self.generation += 1;
    }

    /// Whether the audit is still running in the background.
    pub fn is_auditing(&self) -> bool {
        matches!(self.audit, AuditState::Running(_))
    }

    /// The current audit report (none without an auditor or while the first audit runs in
    /// the background).
    pub fn report(&self) -> Option<&AuditReport> {
        match &self.audit {
            AuditState::Ready(a) => Some(a.report()),
            _ => None,
        }
    }

    /// The incremental auditor, when its first audit is done.
    pub fn auditor(&self) -> Option<&Auditor> {
        match &self.audit {
            AuditState::Ready(a) => Some(a),
            _ => None,
        }
    }

    /// A full audit of the effective tree as it stands: the kept report when the workspace
    /// has an up-to-date auditor, else a fresh audit.
    pub fn audit_now(&self) -> Result<AuditReport, WorkspaceError> {
        if let Some(r) = self.report() {
            return Ok(r.clone());
        }
        let eff = self.effective()?;
        let cfg = self.audit_config()?;
        let p = &self.project;
        Ok(audit(&p.gaussians, &p.phrases, eff, &self.problems, &cfg))
    }

    /// Number of placed nodes whose review status is still unreviewed.
    pub fn unreviewed(&self) -> usize {
        self.unreviewed
    }

    /// Number of placed nodes approved by a reviewer.
    pub fn approved(&self) -> usize {
        self.approved
    }

    /// Open findings at or above `min` (zero without an audit).
    pub fn open_findings(&self, min: Severity) -> usize {
        self.open_by_severity[severity_index(min)..].iter().sum()
    }

    /// Find a phrase by id, else by label (effective or original, exact first, then
    /// ignoring case); returns its id. The one place "phrase by id or label" lives.
    pub fn resolve(&self, arg: &str) -> Result<String, WorkspaceError> {
        self.resolve_row(arg)
            .map(|p| self.project.phrases.id(p).to_string())
    }

    /// [`Workspace::resolve`], returning the row.
    pub fn resolve_row(&self, arg: &str) -> Result<PhraseId, WorkspaceError> {
        let phrases = &self.project.phrases;
        let found = phrases.find(arg).or_else(|| {
            let eff = self.eff.as_ref()?;
            let by = |f: &dyn Fn(&str) -> bool| {
                eff.labels.iter().position(|l| f(l)).map(|i| i as PhraseId)
            };
            let lower = arg.to_lowercase();
            by(&|l| l == arg).or_else(|| by(&|l| l.to_lowercase() == lower))
        });
        found.ok_or_else(|| WorkspaceError::NotFound {
            arg: arg.to_string(),
            dir: self.project.dir.display().to_string(),
        })
    }

    /// Would `edit` apply to the current effective tree? `Err` says why not.
    pub fn check_edit(&self, edit: &Edit) -> Result<(), EditRefusal> {
        match &self.eff {
            Some(eff) => overrides::check_edit(eff, &self.project.phrases, edit),
            None => Err(EditRefusal::NoTree),
        }
    }

    /// Check, record and apply one edit in memory; returns its index. Nothing is written.
    pub fn edit(
        &mut self,
        edit: Edit,
        author: &str,
        note: Option<String>,
    ) -> Result<usize, WorkspaceError> {
        let edit = edit.normalized();
        self.check_edit(&edit)?;
        if matches!(edit, Edit::Signoff { .. }) {
            let lock = self.lock()?;
            self.keep_signed_tree(&edit, &lock)?;
        }
        self.layer.push(overrides::record(edit, author, note));
        self.refresh();
        Ok(self.layer.edits.len() - 1)
    }

    /// Record one edit and save it at once, under the project lock: the CLI's one-edit
    /// verbs (`edit`, `signoff`). When the override file changed on disk since it was
    /// loaded, the newer file is loaded (still under the lock), the edit is checked again on
    /// top of it (a sign-off is rebuilt for the tree as it now stands) and appended there; an
    /// edit that no longer applies is refused with its reason and nothing is written.
    /// Returns the index of the new edit.
    pub fn append(
        &mut self,
        edit: Edit,
        author: &str,
        note: Option<String>,
    ) -> Result<usize, WorkspaceError> {
        self.append_signed(edit, author, note, None)
    }

    /// [`Workspace::append`], a sign-off signed with `key` when one is given (see
    /// [`Workspace::sign_record`]): the signature is made under the lock, after the edit
    /// found its place in the file.
    pub fn append_signed(
        &mut self,
        edit: Edit,
        author: &str,
        note: Option<String>,
        key: Option<&ssh_key::PrivateKey>,
    ) -> Result<usize, WorkspaceError> {
        let edit = edit.normalized();
        self.check_edit(&edit)?;
        let path = self.overrides_path();
        let lock = self.lock()?;
        let mut edit = edit;
        if self.layer.changed_on_disk(&path)? {
            self.layer = OverrideLayer::load(&path)?;
            self.refresh();
            if let Edit::Signoff { reviewer, .. } = &edit {
                edit = self.signoff_edit(&reviewer.clone())?;
            }
            self.check_edit(&edit)?;
        }
        self.keep_signed_tree(&edit, &lock)?;
        let mut rec = overrides::record(edit, author, note);
        if let Some(key) = key {
            self.sign_record(&mut rec, key)?;
        }
        self.layer.push(rec);
        self.layer.save_locked(&path, &lock)?;
        drop(lock);
        self.refresh();
        Ok(self.layer.edits.len() - 1)
    }

    /// Undo the last edit (kept for redo).
    pub fn undo(&mut self) -> Option<EditRecord> {
        let r = self.layer.undo()?;
        self.refresh();
        Some(r)
    }

    /// Redo the last undone edit.
    pub fn redo(&mut self) -> Option<EditRecord> {
        let r = self.layer.redo()?;
        self.refresh();
        Some(r)
    }

    /// Undo the last step: one edit, or a whole merge with the file on disk (see
    /// [`OverrideLayer::record_merge`]).
    pub fn undo_step(&mut self) -> Option<overrides::Step> {
        let s = self.layer.undo_step()?;
        self.refresh();
        Some(s)
    }

    /// Redo the last undone step (an edit or a whole merge).
    pub fn redo_step(&mut self) -> Option<overrides::Step> {
        let s = self.layer.redo_step()?;
        self.refresh();
        Some(s)
    }

    /// Push edit records as they are (author and time kept) and re-apply.
    pub fn restore(&mut self, records: Vec<EditRecord>) {
        for r in records {
            self.layer.push(r);
        }
        self.refresh();
    }

    /// Write the override file under the project lock; refuses with "changed on disk" when
    /// someone else wrote it since it was loaded or last saved. Returns the file.
    pub fn save(&mut self) -> Result<PathBuf, WorkspaceError> {
        let path = self.overrides_path();
        let lock = self.lock()?;
        self.layer.save_locked(&path, &lock)?;
        Ok(path)
    }

    /// When [`Workspace::save`] was refused because the override file changed on disk:
    /// merge this session's edits (ours) with the file on disk (theirs) over the edits as
    /// last loaded or saved (the common ancestor), see [`super::merge`]. Nothing changes
    /// until [`Workspace::finish_merge`].
    pub fn merge_with_disk(&self) -> Result<super::merge::MergeOutcome, WorkspaceError> {
        let path = self.overrides_path();
        let theirs = match std::fs::read(&path) {
            Ok(b) => overrides::parse_overrides(&b, &path.display().to_string())?,
            Err(e) if e.kind() == std::io::ErrorKind::NotFound => Vec::new(),
            Err(source) => {
                return Err(WorkspaceError::Write {
                    file: path.display().to_string(),
                    source,
                });
            }
        };
        Ok(super::merge::merge(
            self.base()?,
            &self.project.phrases,
            self.layer.saved_edits(),
            &self.layer.edits,
            &theirs,
        ))
    }

    /// Finish a merge with the file on disk: `outcome` with every conflict resolved to the
    /// side chosen in `choices` (by conflict id; an unchosen conflict keeps ours). Under the
    /// project lock the file on disk is taken as the new reference point, the merged edits
    /// replace this session's, and they are saved atomically; refused with "changed on disk"
    /// when the file changed yet again since the merge was computed (merge again then).
    pub fn finish_merge(
        &mut self,
        outcome: &super::merge::MergeOutcome,
        choices: &std::collections::BTreeMap<String, super::merge::Side>,
    ) -> Result<PathBuf, WorkspaceError> {
        let path = self.overrides_path();
        let lock = self.lock()?;
        let fresh = self.merge_with_disk()?;
        if fresh.edits != outcome.edits || fresh.conflicts != outcome.conflicts {
            return Err(OverrideError::ChangedOnDisk {
                file: path.display().to_string(),
            }
            .into());
        }
        let mut edits = outcome.edits.clone();
        for c in &outcome.conflicts {
            let side = choices
                .get(&c.id)
                .copied()
                .unwrap_or(super::merge::Side::Ours);
            edits.extend(c.side(side).iter().cloned());
        }
        let before = self.layer.state();
        self.layer.take_disk(&path)?;
        super::history::fix_revert_indices(&mut edits);
        self.layer.edits = edits;
        self.layer.save_merged_locked(&path, &lock)?;
        drop(lock);
        self.layer.record_merge(before);
        self.refresh();
        Ok(path)
    }

    /// Replace the base tree (after a build): under the project lock, write it to the
    /// project's tree file (the old one kept as `.bak`; `.csv` tree files get a
    /// `child,parent` list), make the manifest name the tree file, and write the build report
    /// as `build-report.json` beside the tree. Refuses when the tree file or the manifest
    /// changed on disk since the workspace was opened. Edits are re-applied on top and the
    /// audit starts again.
    pub fn set_base(
        &mut self,
        file: &TreeFile,
        report: Option<&BuildReport>,
    ) -> Result<(), WorkspaceError> {
        let rpath = report_path_of(&self.project);
        self.set_base_reporting(file, report.map(|r| (r, rpath.as_path())))
    }

    /// [`Workspace::set_base`] with the build report written to a chosen file.
    pub fn set_base_reporting(
        &mut self,
        file: &TreeFile,
        report: Option<(&BuildReport, &Path)>,
    ) -> Result<(), WorkspaceError> {
        let (tree, bytes) = self.base_of(file)?;
        self.install_base(tree, bytes, report)
    }

    /// [`Workspace::set_base_reporting`] for a tree file and report the caller no longer
    /// needs (a fresh build): each is dropped as soon as it has been turned into bytes on
    /// disk, before the workspace makes its effective tree again, so a large build does
    /// not hold two copies of its tree at the peak.
    pub fn install_built(
        &mut self,
        file: TreeFile,
        report: Option<(BuildReport, &Path)>,
    ) -> Result<(), WorkspaceError> {
        let (tree, bytes) = self.base_of(&file)?;
        drop(file);
        self.install_base(tree, bytes, report)
    }

    /// The tree of `file` over the project's phrases, and the bytes of its `tree.json`.
    fn base_of(&self, file: &TreeFile) -> Result<(Tree, Vec<u8>), WorkspaceError> {
        let tree = Tree::from_id_map(&self.project.phrases, &file.root, &file.parent)
            .map_err(|e| WorkspaceError::BadTree(e.to_string()))?;
        let path = self.project.tree_path();
        let bytes = tree_bytes(file, &path).map_err(|source| WorkspaceError::Write {
            file: path.display().to_string(),
            source,
        })?;
        Ok((tree, bytes))
    }

    /// Write `bytes` as the tree file (and the report, when given; an owned report is
    /// dropped once written), then make `tree` the base.
    fn install_base<R: std::borrow::Borrow<BuildReport>>(
        &mut self,
        tree: Tree,
        bytes: Vec<u8>,
        report: Option<(R, &Path)>,
    ) -> Result<(), WorkspaceError> {
        let path = self.project.tree_path();
        let write_err = |p: &Path| {
            let file = p.display().to_string();
            move |source| WorkspaceError::Write { file, source }
        };
        let manifest = self.project.dir.join(MANIFEST_NAME);
        let lock = self.lock()?;
        for (p, seen) in [(&path, self.disk_tree), (&manifest, self.disk_manifest)] {
            if disk_print(p).map_err(write_err(p))? != seen {
                return Err(WorkspaceError::ChangedOnDisk {
                    file: p.display().to_string(),
                });
            }
        }
        atomic_write(&path, &bytes, true).map_err(write_err(&path))?;
        self.disk_tree = Some(Sha256::digest(&bytes).into());
        drop(bytes);
        // a project without a tree entry learns where its tree is, so it loads next time
        self.project
            .record_tree_in_manifest()
            .map_err(write_err(&manifest))?;
        self.disk_manifest = disk_print(&manifest).map_err(write_err(&manifest))?;
        if let Some((r, rpath)) = report {
            // streamed: the bytes of `to_json_pretty`, without the whole text in memory
            atomic_write_with(rpath, false, |w| {
                serde_json::to_writer_pretty(&mut *w, r.borrow())?;
                w.write_all(b"\n")
            })
            .map_err(write_err(rpath))?;
            drop(r);
        }
        drop(lock);
        self.project.tree = Some(tree);
        self.audit = AuditState::NotStarted;
        self.refresh();
        Ok(())
    }

    /// The effective tree rendered in `format` (`base_iri` and `scheme_label` for SKOS).
    pub fn export(
        &self,
        format: Format,
        base_iri: &str,
        scheme_label: &str,
    ) -> Result<String, WorkspaceError> {
        let eff = self.effective()?;
        Ok(format.render(eff, &self.project.phrases, base_iri, scheme_label)?)
    }

    /// Write an export to `path` atomically (missing folders are created).
    pub fn export_to(
        &self,
        format: Format,
        path: &Path,
        base_iri: &str,
        scheme_label: &str,
    ) -> Result<(), WorkspaceError> {
        let text = self.export(format, base_iri, scheme_label)?;
        let err = |source| WorkspaceError::Write {
            file: path.display().to_string(),
            source,
        };
        if let Some(dir) = path.parent().filter(|d| !d.as_os_str().is_empty()) {
            std::fs::create_dir_all(dir).map_err(|source| WorkspaceError::Write {
                file: dir.display().to_string(),
                source,
            })?;
        }
        atomic_write(path, text.as_bytes(), false).map_err(err)
    }

    /// Phrases the user may see but that are outside the tree: (excluded, unplaced).
    pub fn outside(&self) -> (Vec<PhraseId>, Vec<PhraseId>) {
        let Some(eff) = &self.eff else {
            return (Vec::new(), Vec::new());
        };
        let excluded = (0..eff.labels.len() as PhraseId)
            .filter(|&p| eff.excluded[p as usize])
            .collect();
        (excluded, eff.unplaced())
    }

    /// The edit records, oldest first.
    pub fn edits(&self) -> &[EditRecord] {
        &self.layer.edits
    }
}

mod signing;
mod signoffs;
pub use signing::{Reverted, SignatureCheck};

fn hex(d: &[u8; 32]) -> String {
    d.iter().map(|b| format!("{b:02x}")).collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn demo() -> (tempfile::TempDir, PathBuf) {
        let t = tempfile::tempdir().unwrap();
        let dir = t.path().join("demo");
        super::super::sample::write_demo(&dir).unwrap();
        (t, dir)
    }

    /// A placed non-root node of the demo's base tree.
    fn some_node(ws: &Workspace, k: usize) -> String {
        let t = ws.base().unwrap();
        let mut ids: Vec<String> = t
            .preorder()
            .into_iter()
            .filter(|&x| x != t.root())
            .map(|x| ws.project.phrases.id(x).to_string())
            .collect();
        ids.sort();
        ids[k].clone()
    }

    #[test]
    fn resolve_takes_an_id_or_a_label_in_any_case() {
        let (_t, dir) = demo();
        let ws = Workspace::open(&dir).unwrap();
        let id = some_node(&ws, 0);
        let p = ws.project.phrases.get(&id).unwrap();
        let label = ws.project.phrases.labels()[p as usize].clone();
        assert_eq!(ws.resolve(&id).unwrap(), id);
        assert_eq!(ws.resolve(&label).unwrap(), id);
        assert_eq!(ws.resolve(&label.to_uppercase()).unwrap(), id);
        let e = ws.resolve("no such phrase").unwrap_err();
        assert!(
            e.to_string().starts_with("no phrase with id or label"),
            "{e}"
        );
    }

    #[test]
    fn append_rechecks_on_top_of_a_newer_file() {
        let (_t, dir) = demo();
        let mut a = Workspace::open(&dir).unwrap();
        let mut b = Workspace::open(&dir).unwrap();
        let x = some_node(&a, 3);
        let exclude = Edit::Exclude { node: x.clone() };
        a.append(exclude.clone(), "a", None).unwrap();
        // b loaded before a saved: its exclusion no longer applies and is refused
        let e = b.append(exclude, "b", None).unwrap_err();
        assert_eq!(e.to_string(), format!("\"{x}\" is already excluded"));
        // an edit that still applies lands after a's
        let y = some_node(&a, 4);
        let i = b
            .append(
                Edit::Review {
                    node: y,
                    status: ReviewStatus::Approved,
                    comment: String::new(),
                },
                "b",
                None,
            )
            .unwrap();
        let stored = OverrideLayer::load(&a.overrides_path()).unwrap();
        assert_eq!(stored.edits.len(), i + 1);
        assert!(matches!(stored.edits[i - 1].edit, Edit::Exclude { .. }));
    }

    #[test]
    fn a_sign_off_appended_on_a_newer_file_is_rebuilt_for_it() {
        let (_t, dir) = demo();
        let mut a = Workspace::open(&dir).unwrap();
        let mut b = Workspace::open(&dir).unwrap();
        let stale = b.signoff_edit("rita").unwrap();
        a.append(
            Edit::Exclude {
                node: some_node(&a, 2),
            },
            "a",
            None,
        )
        .unwrap();
        let i = b.append(stale.clone(), "rita", None).unwrap();
        let fresh = Workspace::open(&dir).unwrap();
        assert_ne!(b.layer.edits[i].edit, stale);
        assert_eq!(fresh.sign_state(), b.sign_state());
        assert!(matches!(fresh.sign_state(), SignState::Signed { .. }));
    }

    #[test]
    fn set_base_refuses_when_the_tree_file_changed() {
        let (_t, dir) = demo();
        let mut ws = Workspace::open(&dir).unwrap();
        let tf = TreeFile {
            root: ws.project.phrases.id(ws.base().unwrap().root()).to_string(),
            parent: Default::default(),
        };
        let path = ws.project.tree_path();
        let mut bytes = std::fs::read(&path).unwrap();
        bytes.push(b'\n');
        std::fs::write(&path, &bytes).unwrap();
        let e = ws.set_base(&tf, None).unwrap_err();
        assert!(matches!(e, WorkspaceError::ChangedOnDisk { .. }), "{e}");
        assert_eq!(std::fs::read(&path).unwrap(), bytes);
    }

    #[test]
    fn export_formats_round_trip_their_names() {
        for f in Format::ALL {
            assert_eq!(f.name().parse::<Format>().unwrap(), f);
        }
        assert!("turtle".parse::<Format>().is_err());
    }
}
