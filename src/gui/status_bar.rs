//! The status bar: counts, open findings by severity, unsaved marker, review progress and
//! sign-off state at a glance.

use crate::model::audit::Severity;

use super::badges;
use super::context::{Action, DialogRequest, Panel, PanelKind, SignState, ViewCtx, severity_index};

/// The status bar (no state of its own).
#[derive(Debug, Default)]
pub struct StatusBar;

impl Panel for StatusBar {
    fn kind(&self) -> PanelKind {
        PanelKind::StatusBar
    }

    /// Draw the status bar; it asks for nothing.
    fn ui(&mut self, ui: &mut egui::Ui, view: &ViewCtx) -> Vec<Action> {
        let mut actions = Vec::new();
        status(ui, view, &mut actions);
        actions
    }
}

fn status(ui: &mut egui::Ui, view: &ViewCtx, actions: &mut Vec<Action>) {
    let message = view.message;
    ui.horizontal_wrapped(|ui| {
        ui.label(format!("{} phrases", view.project.phrases.len()));
        ui.separator();
        match view.eff {
            Some(eff) => {
                ui.label(format!("{} nodes", eff.tree.node_count()));
            }
            None => {
                ui.label("no tree");
            }
        }
        ui.separator();
        if view.auditing {
            ui.spinner();
            ui.label("auditing…");
            ui.separator();
        }
        if view.report.is_some() {
            for s in [Severity::Error, Severity::Warning, Severity::Info] {
                let (t, tip) = badges::severity(s);
                ui.label(t).on_hover_text(tip);
                ui.label(format!("{}", view.open_by_severity[severity_index(s)]));
            }
            ui.label("open findings");
            ui.separator();
        }
        if view.dirty {
            ui.label(badges::pill("UNSAVED EDITS", badges::ORANGE))
                .on_hover_text("Edits not yet written to the override file (Ctrl+S saves)");
        } else {
            ui.label("saved");
        }
        ui.separator();
        if let Some(eff) = view.eff {
            ui.label(format!(
                "reviewed: {} approved / {} nodes",
                view.approved,
                eff.tree.node_count()
            ));
            ui.separator();
        }
        match view.queries.sign_state() {
            SignState::Unsigned => {
                ui.label("not signed off");
            }
            SignState::Signed { reviewer, time } => {
                ui.label(badges::pill("SIGNED OFF", badges::SKY))
                    .on_hover_text(format!("by {reviewer} at {time}, at the current tree hash"));
            }
            SignState::Stale { reviewer } => {
                ui.label(badges::pill("SIGN-OFF OUTDATED", badges::ORANGE))
                    .on_hover_text(format!(
                        "{reviewer} signed an earlier tree; it changed since"
                    ));
                let text = match view.queries.changed_since_signoff() {
                    Some(Ok((n, true))) => {
                        Some(format!("changed since sign-off: {n} nodes, see Compare trees"))
                    }
                    Some(Ok((n, false))) => Some(format!(
                        "changed since sign-off: at least {n} nodes (signed tree not kept), see Compare trees"
                    )),
                    Some(Err(e)) => Some(format!("sign-off cannot be compared: {e}")),
                    None => None,
                };
                if let Some(t) = text
                    && ui
                        .link(badges::plain(&t))
                        .on_hover_text("Open Compare trees on the signed tree")
                        .clicked()
                {
                    actions.push(Action::Dialog(DialogRequest::SignedDiff));
                }
            }
        }
        let reverted = view.queries.reverted_signoffs();
        if !reverted.is_empty() {
            ui.label(badges::pill("SIGN-OFF REVERTED", badges::ORANGE))
                .on_hover_text(badges::plain(&reverted.join("\n")));
        }
        // the queue's progress after the sign-off state, so the sign-off link keeps its place
        // on the first row of a 1 280-point window
        if let Some(q) = view.queue {
            ui.separator();
            ui.label(format!("queue: {}", q.progress().text()))
                .on_hover_text("The review queue's progress towards sign-off");
        }
        if !view.problems.is_empty() {
            ui.separator();
            ui.label(format!("{} edit(s) do not apply", view.problems.len()))
                .on_hover_text(
                    view.problems
                        .iter()
                        .map(|p| badges::plain(&format!("#{} {}: {}", p.index + 1, p.op, p.reason)))
                        .collect::<Vec<_>>()
                        .join("\n"),
                );
        }
        if let Some((msg, err)) = message {
            ui.separator();
            if *err {
                ui.label(badges::pill("ERROR", badges::VERMILLION));
            }
            ui.label(badges::plain(msg));
        }
    });
}
