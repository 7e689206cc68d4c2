//! The app shell: owns the document and the selection, lays out the panels, drains the
//! [`Action`]s they return and applies them (edits only through the override layer).

use std::path::Path;
use std::time::{Duration, Instant};

use crate::model::PhraseId;
use crate::model::edit::Edit;
use crate::model::workspace::Workspace;

pub use super::context::{
    AUTOSAVE_EVERY, Action, Area, Central, DialogRequest, MAX_RECENT, PanelKind, PickerKind,
    SETTINGS_KEY, Settings, ViewCtx,
};
use super::context::{DocQueries, Panel, SignState};
use super::dialogs::{self, Dialog};
use super::doc::Doc;
use super::ellipse_panel::EllipsePanel;
use super::findings_panel::FindingsPanel;
use super::menu_bar::MenuBar;
use super::queue_panel::QueuePanel;
use super::stats_panel::StatsPanel;
use super::status_bar::StatusBar;
use super::suggest_panel::SuggestPanel;
use super::tree_panel::TreePanel;
use super::{autosave, shortcuts};

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
    menu_bar: MenuBar,
    status_bar: StatusBar,
    /// Panels drawn in the last frame, in drawing order.
    drawn: Vec<PanelKind>,
    /// The open dialog, if any.
    pub dialog: Option<Dialog>,
    /// Last message for the status bar, and whether it is an error.
    pub message: Option<(String, bool)>,
    allow_close: bool,
    last_autosave: Instant,
    autosaved_len: Option<usize>,
    focus_search: bool,
    quit_requested: bool,
    queue_panel: QueuePanel,
    /// The review queue of this session (built when the first audit is done).
    pub queue: Option<crate::model::queue::ReviewQueue>,
    /// Generation of the document the queue was last brought up to date with.
    queue_gen: u64,
    /// Traffic weights from the manifest (`weights`), read with the queue.
    weights: Option<Vec<f64>>,
    /// Whether the top of the queue was selected at start.
    started: bool,
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
            menu_bar: MenuBar,
            status_bar: StatusBar,
            drawn: Vec::new(),
            dialog: None,
            message: None,
            allow_close: false,
            last_autosave: Instant::now(),
            autosaved_len: None,
            focus_search: false,
            quit_requested: false,
            queue_panel: QueuePanel::default(),
            queue: None,
            queue_gen: 0,
            weights: None,
            started: false,
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
            .resolve_row(id)
            .map_err(|_| format!("--select: no phrase with id or label \"{id}\""))?;
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

    /// File ▸ Import taxonomy…: set a SKOS file as the tree (see
    /// `Project::import_taxonomy`), then reopen the project so every view uses it.
    fn import_taxonomy(&mut self, file: &std::path::Path) {
        if self.is_dirty() {
            self.fail("Save or undo your edits before importing a taxonomy");
            return;
        }
        let mut project = self.doc.project.clone();
        match project.import_taxonomy(file) {
            Ok(r) => {
                let dir = project.dir.clone();
                match Doc::open(&dir) {
                    Ok(doc) => {
                        self.open_doc(doc);
                        self.notify(format!(
                            "Taxonomy in use as the tree: {} of {} concepts matched; {} concept(s) match no phrase, {} phrase(s) no concept, {} with several broader",
                            r.matched,
                            r.concepts,
                            r.unmatched_concepts.len(),
                            r.unmatched_phrases.len(),
                            r.several_broader.len()
                        ));
                        if self.dialog.is_none() {
                            self.dialog = Some(Dialog::TaxonomyReport(Box::new(
                                dialogs::taxonomy_report::TaxonomyReportDialog::new(
                                    file.display().to_string(),
                                    r,
                                ),
                            )));
                        }
                    }
                    Err(e) => self.fail(e),
                }
            }
            Err(e) => self.fail(e.to_string()),
        }
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
            Action::SignedEdit(e, note, key) => {
                let author = self.settings.author.clone();
                match self.doc.edit_signed(e, &author, note, &key.0) {
                    Ok(()) => self.notify("Signed off with your key (Ctrl+S saves)"),
                    Err(why) => self.fail(format!("Refused signoff: {why}")),
                }
            }
            Action::Undo => {
                self.doc.layer.set_author(&self.settings.author);
                match self.doc.undo() {
                    Some(op) => self.notify(format!("Undid {op}")),
                    None => self.notify(self.doc.why_no_undo()),
                }
            }
            Action::Redo => match self.doc.redo() {
                Some(op) => self.notify(format!("Redid {op}")),
                None => self.notify("Nothing to redo"),
            },
            Action::Save => self.save(),
            Action::FinishMerge(outcome, choices) => {
                match self.doc.finish_merge(&outcome, &choices) {
                    Ok(path) => {
                        autosave::remove(&self.doc);
                        self.autosaved_len = None;
                        self.notify(format!(
                            "Merged with the file on disk and saved {}",
                            path.display()
                        ));
                    }
                    Err(e) => self.fail(format!("Not merged: {e}")),
                }
            }
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
            Action::BrowseTaxonomy => {
                if let Some(file) = rfd::FileDialog::new()
                    .set_title("Import a SKOS taxonomy as the tree")
                    .add_filter("SKOS (Turtle, RDF/XML)", &["ttl", "rdf", "owl"])
                    .pick_file()
                {
                    self.apply(Action::ImportTaxonomy(file));
                }
            }
            Action::ImportTaxonomy(file) => self.import_taxonomy(&file),
            Action::Dialog(req) => {
                let doc = &self.doc;
                let view = view_ctx(doc, &self.settings, &self.selection, None, false);
                if let Some(d) = dialogs::open(req, &view) {
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
                            self.dialog =
                                Some(Dialog::Stale(dialogs::stale_list(&self.doc.problems)));
                        }
                    }
                    Err(e) => self.fail(e),
                }
            }
            Action::ToggleArea(a) => match a {
                Area::Tree => self.settings.show_tree ^= true,
                Area::Inspector => self.settings.show_inspector ^= true,
                Area::Ellipses => self.settings.show_ellipses ^= true,
            },
            Action::SetDark(d) => self.settings.dark = d,
            Action::SetCentral(c) => self.settings.central = c,
            Action::SetDisplayLanguage(l) => self.settings.display_language = l,
            Action::SetAuthor(name) => self.settings.author = name,
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
            Action::SkipQueued(p) => {
                if let Some(q) = &mut self.queue
                    && let Some(i) = q.position(p)
                {
                    q.skip(i);
                }
            }
        }
    }

    /// Build the review queue once the first audit is done, and bring it up to date
    /// (incrementally) after every change of the document. At the first build the top of the
    /// queue is selected and shown, unless something is selected already (`--select`).
    pub fn sync_queue(&mut self) {
        let (Some(report), Some(eff)) = (self.doc.report(), self.doc.eff.as_ref()) else {
            return;
        };
        if self.queue.is_some() && self.queue_gen == self.doc.generation {
            return;
        }
        match &mut self.queue {
            Some(q) => q.update(
                report,
                eff,
                &self.doc.project.phrases,
                self.weights.as_deref(),
            ),
            None => {
                self.weights = match crate::model::queue::project_weights(&self.doc.project) {
                    Ok(w) => w,
                    Err(e) => {
                        self.message = Some((format!("Review queue without weights: {e}"), true));
                        None
                    }
                };
                self.queue = Some(crate::model::queue::ReviewQueue::build(
                    report,
                    eff,
                    &self.doc.project.phrases,
                    self.weights.as_deref(),
                ));
            }
        }
        self.queue_gen = self.doc.generation;
        if !self.started {
            self.started = true;
            let top = self
                .queue
                .as_ref()
                .and_then(|q| q.next_open(None).map(|i| q.items[i].node));
            if self.selection.is_empty()
                && let Some(p) = top
            {
                self.apply(Action::Reveal(p));
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
            Err(e) => {
                self.fail(format!("Not saved: {e}"));
                // offer the way forward: merge with what the other writer saved
                if self.doc.changed_on_disk()
                    && let Ok(m) = self.doc.merge_with_disk()
                {
                    self.dialog =
                        Some(Dialog::Merge(Box::new(dialogs::merge::MergeDialog::new(m))));
                }
            }
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

    /// The kinds of the panels this app holds, each drawn through [`Panel::ui`].
    pub fn panel_kinds(&self) -> Vec<PanelKind> {
        let panels: [&dyn Panel; 8] = [
            &self.menu_bar,
            &self.status_bar,
            &self.tree_panel,
            &self.findings_panel,
            &self.stats_panel,
            &self.ellipse_panel,
            &self.suggest_panel,
            &self.queue_panel,
        ];
        panels.iter().map(|p| p.kind()).collect()
    }

    /// The panels drawn in the last frame, in drawing order (hidden areas are left out).
    pub fn drawn_panels(&self) -> &[PanelKind] {
        &self.drawn
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

        self.sync_queue();
        let focus_search = std::mem::take(&mut self.focus_search);
        let mut view = view_ctx(
            &self.doc,
            &self.settings,
            &self.selection,
            self.message.as_ref(),
            focus_search,
        );
        view.queue = self.queue.as_ref();
        let drawn = &mut self.drawn;
        drawn.clear();
        let mut draw = |panel: &mut dyn Panel, ui: &mut egui::Ui, actions: &mut Vec<Action>| {
            drawn.push(panel.kind());
            actions.extend(panel.ui(ui, &view));
        };

        egui::Panel::top("menu").show(ui, |ui| {
            draw(&mut self.menu_bar, ui, &mut actions);
        });
        egui::Panel::bottom("status").show(ui, |ui| {
            draw(&mut self.status_bar, ui, &mut actions);
        });
        if self.settings.show_tree {
            egui::Panel::left("tree")
                .resizable(true)
                .default_size(360.0)
                .min_size(220.0)
                .show(ui, |ui| {
                    draw(&mut self.tree_panel, ui, &mut actions);
                });
        }
        if self.settings.show_inspector {
            egui::Panel::right("inspector")
                .resizable(true)
                .default_size(380.0)
                .min_size(260.0)
                .show(ui, |ui| {
                    // the review queue, then the findings (the review workflow), statistics of
                    // the selection below
                    draw(&mut self.queue_panel, ui, &mut actions);
                    ui.separator();
                    draw(&mut self.findings_panel, ui, &mut actions);
                    ui.separator();
                    egui::ScrollArea::vertical()
                        .id_salt("stats-scroll")
                        .auto_shrink([false, false])
                        .show(ui, |ui| {
                            draw(&mut self.stats_panel, ui, &mut actions);
                        });
                });
        }
        egui::CentralPanel::default().show(ui, |ui| {
            ui.horizontal(|ui| {
                let mut central = self.settings.central;
                ui.selectable_value(&mut central, Central::Ellipses, "Ellipses");
                ui.selectable_value(&mut central, Central::Suggestions, "Shopper suggestions");
                if central != self.settings.central {
                    actions.push(Action::SetCentral(central));
                }
            });
            ui.separator();
            match self.settings.central {
                Central::Suggestions => draw(&mut self.suggest_panel, ui, &mut actions),
                Central::Ellipses if self.settings.show_ellipses => {
                    draw(&mut self.ellipse_panel, ui, &mut actions);
                }
                Central::Ellipses => {
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

/// The document's answers to the views' costly questions.
impl DocQueries for Doc {
    fn check(&self, edit: &Edit) -> Result<(), String> {
        Doc::check(self, edit)
    }

    fn outside(&self) -> (Vec<PhraseId>, Vec<PhraseId>) {
        Workspace::outside(self)
    }

    fn sign_state(&self) -> SignState {
        Workspace::sign_state(self)
    }

    fn changed_since_signoff(&self) -> Option<Result<(usize, bool), String>> {
        Workspace::changed_since_signoff(self)
    }

    fn since_signoff(&self) -> Result<crate::model::signed::SinceSignoff, String> {
        Workspace::since_signoff(self, None).map_err(|e| e.to_string())
    }

    fn reverted_signoffs(&self) -> Vec<String> {
        crate::model::history::reverted_signoff_lines(&self.layer.edits)
    }

    fn preview(&self, edit: &Edit) -> Result<crate::model::impact::Impact, String> {
        Workspace::preview(self, edit).map_err(|e| e.to_string())
    }
}

/// What the views read this frame: the one place that turns the document into a [`ViewCtx`].
fn view_ctx<'a>(
    doc: &'a Doc,
    settings: &'a Settings,
    selection: &'a [PhraseId],
    message: Option<&'a (String, bool)>,
    focus_search: bool,
) -> ViewCtx<'a> {
    ViewCtx {
        project: &doc.project,
        eff: doc.eff.as_ref(),
        selection,
        worst: &doc.worst,
        report: doc.report(),
        auditing: doc.is_auditing(),
        open_by_severity: doc.open_by_severity,
        approved: doc.approved(),
        unreviewed: doc.unreviewed(),
        tree_hash: doc.tree_hash.as_deref(),
        problems: &doc.problems,
        build_report: doc.build_report.as_ref(),
        dirty: doc.layer.is_dirty(),
        can_undo: doc.layer.can_undo(),
        can_redo: doc.layer.can_redo(),
        generation: doc.generation,
        settings,
        message,
        focus_search,
        queries: doc,
        queue: None,
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
