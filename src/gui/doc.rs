//! The open document: project, override layer, effective tree and audit, kept consistent.
//!
//! This is the only place the GUI changes model state, and it does so only through the
//! override layer: an edit is checked, recorded, pushed and the effective tree re-applied.

use std::path::{Path, PathBuf};
use std::sync::Arc;
use std::sync::mpsc::{Receiver, TryRecvError, channel};

use crate::model::audit::{AuditConfig, AuditReport, Auditor, Severity};
use crate::model::builder::BuildReport;
use crate::model::edit::{Edit, EditRecord, ReviewStatus};
use crate::model::effective::{ApplyProblem, EffectiveTree};
use crate::model::export;
use crate::model::fsutil::{atomic_write, to_json_pretty};
use crate::model::overrides::{self, OverrideLayer};
use crate::model::signoff::{latest_signoff, tree_hash};
use crate::model::tree::TreeFile;
use crate::model::{PhraseId, Project, Tree};

use super::app::ExportFormat;

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

/// From this many phrases on, the first audit of a project runs on a worker thread (the
/// window stays responsive; findings appear when it is done). Later audits are
/// incremental and run in place.
pub const BACKGROUND_AUDIT_FROM: usize = 5_000;

enum AuditState {
    NotStarted,
    Running(Receiver<Auditor>),
    Ready(Box<Auditor>),
}

/// Position of a severity in [`Doc::open_by_severity`].
pub fn severity_index(s: Severity) -> usize {
    match s {
        Severity::Info => 0,
        Severity::Warning => 1,
        Severity::Error => 2,
    }
}

/// The open project with its edits applied.
pub struct Doc {
    /// The loaded project (its `tree` is the base tree).
    pub project: Project,
    /// The human edits.
    pub layer: OverrideLayer,
    /// The base tree with the edits applied (none while the project has no tree).
    pub eff: Option<EffectiveTree>,
    /// Edits that could not be applied.
    pub problems: Vec<ApplyProblem>,
    /// Audit configuration from the manifest.
    pub audit_config: AuditConfig,
    audit: AuditState,
    approved: usize,
    unreviewed: usize,
    /// Worst open finding severity of every phrase.
    pub worst: Vec<Option<Severity>>,
    /// Open (not accepted) findings per severity: info, warning, error.
    pub open_by_severity: [usize; 3],
    /// Bumped whenever the effective tree or the audit changes (views key caches on it).
    pub generation: u64,
    /// The report of the last build in this session or of `build-report.json`.
    pub build_report: Option<BuildReport>,
    /// Hash of the current effective tree.
    pub tree_hash: Option<String>,
}

impl Doc {
    /// Load a project folder with its override file and audit it.
    pub fn open(path: &Path) -> Result<Self, String> {
        let project = Project::load(path).map_err(|e| e.to_string())?;
        let layer = OverrideLayer::load(&project.overrides_path()).map_err(|e| e.to_string())?;
        Self::from_parts(project, layer)
    }

    /// Wrap a loaded project and layer.
    pub fn from_parts(project: Project, layer: OverrideLayer) -> Result<Self, String> {
        let audit_config = AuditConfig::of_project(&project).map_err(|e| e.to_string())?;
        let build_report = std::fs::read(project.dir.join("build-report.json"))
            .ok()
            .and_then(|b| serde_json::from_slice(&b).ok());
        let mut doc = Doc {
            project,
            layer,
            eff: None,
            problems: Vec::new(),
            audit_config,
            audit: AuditState::NotStarted,
            approved: 0,
            unreviewed: 0,
            worst: Vec::new(),
            open_by_severity: [0; 3],
            generation: 0,
            build_report,
            tree_hash: None,
        };
        doc.refresh();
        Ok(doc)
    }

    /// The folder the project lives in.
    pub fn dir(&self) -> &Path {
        &self.project.dir
    }

    /// The override file.
    pub fn overrides_path(&self) -> PathBuf {
        self.project.overrides_path()
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
        match &mut self.audit {
            AuditState::Ready(a) => {
                a.update(g, phrases, &eff, &problems);
            }
            AuditState::Running(_) => {}
            AuditState::NotStarted if phrases.len() < BACKGROUND_AUDIT_FROM => {
                let cfg = self.audit_config.clone();
                self.audit =
                    AuditState::Ready(Box::new(Auditor::new(g, phrases, &eff, &problems, cfg)));
            }
            AuditState::NotStarted => {
                let (tx, rx) = channel();
                let g = Arc::clone(&self.project.gaussians);
                let phrases = phrases.clone();
                let (eff, problems) = (eff.clone(), problems.clone());
                let cfg = self.audit_config.clone();
                std::thread::spawn(move || {
                    // the document may be gone by the time the audit is done
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
        self.audit = AuditState::Ready(Box::new(a));
        self.update_worst();
        self.generation += 1;
    }

    /// Whether the audit is still running in the background.
    pub fn is_auditing(&self) -> bool {
        matches!(self.audit, AuditState::Running(_))
    }

    /// The current audit report (none while the first audit runs in the background).
    pub fn report(&self) -> Option<&AuditReport> {
        match &self.audit {
            AuditState::Ready(a) => Some(a.report()),
            _ => None,
        }
    }

    /// Would `edit` apply to the current effective tree? `Err` says why not.
    pub fn check(&self, edit: &Edit) -> Result<(), String> {
        match &self.eff {
            Some(eff) => overrides::check_edit(eff, &self.project.phrases, edit),
            None => Err("the project has no tree yet".into()),
        }
    }

    /// Check, record and apply one edit.
    pub fn edit(&mut self, edit: Edit, author: &str, note: Option<String>) -> Result<(), String> {
        self.check(&edit)?;
        self.layer.push(overrides::record(edit, author, note));
        self.refresh();
        Ok(())
    }

    /// Undo the last edit; returns its operation name.
    pub fn undo(&mut self) -> Option<&'static str> {
        let r = self.layer.undo()?;
        self.refresh();
        Some(r.edit.op())
    }

    /// Redo the last undone edit; returns its operation name.
    pub fn redo(&mut self) -> Option<&'static str> {
        let r = self.layer.redo()?;
        self.refresh();
        Some(r.edit.op())
    }

    /// Write the override file.
    pub fn save(&mut self) -> Result<PathBuf, String> {
        let path = self.overrides_path();
        self.layer.save(&path).map_err(|e| e.to_string())?;
        Ok(path)
    }

    /// Replace the base tree (after a build) and write it to the project's tree file (the
    /// old one kept as `.bak`) with the build report beside it; edits are re-applied on top.
    pub fn set_base(
        &mut self,
        file: &TreeFile,
        report: Option<&BuildReport>,
    ) -> Result<(), String> {
        let tree = Tree::from_id_map(&self.project.phrases, &file.root, &file.parent)
            .map_err(|e| format!("built tree: {e}"))?;
        let path = self.project.tree_path();
        atomic_write(&path, &to_json_pretty(file), true)
            .map_err(|e| format!("{}: {e}", path.display()))?;
        // a project without a tree entry learns where its tree is, so it loads next time
        self.project
            .record_tree_in_manifest()
            .map_err(|e| format!("{}: {e}", self.project.dir.join("project.json").display()))?;
        if let Some(r) = report {
            let rpath = self.project.dir.join("build-report.json");
            atomic_write(&rpath, &to_json_pretty(r), false)
                .map_err(|e| format!("{}: {e}", rpath.display()))?;
        }
        self.project.tree = Some(tree);
        self.audit = AuditState::NotStarted;
        self.refresh();
        Ok(())
    }

    /// Number of placed nodes whose review status is still unreviewed.
    pub fn unreviewed(&self) -> usize {
        self.unreviewed
    }

    /// Number of placed nodes approved by a reviewer.
    pub fn approved(&self) -> usize {
        self.approved
    }

    /// Open findings at or above `min`.
    pub fn open_findings(&self, min: Severity) -> usize {
        self.open_by_severity[severity_index(min)..].iter().sum()
    }

    /// Whether the latest sign-off matches the current tree.
    pub fn sign_state(&self) -> SignState {
        let Some((_, rec)) = latest_signoff(&self.layer.edits) else {
            return SignState::Unsigned;
        };
        let Edit::Signoff {
            reviewer,
            tree_hash,
            ..
        } = &rec.edit
        else {
            return SignState::Unsigned;
        };
        if self.tree_hash.as_deref() == Some(tree_hash.as_str()) {
            SignState::Signed {
                reviewer: reviewer.clone(),
                time: rec.time.clone(),
            }
        } else {
            SignState::Stale {
                reviewer: reviewer.clone(),
            }
        }
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

    /// Push recovered edit records as they are (author and time kept) and re-apply.
    pub fn restore(&mut self, records: Vec<EditRecord>) {
        for r in records {
            self.layer.push(r);
        }
        self.refresh();
    }

    /// Write an export of the effective tree to `path` (folders are created).
    pub fn export(
        &self,
        format: ExportFormat,
        path: &Path,
        base_iri: &str,
        scheme_label: &str,
    ) -> Result<(), String> {
        let eff = self.eff.as_ref().ok_or("the project has no tree yet")?;
        let phrases = &self.project.phrases;
        let text = match format {
            ExportFormat::Skos => export::export_skos(eff, phrases, base_iri, scheme_label)
                .map_err(|e| e.to_string())?,
            ExportFormat::Csv => export::export_csv(eff, phrases),
            ExportFormat::Json => export::export_json(eff, phrases),
        };
        if let Some(dir) = path.parent().filter(|d| !d.as_os_str().is_empty()) {
            std::fs::create_dir_all(dir).map_err(|e| format!("{}: {e}", dir.display()))?;
        }
        atomic_write(path, text.as_bytes(), false).map_err(|e| format!("{}: {e}", path.display()))
    }

    /// The edit records, oldest first.
    pub fn edits(&self) -> &[EditRecord] {
        &self.layer.edits
    }
}
