//! "Merge with the file on disk": offered when a save finds the override file changed by
//! someone else. Lists what the other side added and every conflict with both choices side
//! by side; the curator picks per conflict and the shell merges and saves atomically. A
//! placement conflict also gets the two-parent ellipse view: the node with the parent each
//! choice gives it, and how much of the node each parent contains.

use std::collections::{BTreeMap, HashMap};

use egui::{Color32, Id, Modal};
use egui_plot::{LineStyle, MarkerShape};

use crate::model::PhraseId;
use crate::model::gaussian::{Sampled, containment};
use crate::model::merge::{Conflict, MergeOutcome, PlacementChoice, Side, placement_choices};
use crate::model::projection;
use crate::model::signoff::describe_edit;

use super::super::badges::ROLE_COLOURS;
use super::super::context::{Action, ViewCtx};
use super::super::two_parent_plot;
use super::{DialogOut, ok_cancel};

/// Conflicts from which on the ellipse views start folded (each costs two applications of
/// the edits when first opened).
const OPEN_VIEWS_UP_TO: usize = 4;
/// Samples for the containment of the node in each candidate parent.
const CONTAINMENT_SAMPLES: usize = 4000;

/// One node of a placement conflict, ready to draw: where each choice puts it and how much
/// of it (95 % region, sampled) each candidate parent contains.
struct PlacementView {
    choice: PlacementChoice,
    contained: [Option<Sampled>; 2],
}

/// State of the merge dialog.
pub struct MergeDialog {
    outcome: MergeOutcome,
    choices: BTreeMap<String, Side>,
    placements: HashMap<String, Vec<PlacementView>>,
    size: egui::Vec2,
}

impl MergeDialog {
    /// A dialog for a computed merge; every conflict starts on "keep mine".
    pub fn new(outcome: MergeOutcome) -> Self {
        let choices = outcome
            .conflicts
            .iter()
            .map(|c| (c.id.clone(), Side::Ours))
            .collect();
        MergeDialog {
            outcome,
            choices,
            placements: HashMap::new(),
            size: egui::Vec2::ZERO,
        }
    }

    /// Draw it.
    pub fn ui(&mut self, ctx: &egui::Context, view: &ViewCtx) -> DialogOut {
        let mut out = DialogOut::default();
        let resp = Modal::new(Id::unique("merge-dialog")).show(ctx, |ui| {
            ui.set_width(640.0);
            ui.heading("Merge with the file on disk");
            ui.label(format!(
                "Someone else saved the override file. They added {} edit(s); you have {} \
                 unsaved edit(s).",
                self.outcome.added_theirs.len(),
                self.outcome.added_ours.len()
            ));
            egui::ScrollArea::vertical()
                .max_height(420.0)
                .show(ui, |ui| {
                    ui.strong("Added on disk");
                    for r in &self.outcome.added_theirs {
                        ui.label(format!(
                            "{} (by {}, {})",
                            describe_edit(&r.edit),
                            r.author,
                            r.time
                        ));
                    }
                    if self.outcome.conflicts.is_empty() {
                        ui.label("No conflicts: both sets of edits are kept.");
                    }
                    let fold = self.outcome.conflicts.len() > OPEN_VIEWS_UP_TO;
                    for c in &self.outcome.conflicts {
                        ui.separator();
                        ui.strong(format!(
                            "Conflict {} ({}) on {}",
                            c.id,
                            c.kinds.join(", "),
                            c.nodes.join(", ")
                        ));
                        let choice = self.choices.entry(c.id.clone()).or_insert(Side::Ours);
                        ui.columns(2, |cols| {
                            for (col, side, edits, result, title) in [
                                (0, Side::Ours, &c.ours, &c.if_ours, "Keep mine"),
                                (1, Side::Theirs, &c.theirs, &c.if_theirs, "Keep theirs"),
                            ] {
                                let ui = &mut cols[col];
                                ui.radio_value(choice, side, title);
                                for r in edits {
                                    ui.label(format!(
                                        "{} (by {}, {})",
                                        describe_edit(&r.edit),
                                        r.author,
                                        r.time
                                    ));
                                }
                                for line in result {
                                    ui.weak(line);
                                }
                            }
                        });
                        if c.kinds.iter().any(|k| k == "placement") {
                            egui::CollapsingHeader::new(format!("Ellipses for {}", c.id))
                                .id_salt(("merge-ellipses", &c.id))
                                .default_open(!fold)
                                .show(ui, |ui| {
                                    let views = self
                                        .placements
                                        .entry(c.id.clone())
                                        .or_insert_with(|| placement_views(view, &self.outcome, c));
                                    for v in views.iter() {
                                        two_parent_view(ui, view, &c.id, v);
                                    }
                                });
                        }
                    }
                });
            let (ok, cancel) = ok_cancel(ui, "Merge and save", true);
            if ok {
                out = DialogOut::act(vec![Action::FinishMerge(
                    Box::new(self.outcome.clone()),
                    self.choices.clone(),
                )]);
            } else if cancel {
                out = DialogOut::close();
            }
        });
        // the modal is centred by last frame's size: while it still grows (ellipse views
        // opening), draw again so that it settles without waiting for the pointer
        let size = resp.response.rect.size();
        if size != self.size {
            self.size = size;
            ctx.request_repaint();
        }
        if resp.should_close() {
            out.close = true;
        }
        out
    }
}

/// Where the conflict's nodes go under each choice, with the containment in each parent.
fn placement_views(view: &ViewCtx, outcome: &MergeOutcome, c: &Conflict) -> Vec<PlacementView> {
    let Some(base) = view.project.tree.as_ref() else {
        return Vec::new();
    };
    let g = &view.project.gaussians;
    placement_choices(base, &view.project.phrases, &outcome.edits, c)
        .into_iter()
        .map(|choice| {
            let within = |parent: Option<PhraseId>| {
                parent.map(|q| {
                    containment(
                        &g.get(choice.node as usize),
                        &g.get(q as usize),
                        0.95,
                        CONTAINMENT_SAMPLES,
                        u64::from(choice.node),
                    )
                })
            };
            PlacementView {
                contained: [within(choice.if_ours), within(choice.if_theirs)],
                choice,
            }
        })
        .collect()
}

/// The two-parent ellipse view of one node: the node, its parent if mine is kept and its
/// parent if theirs is kept, projected together by PCA, with a caption that says the same in
/// words (containment of the node in each parent).
fn two_parent_view(ui: &mut egui::Ui, view: &ViewCtx, id: &str, v: &PlacementView) {
    let label = |p: PhraseId| match view.eff {
        Some(e) => e.label(p).to_string(),
        None => view.project.phrases.label(p).to_string(),
    };
    let node = v.choice.node;
    let side_text = |parent: Option<PhraseId>, c: Option<Sampled>, who: &str| match (parent, c) {
        (Some(q), Some(c)) => format!(
            "under {} ({who}): {:.0} % of it inside ({:.2} ± {:.2})",
            label(q),
            c.value * 100.0,
            c.value,
            c.std_error
        ),
        _ => format!("no parent ({who}: the root or unplaced)"),
    };
    ui.label(format!(
        "{}: {}; {}",
        label(node),
        side_text(v.choice.if_ours, v.contained[0], "mine"),
        side_text(v.choice.if_theirs, v.contained[1], "theirs")
    ));
    let mut shown: Vec<(PhraseId, &str, Color32, MarkerShape, LineStyle)> = vec![(
        node,
        "node",
        ROLE_COLOURS[0],
        MarkerShape::Diamond,
        LineStyle::Solid,
    )];
    if let Some(q) = v.choice.if_ours {
        shown.push((
            q,
            "parent if mine",
            ROLE_COLOURS[1],
            MarkerShape::Square,
            LineStyle::Solid,
        ));
    }
    if let Some(q) = v.choice.if_theirs {
        shown.push((
            q,
            "parent if theirs",
            ROLE_COLOURS[2],
            MarkerShape::Up,
            LineStyle::dashed_loose(),
        ));
    }
    let g = &view.project.gaussians;
    let gs: Vec<_> = shown.iter().map(|s| g.get(s.0 as usize)).collect();
    let Some(proj) = projection::pca(&gs) else {
        ui.weak("(one dimension: no ellipse view)");
        return;
    };
    two_parent_plot::plot(ui, view, ("merge-two-parents", id, node), &shown, &proj);
}
