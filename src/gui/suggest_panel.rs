//! Suggestion preview panel: what a shopper would be offered for a phrase, generic and
//! personalised side by side, and a bulk table of every phrase's top broader offer.

use std::sync::Arc;
use std::sync::atomic::{AtomicBool, AtomicUsize, Ordering};
use std::thread::JoinHandle;

use crate::model::effective::EffectiveTree;
use crate::model::gaussian::{Gaussians, PhraseId};
use crate::model::phrase::PhraseTable;
use crate::model::project::{Project, UserProfile};
use crate::model::suggest::{
    BulkRow, Candidate, SuggestCtx, SuggestParams, Suggestions, bulk_check_with, bulk_csv,
    bulk_nodes, suggest,
};

use super::context::{Action, Panel, PanelKind, ViewCtx};

/// Column the bulk table is sorted by.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum BulkSort {
    /// Tree order.
    Tree,
    /// Phrase label.
    Phrase,
    /// Containment, weakest first.
    Containment,
    /// Share of shoppers whose top offer differs, largest first.
    Disagreement,
}

/// Cached offers: (phrase, profile, tree revision) → suggestions or the reason there are none.
type OfferCache = Option<(PhraseId, Option<usize>, u64, Result<Suggestions, String>)>;

/// A bulk check running on a worker thread.
struct BulkJob {
    done: Arc<AtomicUsize>,
    total: usize,
    cancel: Arc<AtomicBool>,
    handle: Option<JoinHandle<Option<Vec<BulkRow>>>>,
}

/// State of the suggestion panel.
pub struct SuggestPanel {
    /// Text in the phrase search box.
    pub search: String,
    /// The phrase whose offers are shown.
    pub phrase: Option<PhraseId>,
    /// Index into the project's users, when personalised.
    pub user: Option<usize>,
    params: SuggestParams,
    cache: OfferCache,
    /// Bulk check results (tree order).
    pub bulk: Option<Vec<BulkRow>>,
    bulk_revision: u64,
    job: Option<BulkJob>,
    /// Show only flagged rows.
    pub only_flagged: bool,
    /// Bulk table text filter.
    pub filter: String,
    /// Bulk table sort column.
    pub sort: BulkSort,
    status: String,
    /// Phrase matches of the search box: (query, tree revision) → first rows matching.
    matches: Option<(String, u64, Vec<PhraseId>)>,
    /// Keep the shown phrase while the tree selection changes ("Pin this phrase"); when
    /// off, the panel follows the tree selection.
    pub pinned: bool,
    /// The tree selection last followed.
    followed: Option<PhraseId>,
}

impl Default for SuggestPanel {
    fn default() -> Self {
        SuggestPanel {
            search: String::new(),
            phrase: None,
            user: None,
            params: SuggestParams::default(),
            cache: None,
            bulk: None,
            bulk_revision: 0,
            job: None,
            only_flagged: false,
            filter: String::new(),
            sort: BulkSort::Tree,
            status: String::new(),
            matches: None,
            pinned: false,
            followed: None,
        }
    }
}

/// What the panel needs to read.
pub struct SuggestView<'a> {
    /// The open project.
    pub project: &'a Project,
    /// Its effective tree.
    pub eff: &'a EffectiveTree,
    /// Changes whenever the effective tree changes (cache key).
    pub revision: u64,
    /// The tree panel's current selection.
    pub selected: Option<PhraseId>,
}

impl Panel for SuggestPanel {
    fn kind(&self) -> PanelKind {
        PanelKind::Suggestions
    }

    /// Draw the panel; a picked phrase is revealed in the tree.
    fn ui(&mut self, ui: &mut egui::Ui, ctx: &ViewCtx) -> Vec<Action> {
        let Some(eff) = ctx.eff else {
            ui.label("Suggestions need a tree.");
            return Vec::new();
        };
        let view = SuggestView {
            project: ctx.project,
            eff,
            revision: ctx.generation,
            selected: ctx.selection.first().copied(),
        };
        let picked = self.show(ui, &view);
        picked.into_iter().take(1).map(Action::Reveal).collect()
    }
}

impl SuggestPanel {
    /// Is a bulk check running?
    pub fn bulk_running(&self) -> bool {
        self.job.is_some()
    }

    fn suggestions(&mut self, view: &SuggestView) -> Option<&Result<Suggestions, String>> {
        let p = self.phrase?;
        let key = (p, self.user, view.revision);
        let stale = match &self.cache {
            Some((cp, cu, cr, _)) => (*cp, *cu, *cr) != key,
            None => true,
        };
        if stale {
            let ctx = SuggestCtx::new(
                &view.project.gaussians,
                &view.project.phrases,
                view.eff,
                &self.params,
            );
            let user = self.user.and_then(|i| view.project.users.get(i));
            let r = suggest(&ctx, p, user).map_err(|e| e.to_string());
            self.cache = Some((p, self.user, view.revision, r));
        }
        self.cache.as_ref().map(|c| &c.3)
    }

    fn start_bulk(&mut self, view: &SuggestView) {
        let g: Arc<Gaussians> = Arc::clone(&view.project.gaussians);
        let phrases: PhraseTable = view.project.phrases.clone();
        let eff: EffectiveTree = view.eff.clone();
        let users: Vec<UserProfile> = view.project.users.clone();
        let params = self.params.clone();
        let done = Arc::new(AtomicUsize::new(0));
        let cancel = Arc::new(AtomicBool::new(false));
        let total = bulk_nodes(view.eff).len();
        let (d2, c2) = (Arc::clone(&done), Arc::clone(&cancel));
        let handle = std::thread::spawn(move || {
            let ctx = SuggestCtx::new(&g, &phrases, &eff, &params);
            bulk_check_with(&ctx, &users, &d2, &c2)
        });
        self.bulk_revision = view.revision;
        self.status.clear();
        self.job = Some(BulkJob {
            done,
            total,
            cancel,
            handle: Some(handle),
        });
    }

    /// Poll the worker; returns true while it runs.
    pub fn poll(&mut self) -> bool {
        let Some(job) = &mut self.job else {
            return false;
        };
        if job.handle.as_ref().is_some_and(|h| h.is_finished()) {
            let result = job.handle.take().and_then(|h| h.join().ok()).flatten();
            match result {
                Some(rows) => {
                    let flagged = rows.iter().filter(|r| r.flagged()).count();
                    self.status = format!("{} phrases checked, {flagged} flagged", rows.len());
                    self.bulk = Some(rows);
                }
                None => self.status = "Bulk check cancelled".into(),
            }
            self.job = None;
            return false;
        }
        true
    }

    /// Wait for a running bulk check to end (tests and shutdown).
    pub fn wait(&mut self) {
        while self.poll() {
            std::thread::sleep(std::time::Duration::from_millis(5));
        }
    }

    /// Draw the panel for `view`; returns the phrases the user asked to select. (The
    /// [`Panel`] implementation builds the view from the [`ViewCtx`].)
    pub fn show(&mut self, ui: &mut egui::Ui, view: &SuggestView) -> Vec<PhraseId> {
        let mut select = Vec::new();
        if self.poll() {
            ui.ctx().request_repaint();
        }
        // follow the tree selection when it changes, unless pinned (a phrase picked in the
        // search box stays until the selection moves)
        if !self.pinned && view.selected != self.followed {
            self.followed = view.selected;
            if view.selected.is_some() {
                self.phrase = view.selected;
            }
        }
        ui.horizontal(|ui| {
            ui.heading("Suggestion preview");
            ui.checkbox(&mut self.pinned, "Pin this phrase")
                .on_hover_text(
                    "Keep showing this phrase while the tree selection changes; \
                 unticked, the preview follows the tree selection",
                );
        });
        self.picker(ui, view);
        ui.separator();
        let users = &view.project.users;
        let user_label = match self.user.and_then(|i| users.get(i)) {
            Some(u) => u.label.clone(),
            None => "Any shopper (generic)".to_string(),
        };
        egui::ComboBox::from_label("Shopper profile")
            .selected_text(user_label)
            .show_ui(ui, |ui| {
                ui.selectable_value(&mut self.user, None, "Any shopper (generic)");
                for (i, u) in users.iter().enumerate() {
                    ui.selectable_value(&mut self.user, Some(i), u.label.as_str());
                }
            });
        let user_name = self
            .user
            .and_then(|i| users.get(i))
            .map(|u| u.label.clone());
        match self.suggestions(view).cloned() {
            None => {
                ui.label("Pick a phrase to see what a shopper would be offered.");
            }
            Some(Err(e)) => {
                ui.colored_label(ui.visuals().warn_fg_color, format!("⚠ {e}"));
            }
            Some(Ok(s)) => {
                ui.label(egui::RichText::new(s.preview_line()).strong());
                if let Some(a) = &s.phrase.redirected_from {
                    ui.label(format!("(\"{a}\" is merged into \"{}\")", s.phrase.label));
                }
                for (title, list) in [
                    ("Broader", &s.broader),
                    ("Narrower", &s.narrower),
                    ("Siblings", &s.siblings),
                ] {
                    ui.add_space(4.0);
                    ui.strong(title);
                    offer_table(ui, title, list, user_name.as_deref(), &mut select);
                }
            }
        }
        ui.separator();
        self.bulk_ui(ui, view, &mut select);
        select
    }

    fn picker(&mut self, ui: &mut egui::Ui, view: &SuggestView) {
        ui.horizontal(|ui| {
            ui.add(
                egui::TextEdit::singleline(&mut self.search)
                    .hint_text("Search a phrase")
                    .desired_width(200.0),
            );
            if let Some(sel) = view.selected
                && ui.button("Use tree selection").clicked()
            {
                self.phrase = Some(sel);
                self.search.clear();
            }
        });
        let q = self.search.trim().to_lowercase();
        if !q.is_empty() {
            let phrases = &view.project.phrases;
            // scan the labels only when the query or the tree changed, not every frame
            let fresh =
                matches!(&self.matches, Some((mq, mr, _)) if *mq == q && *mr == view.revision);
            if !fresh {
                // labels in every language, after NFC and case folding
                let qf = crate::model::lang::fold(&q, None);
                let found: Vec<PhraseId> = (0..phrases.len() as PhraseId)
                    .filter(|&p| view.eff.any_label_contains(p, &qf) || phrases.id(p).contains(&q))
                    .take(8)
                    .collect();
                self.matches = Some((q.clone(), view.revision, found));
            }
            let matches = self
                .matches
                .as_ref()
                .map(|m| m.2.clone())
                .unwrap_or_default();
            if matches.is_empty() {
                ui.label("No phrase matches.");
            }
            for p in matches {
                if ui
                    .selectable_label(self.phrase == Some(p), view.eff.label(p))
                    .clicked()
                {
                    self.phrase = Some(p);
                    self.search.clear();
                }
            }
        }
    }

    fn bulk_ui(&mut self, ui: &mut egui::Ui, view: &SuggestView, select: &mut Vec<PhraseId>) {
        ui.strong("Bulk check");
        ui.horizontal(|ui| {
            if let Some(job) = &self.job {
                let done = job.done.load(Ordering::Relaxed);
                let frac = done as f32 / job.total.max(1) as f32;
                ui.add(
                    egui::ProgressBar::new(frac)
                        .desired_width(160.0)
                        .text(format!("{done} / {}", job.total)),
                );
                if ui.button("Cancel bulk check").clicked() {
                    job.cancel.store(true, Ordering::Relaxed);
                }
            } else if ui.button("Run bulk check").clicked() {
                self.start_bulk(view);
            }
            if !self.status.is_empty() {
                ui.label(&self.status);
            }
        });
        let Some(rows) = &self.bulk else {
            ui.label("Checks every phrase's top broader offer: not an ancestor, weak containment, shoppers disagreeing.");
            return;
        };
        if self.bulk_revision != view.revision {
            ui.label("The tree changed since this check; run it again to refresh.");
        }
        ui.horizontal(|ui| {
            ui.checkbox(&mut self.only_flagged, "Only flagged");
            ui.add(
                egui::TextEdit::singleline(&mut self.filter)
                    .hint_text("Filter phrases")
                    .desired_width(140.0),
            );
            ui.label("Sort:");
            ui.selectable_value(&mut self.sort, BulkSort::Tree, "tree");
            ui.selectable_value(&mut self.sort, BulkSort::Phrase, "phrase");
            ui.selectable_value(&mut self.sort, BulkSort::Containment, "containment");
            ui.selectable_value(&mut self.sort, BulkSort::Disagreement, "disagreement");
            if ui.button("Export CSV…").clicked()
                && let Some(path) = rfd::FileDialog::new()
                    .set_file_name("suggestions.csv")
                    .add_filter("CSV", &["csv"])
                    .save_file()
            {
                self.status = match crate::model::fsutil::atomic_write(
                    &path,
                    bulk_csv(rows).as_bytes(),
                    false,
                ) {
                    Ok(()) => format!("Saved {}", path.display()),
                    Err(e) => format!("Cannot write {}: {e}", path.display()),
                };
            }
        });
        let f = self.filter.to_lowercase();
        let mut shown: Vec<&BulkRow> = rows
            .iter()
            .filter(|r| !self.only_flagged || r.flagged())
            .filter(|r| f.is_empty() || r.label.to_lowercase().contains(&f) || r.id.contains(&f))
            .collect();
        match self.sort {
            BulkSort::Tree => {}
            BulkSort::Phrase => shown.sort_by(|a, b| a.label.cmp(&b.label)),
            BulkSort::Containment => shown.sort_by(|a, b| a.containment.total_cmp(&b.containment)),
            BulkSort::Disagreement => {
                shown.sort_by(|a, b| b.user_disagreement.total_cmp(&a.user_disagreement))
            }
        }
        ui.label(format!("{} of {} rows", shown.len(), rows.len()));
        let row_h = 18.0;
        egui::ScrollArea::vertical()
            .id_salt("bulk-table")
            .max_height(260.0)
            .show_rows(ui, row_h, shown.len(), |ui, range| {
                egui::Grid::new("bulk-grid").striped(true).show(ui, |ui| {
                    ui.strong("phrase");
                    ui.strong("top broader offer");
                    ui.strong("containment");
                    ui.strong("shoppers differing");
                    ui.strong("flags");
                    ui.end_row();
                    for r in &shown[range] {
                        if ui.link(&r.label).clicked()
                            && let Some(p) = view.project.phrases.get(&r.id)
                        {
                            select.push(p);
                        }
                        if r.top_broader.is_empty() {
                            ui.label("—");
                        } else if ui.link(&r.top_broader_label).clicked()
                            && let Some(p) = view.project.phrases.get(&r.top_broader)
                        {
                            select.push(p);
                        }
                        ui.label(format!("{:.2}", r.containment));
                        ui.label(format!("{:.0} %", 100.0 * r.user_disagreement));
                        let mut flags = Vec::new();
                        if r.not_ancestor {
                            flags.push("not an ancestor");
                        }
                        if r.weak_containment {
                            flags.push("weak containment");
                        }
                        if r.users_disagree {
                            flags.push("shoppers disagree");
                        }
                        ui.label(if flags.is_empty() {
                            "ok".to_string()
                        } else {
                            format!("⚠ {}", flags.join(", "))
                        });
                        ui.end_row();
                    }
                });
            });
    }
}

fn offer_table(
    ui: &mut egui::Ui,
    title: &str,
    list: &[Candidate],
    user: Option<&str>,
    select: &mut Vec<PhraseId>,
) {
    if list.is_empty() {
        ui.label("(none)");
        return;
    }
    egui::Grid::new(format!("offers-{title}"))
        .striped(true)
        .show(ui, |ui| {
            ui.strong("generic order");
            if let Some(u) = user {
                ui.strong(format!("for {u}"));
            }
            ui.strong("containment");
            ui.strong("KL");
            ui.strong("overlap");
            ui.strong("relation");
            ui.end_row();
            let mut personal: Vec<&Candidate> = list.iter().collect();
            personal.sort_by_key(|c| c.personal_rank.unwrap_or(c.generic_rank));
            for (i, c) in list.iter().enumerate() {
                if ui.link(format!("{}. {}", i + 1, c.label)).clicked() {
                    select.push(c.phrase);
                }
                if user.is_some() {
                    let p = personal[i];
                    let moved = if p.generic_rank < i {
                        " ▼"
                    } else if p.generic_rank > i {
                        " ▲"
                    } else {
                        ""
                    };
                    if ui.link(format!("{}. {}{moved}", i + 1, p.label)).clicked() {
                        select.push(p.phrase);
                    }
                }
                ui.label(format!("{:.2}", c.containment));
                ui.label(format!("{:.2}", c.kl));
                ui.label(format!("{:.3}", c.overlap));
                let rel = format!("{:?}", c.relation).to_lowercase();
                ui.label(if c.in_tree {
                    rel
                } else {
                    format!("{rel} (not in tree)")
                });
                ui.end_row();
            }
        });
}
