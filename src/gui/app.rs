//! The app shell: owns the document and the selection, lays out the panels, drains the
//! [`Action`]s they return and applies them (edits only through the override layer).

use std::path::{Path, PathBuf};
use std::time::{Duration, Instant};

use serde::{Deserialize, Serialize};

use crate::model::audit::{AuditReport, Severity};
use crate::model::builder::BuildReport;
use crate::model::edit::{Edit, EditRecord, ReviewStatus};
use crate::model::effective::EffectiveTree;
use crate::model::tree::TreeFile;
use crate::model::{PhraseId, Project};

use super::dialogs::{self, Dialog};
use super::doc::Doc;
use super::ellipse_panel::EllipsePanel;
use super::findings_panel::FindingsPanel;
use super::stats_panel::StatsPanel;
use super::suggest_panel::{SuggestPanel, SuggestView};
use super::tree_panel::TreePanel;
use super::{autosave, menu_bar, shortcuts, status_bar};

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
}

/// Something a panel asks the shell to do.
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
    /// Apply one edit through the override layer.
    Edit(Edit),
    /// Apply one edit with a note stored beside it.
    EditWithNote(Edit, String),
    /// Undo the last edit.
    Undo,
    /// Redo the last undone edit.
    Redo,
    /// Write the override file.
    Save,
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
    /// Show or hide a panel.
    TogglePanel(PanelKind),
    /// Switch light / dark.
    SetDark(bool),
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
        format: ExportFormat,
        /// Output file.
        path: PathBuf,
        /// SKOS base IRI.
        base_iri: String,
        /// SKOS concept-scheme label.
        scheme_label: String,
    },
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
}

/// Export file formats.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ExportFormat {
    /// SKOS concept scheme in Turtle.
    Skos,
    /// One row per node.
    Csv,
    /// The effective tree as JSON.
    Json,
}

impl ExportFormat {
    /// File extension.
    pub fn extension(self) -> &'static str {
        match self {
            ExportFormat::Skos => "ttl",
            ExportFormat::Csv => "csv",
            ExportFormat::Json => "json",
        }
    }
}

/// The side panels that can be hidden.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum PanelKind {
    /// The tree (left).
    Tree,
    /// Statistics and findings (right).
    Inspector,
    /// The ellipse projection (centre).
    Ellipses,
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
        }
    }
}

/// Key of the settings in eframe's storage.
pub const SETTINGS_KEY: &str = "treewright-settings";
/// How many recent projects are kept.
pub const MAX_RECENT: usize = 8;
/// How often unsaved edits are written to the recovery file.
pub const AUTOSAVE_EVERY: Duration = Duration::from_secs(20);

/// What every view reads.
pub struct ViewCtx<'a> {
    /// The document.
    pub doc: &'a Doc,
    /// Its project.
    pub project: &'a Project,
    /// Its effective tree, if it has a tree.
    pub eff: Option<&'a EffectiveTree>,
    /// Selected phrases (the first is the anchor).
    pub selection: &'a [PhraseId],
    /// Worst open finding of every phrase.
    pub worst: &'a [Option<Severity>],
    /// The audit.
    pub report: Option<&'a AuditReport>,
    /// Changes whenever the effective tree or the audit changes.
    pub generation: u64,
    /// Would an edit apply now? (`Err` says why not.)
    pub check: &'a dyn Fn(&Edit) -> Result<(), String>,
    /// Move the keyboard focus to the search box this frame.
    pub focus_search: bool,
}

/// The workbench window.
pub struct App {
    /// The open document.
    pub doc: Doc,
    /// Selected phrases, the anchor first.
    pub selection: Vec<PhraseId>,
    /// Settings kept between sessions.
    pub settings: Settings,
    /// The tree panel.
    pub tree_panel: TreePanel,
    ellipse_panel: EllipsePanel,
    stats_panel: StatsPanel,
    findings_panel: FindingsPanel,
    suggest_panel: SuggestPanel,
    /// The open dialog, if any.
    pub dialog: Option<Dialog>,
    /// Last message for the status bar, and whether it is an error.
    pub message: Option<(String, bool)>,
    allow_close: bool,
    last_autosave: Instant,
    autosaved_len: Option<usize>,
    focus_search: bool,
    quit_requested: bool,
}

impl App {
    /// Load a project and build the panels.
    pub fn open(path: &Path) -> Result<Self, String> {
        Ok(Self::new(Doc::open(path)?, Settings::default()))
    }

    /// Wrap an open document.
    pub fn new(doc: Doc, settings: Settings) -> Self {
        let mut app = App {
            tree_panel: Self::tree_panel_for(&doc),
            doc,
            selection: Vec::new(),
            settings,
            ellipse_panel: EllipsePanel::default(),
            stats_panel: StatsPanel::default(),
            findings_panel: FindingsPanel::default(),
            suggest_panel: SuggestPanel::default(),
            dialog: None,
            message: None,
            allow_close: false,
            last_autosave: Instant::now(),
            autosaved_len: None,
            focus_search: false,
            quit_requested: false,
        };
        app.after_open();
        app
    }

    fn tree_panel_for(doc: &Doc) -> TreePanel {
        TreePanel::new(
            doc.project.phrases.len(),
            doc.eff.as_ref().map(|e| e.tree.root()),
        )
    }

    fn after_open(&mut self) {
        let dir = self.doc.dir().to_path_buf();
        let dir = dir.canonicalize().unwrap_or(dir);
        self.settings.recent.retain(|p| p != &dir);
        self.settings.recent.insert(0, dir);
        self.settings.recent.truncate(MAX_RECENT);
        if let Some(rec) = autosave::Recovery::find(&self.doc) {
            self.dialog = Some(Dialog::Recover(rec));
        }
    }

    /// Preselect a node by id (the `--select` option); `Err` when the id is unknown.
    pub fn preselect(&mut self, id: &str) -> Result<(), String> {
        let p = self
            .doc
            .project
            .phrases
            .get(id)
            .or_else(|| self.doc.project.phrases.find(id))
            .ok_or_else(|| format!("--select: no phrase with id or label \"{id}\""))?;
        self.apply(Action::Reveal(p));
        Ok(())
    }

    /// Whether there are edits not yet written to the override file.
    pub fn is_dirty(&self) -> bool {
        self.doc.layer.is_dirty()
    }

    fn notify(&mut self, msg: impl Into<String>) {
        self.message = Some((msg.into(), false));
    }

    fn fail(&mut self, msg: impl Into<String>) {
        self.message = Some((msg.into(), true));
    }

    fn open_doc(&mut self, doc: Doc) {
        let settings = std::mem::take(&mut self.settings);
        *self = App::new(doc, settings);
    }

    /// Apply one action.
    pub fn apply(&mut self, action: Action) {
        match action {
            Action::Select(p) => self.selection = vec![p],
            Action::ToggleSelect(p) => {
                if let Some(i) = self.selection.iter().position(|&x| x == p) {
                    self.selection.remove(i);
                } else {
                    self.selection.push(p);
                }
            }
            Action::SelectMany(v) => self.selection = v,
            Action::Reveal(p) => {
                let p = self.doc.eff.as_ref().map_or(p, |e| e.resolve(p));
                self.selection = vec![p];
                if let Some(eff) = &self.doc.eff {
                    self.tree_panel.reveal(&eff.tree, p);
                }
            }
            Action::Edit(e) => self.edit(e, None),
            Action::EditWithNote(e, note) => self.edit(e, Some(note)),
            Action::Undo => match self.doc.undo() {
                Some(op) => self.notify(format!("Undid {op}")),
                None => self.notify("Nothing to undo"),
            },
            Action::Redo => match self.doc.redo() {
                Some(op) => self.notify(format!("Redid {op}")),
                None => self.notify("Nothing to redo"),
            },
            Action::Save => self.save(),
            Action::Open(path) => {
                if self.is_dirty() {
                    self.fail("Save or undo your edits before opening another project");
                    return;
                }
                match Doc::open(&path) {
                    Ok(doc) => {
                        self.open_doc(doc);
                        self.notify(format!("Opened {}", path.display()));
                    }
                    Err(e) => self.fail(e),
                }
            }
            Action::Browse => {
                if let Some(dir) = rfd::FileDialog::new()
                    .set_title("Open a treewright project folder")
                    .pick_folder()
                {
                    self.apply(Action::Open(dir));
                }
            }
            Action::OpenDemo => self.apply(Action::Open(crate::model::sample::demo_dir())),
            Action::Dialog(req) => {
                if let Some(d) = dialogs::open(req, &self.doc, &self.selection, &self.settings) {
                    self.dialog = Some(d);
                }
            }
            Action::NewBase(file, report) => {
                let before = self.doc.problems.len();
                match self.doc.set_base(&file, report.as_ref().as_ref()) {
                    Ok(()) => {
                        if let Some(r) = *report {
                            self.doc.build_report = Some(r);
                        }
                        self.tree_panel = Self::tree_panel_for(&self.doc);
                        self.selection.clear();
                        let stale = self.doc.problems.len();
                        self.notify(format!(
                            "New base tree in use; {stale} edit(s) no longer apply (before: {before})"
                        ));
                        if stale > 0 {
                            self.dialog = Some(Dialog::Stale(dialogs::stale_list(&self.doc)));
                        }
                    }
                    Err(e) => self.fail(e),
                }
            }
            Action::TogglePanel(k) => match k {
                PanelKind::Tree => self.settings.show_tree ^= true,
                PanelKind::Inspector => self.settings.show_inspector ^= true,
                PanelKind::Ellipses => self.settings.show_ellipses ^= true,
            },
            Action::SetDark(d) => self.settings.dark = d,
            Action::ExpandAll => self.tree_panel.expand_all(),
            Action::CollapseAll => {
                if let Some(eff) = &self.doc.eff {
                    self.tree_panel.collapse_all(&eff.tree);
                }
            }
            Action::Notify(m) => self.notify(m),
            Action::FocusSearch => self.focus_search = true,
            Action::Quit => {
                if self.is_dirty() && !self.allow_close {
                    self.dialog = Some(Dialog::ConfirmClose);
                } else {
                    self.allow_close = true;
                    self.quit_requested = true;
                }
            }
            Action::Export {
                format,
                path,
                base_iri,
                scheme_label,
            } => match self.doc.export(format, &path, &base_iri, &scheme_label) {
                Ok(()) => self.notify(format!("Exported {}", path.display())),
                Err(e) => self.fail(format!("Export failed: {e}")),
            },
            Action::Restore(records) => {
                let n = records.len();
                self.doc.restore(records);
                self.notify(format!("Restored {n} unsaved edit(s); save to keep them"));
            }
            Action::DiscardRecovery => {
                autosave::remove(&self.doc);
                self.notify("Discarded the recovered edits");
            }
            Action::SaveAndQuit => {
                self.save();
                if !self.is_dirty() {
                    self.allow_close = true;
                    self.quit_requested = true;
                }
            }
            Action::DiscardAndQuit => {
                autosave::remove(&self.doc);
                self.allow_close = true;
                self.quit_requested = true;
            }
        }
    }

    fn edit(&mut self, e: Edit, note: Option<String>) {
        let op = e.op();
        let author = self.settings.author.clone();
        match self.doc.edit(e, &author, note) {
            Ok(()) => {
                // a merged or excluded node leaves the tree: keep the selection on placed nodes
                if let Some(eff) = &self.doc.eff {
                    let mut sel: Vec<PhraseId> = Vec::new();
                    for &p in &self.selection {
                        let r = eff.resolve(p);
                        if eff.tree.is_placed(r) && !sel.contains(&r) {
                            sel.push(r);
                        }
                    }
                    self.selection = sel;
                }
                self.notify(format!("Applied {op} (Ctrl+Z undoes)"));
            }
            Err(why) => self.fail(format!("Refused {op}: {why}")),
        }
    }

    /// Whether the shell asked the window to close this frame (headless tests read it).
    pub fn close_allowed(&self) -> bool {
        self.allow_close
    }

    fn save(&mut self) {
        match self.doc.save() {
            Ok(path) => {
                autosave::remove(&self.doc);
                self.autosaved_len = None;
                self.notify(format!("Saved {}", path.display()));
            }
            Err(e) => self.fail(format!("Not saved: {e}")),
        }
    }

    /// Write the recovery file when there are unsaved edits and it is time.
    fn autosave_tick(&mut self) {
        if !self.is_dirty() || self.last_autosave.elapsed() < AUTOSAVE_EVERY {
            return;
        }
        self.last_autosave = Instant::now();
        let n = self.doc.layer.edits.len();
        if self.autosaved_len == Some(n) {
            return;
        }
        match autosave::write(&self.doc) {
            Ok(()) => self.autosaved_len = Some(n),
            Err(e) => self.fail(format!("Autosave failed: {e}")),
        }
    }

    /// Draw one frame into the window's root `ui`.
    pub fn ui(&mut self, ui: &mut egui::Ui) {
        let ctx = ui.ctx().clone();
        ctx.set_theme(if self.settings.dark {
            egui::Theme::Dark
        } else {
            egui::Theme::Light
        });
        let mut actions = Vec::new();
        self.doc.poll_audit();
        if self.doc.is_auditing() {
            ctx.request_repaint_after(Duration::from_millis(200));
        }

        // closing the window with unsaved edits asks first
        if ctx.input(|i| i.viewport().close_requested()) && self.is_dirty() && !self.allow_close {
            ctx.send_viewport_cmd(egui::ViewportCommand::CancelClose);
            self.dialog = Some(Dialog::ConfirmClose);
        }

        if self.dialog.is_none() {
            let sc = shortcuts::poll(&ctx);
            if sc.focus_search {
                self.focus_search = true;
            }
            actions.extend(sc.actions);
        }

        let focus_search = std::mem::take(&mut self.focus_search);
        let doc = &self.doc;
        let check = |e: &Edit| doc.check(e);
        let view = ViewCtx {
            doc,
            project: &doc.project,
            eff: doc.eff.as_ref(),
            selection: &self.selection,
            worst: &doc.worst,
            report: doc.report(),
            generation: doc.generation,
            check: &check,
            focus_search,
        };

        egui::Panel::top("menu").show(ui, |ui| {
            actions.extend(menu_bar::ui(ui, &view, &self.settings, self.is_dirty()));
        });
        egui::Panel::bottom("status").show(ui, |ui| {
            status_bar::ui(ui, &view, self.message.as_ref());
        });
        if self.settings.show_tree {
            egui::Panel::left("tree")
                .resizable(true)
                .default_size(360.0)
                .min_size(220.0)
                .show(ui, |ui| {
                    actions.extend(self.tree_panel.ui(ui, &view));
                });
        }
        if self.settings.show_inspector {
            egui::Panel::right("inspector")
                .resizable(true)
                .default_size(380.0)
                .min_size(260.0)
                .show(ui, |ui| {
                    // findings on top (the review workflow), statistics of the selection below
                    let list = (ui.available_height() * 0.42).max(160.0);
                    actions.extend(self.findings_panel.ui(ui, &view, list));
                    ui.separator();
                    egui::ScrollArea::vertical()
                        .id_salt("stats-scroll")
                        .auto_shrink([false, false])
                        .show(ui, |ui| {
                            actions.extend(self.stats_panel.ui(ui, &view));
                        });
                });
        }
        egui::CentralPanel::default().show(ui, |ui| {
            ui.horizontal(|ui| {
                ui.selectable_value(&mut self.settings.central, Central::Ellipses, "Ellipses");
                ui.selectable_value(
                    &mut self.settings.central,
                    Central::Suggestions,
                    "Shopper suggestions",
                );
            });
            ui.separator();
            match (self.settings.central, view.eff) {
                (Central::Suggestions, Some(eff)) => {
                    let sv = SuggestView {
                        project: view.project,
                        eff,
                        revision: view.generation,
                        selected: view.selection.first().copied(),
                    };
                    let picked = self.suggest_panel.ui(ui, &sv);
                    actions.extend(picked.into_iter().take(1).map(Action::Reveal));
                }
                (Central::Suggestions, None) => {
                    ui.label("Suggestions need a tree.");
                }
                (Central::Ellipses, _) if self.settings.show_ellipses => {
                    actions.extend(self.ellipse_panel.ui(ui, &view));
                }
                (Central::Ellipses, _) => {
                    ui.label("The ellipse view is hidden (View > Ellipse projection).");
                }
            }
        });
        if self.suggest_panel.bulk_running() {
            ctx.request_repaint_after(Duration::from_millis(100));
        }

        if let Some(d) = &mut self.dialog {
            let out = d.ui(&ctx, &view);
            actions.extend(out.actions);
            if let Some(name) = out.author {
                self.settings.author = name;
            }
            if out.close {
                self.dialog = None;
            }
        }

        for a in actions {
            self.apply(a);
        }
        if self.quit_requested {
            self.quit_requested = false;
            ctx.send_viewport_cmd(egui::ViewportCommand::Close);
        }
        self.autosave_tick();
        if self.dialog.as_ref().is_some_and(Dialog::is_busy) {
            ctx.request_repaint_after(Duration::from_millis(50));
        }
    }
}

impl eframe::App for App {
    fn ui(&mut self, ui: &mut egui::Ui, _frame: &mut eframe::Frame) {
        App::ui(self, ui);
    }

    fn save(&mut self, storage: &mut dyn eframe::Storage) {
        eframe::set_value(storage, SETTINGS_KEY, &self.settings);
    }
}
