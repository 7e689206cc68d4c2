//! The review queue (right, above the findings): nodes in order of risk (finding confidence
//! × reach, [`crate::model::queue`]), the current one with why it is queued and the
//! suggested decision, and the keyboard flow of a review session:
//!
//! | key | does |
//! |---|---|
//! | N / P | next / previous node still waiting |
//! | A | approve the node (then the next one) |
//! | F | mark it to fix, with a comment (the review dialog) |
//! | S | apply the suggested edit (its impact preview is the button's tooltip) |
//! | K | skip it for now (it comes back after the open ones) |
//!
//! Keys act only when no text field has the focus. The progress (reviewed / queued, the
//! weighted share) is shown here and in the status bar. The queue itself is held by the
//! shell and updated incrementally after each edit; this panel holds only the cached
//! preview.

use egui::{Key, RichText};

use crate::model::PhraseId;
use crate::model::edit::{Edit, ReviewStatus};
use crate::model::queue::{ItemState, QueueItem, ReviewQueue};

use super::badges;
use super::context::{Action, DialogRequest, Panel, PanelKind, ViewCtx};

/// How many rows the list shows before it scrolls.
const LIST_ROWS: f32 = 6.0;

/// State of the queue panel: the impact preview of the current suggestion, per generation.
#[derive(Default)]
pub struct QueuePanel {
    preview: Option<(u64, Edit, Result<Vec<String>, String>)>,
}

/// The row the panel works on: the selected node when it is queued, else the first one
/// still waiting.
pub fn current(queue: &ReviewQueue, selection: &[PhraseId]) -> Option<usize> {
    selection
        .first()
        .and_then(|&p| queue.position(p))
        .or_else(|| queue.next_open(None))
}

fn state_badge(s: ItemState) -> RichText {
    match s {
        ItemState::Open => badges::pill("OPEN", badges::ORANGE),
        ItemState::Approved => badges::pill("APPROVED", badges::SKY),
        ItemState::ToFix => badges::pill("TO FIX", badges::ORANGE),
        ItemState::Resolved => badges::pill("RESOLVED", badges::SKY),
        ItemState::Skipped => badges::pill("SKIPPED", badges::ORANGE),
    }
}

impl QueuePanel {
    fn preview_lines(&mut self, view: &ViewCtx, edit: &Edit) -> Result<Vec<String>, String> {
        let fresh = matches!(&self.preview, Some((g, e, _)) if *g == view.generation && e == edit);
        if !fresh {
            let r = view.queries.preview(edit).map(|i| i.lines());
            self.preview = Some((view.generation, edit.clone(), r));
        }
        self.preview
            .as_ref()
            .map(|p| p.2.clone())
            .unwrap_or_else(|| Err("no preview".into()))
    }

    fn item_ui(
        &mut self,
        ui: &mut egui::Ui,
        view: &ViewCtx,
        queue: &ReviewQueue,
        i: usize,
        actions: &mut Vec<Action>,
    ) {
        let x: &QueueItem = &queue.items[i];
        let id = view.project.phrases.id(x.node).to_string();
        ui.horizontal(|ui| {
            ui.label(state_badge(x.state));
            ui.label(RichText::new(format!("\"{}\"", x.label)).strong());
        });
        ui.label(
            RichText::new(format!(
                "risk {:.2} = confidence {:.2} × reach {}",
                x.risk, x.confidence, x.reach
            ))
            .small(),
        );
        ui.add(egui::Label::new(format!("Why: {}", badges::plain(&x.why))).wrap());
        ui.add(egui::Label::new(format!("Suggested: {}", x.suggested)).wrap());
        let typing = ui.ctx().memory(|m| m.focused().is_some());
        let pressed = [Key::P, Key::N, Key::A, Key::F, Key::S, Key::K]
            .map(|k| !typing && ui.input(|inp| inp.key_pressed(k)));
        let key = |k: Key| match k {
            Key::P => pressed[0],
            Key::N => pressed[1],
            Key::A => pressed[2],
            Key::F => pressed[3],
            Key::S => pressed[4],
            _ => pressed[5],
        };
        let (prev, next) = (queue.previous_open(Some(i)), queue.next_open(Some(i)));
        let next_after = next.filter(|&n| n != i);
        ui.horizontal_wrapped(|ui| {
            if (ui
                .button("Previous (P)")
                .on_hover_text("The previous node still waiting")
                .clicked()
                || key(Key::P))
                && let Some(p) = prev
            {
                actions.push(Action::Reveal(queue.items[p].node));
            }
            if (ui
                .button("Next (N)")
                .on_hover_text("The next node still waiting")
                .clicked()
                || key(Key::N))
                && let Some(n) = next
            {
                actions.push(Action::Reveal(queue.items[n].node));
            }
            if ui
                .button("Approve (A)")
                .on_hover_text("A: the node is fine as it is (a review edit), then the next one")
                .clicked()
                || key(Key::A)
            {
                actions.push(Action::Edit(Edit::Review {
                    node: id.clone(),
                    status: ReviewStatus::Approved,
                    comment: format!("approved from the review queue: {}", x.rule),
                }));
                if let Some(n) = next_after {
                    actions.push(Action::Reveal(queue.items[n].node));
                }
            }
            if ui
                .button("Mark to fix (F)…")
                .on_hover_text("F: record \"to fix\" with a comment")
                .clicked()
                || key(Key::F)
            {
                actions.push(Action::Dialog(DialogRequest::Review(
                    x.node,
                    ReviewStatus::ToFix,
                )));
            }
            if let Some(edit) = &x.edit {
                let check = view.check(edit);
                let b = ui.add_enabled(check.is_ok(), egui::Button::new("Apply suggestion (S)"));
                let b = match &check {
                    Ok(()) => b.on_hover_ui(|ui| match self.preview_lines(view, edit) {
                        Ok(lines) => {
                            ui.label("S: apply it (one edit; Ctrl+Z undoes)");
                            for l in lines {
                                ui.label(l);
                            }
                        }
                        Err(e) => {
                            ui.label(format!("No preview: {e}"));
                        }
                    }),
                    Err(w) => b.on_disabled_hover_text(format!("Cannot apply: {w}")),
                };
                if (b.clicked() || key(Key::S)) && check.is_ok() {
                    actions.push(Action::Edit(edit.clone()));
                    if let Some(n) = next_after {
                        actions.push(Action::Reveal(queue.items[n].node));
                    }
                }
            }
            if ui
                .button("Skip (K)")
                .on_hover_text("K: leave it for later")
                .clicked()
                || key(Key::K)
            {
                actions.push(Action::SkipQueued(x.node));
                if let Some(n) = next_after {
                    actions.push(Action::Reveal(queue.items[n].node));
                }
            }
        });
    }
}

impl Panel for QueuePanel {
    fn kind(&self) -> PanelKind {
        PanelKind::Queue
    }

    fn ui(&mut self, ui: &mut egui::Ui, view: &ViewCtx) -> Vec<Action> {
        let mut actions = Vec::new();
        ui.horizontal(|ui| {
            ui.strong("Review queue");
            if let Some(q) = view.queue {
                ui.label(format!("Progress: {}", q.progress().text()))
                    .on_hover_text(
                        "reviewed = approved, marked to fix or resolved by an edit; the share \
                         weighs each node by its reach (subtree size, or traffic from the \
                         manifest's weights file)",
                    );
            }
        });
        let Some(queue) = view.queue else {
            ui.label(if view.auditing {
                "The queue follows when the audit is done."
            } else {
                "No audit, no queue."
            });
            return actions;
        };
        if queue.items.is_empty() {
            ui.label("Nothing queued: the audit has no finding about a node.");
            return actions;
        }
        match current(queue, view.selection) {
            Some(i) => self.item_ui(ui, view, queue, i, &mut actions),
            None => {
                ui.label("Every queued node is reviewed.");
            }
        }
        let row_h = ui.spacing().interact_size.y;
        egui::ScrollArea::vertical()
            .id_salt("queue-rows")
            .max_height(row_h * LIST_ROWS)
            .auto_shrink([false, true])
            .show_rows(ui, row_h, queue.items.len(), |ui, range| {
                for k in range {
                    let x = &queue.items[k];
                    let selected = view.selection.first() == Some(&x.node);
                    ui.horizontal(|ui| {
                        ui.label(RichText::new(x.state.as_str()).small());
                        let r = ui.add(
                            egui::Button::selectable(
                                selected,
                                format!("{}. {} — {}", k + 1, x.label, x.rule),
                            )
                            .truncate(),
                        );
                        if r.clicked() {
                            actions.push(Action::Reveal(x.node));
                        }
                    });
                }
            });
        actions
    }
}
