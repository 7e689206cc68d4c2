//! Help dialogs: keyboard shortcuts and about.

use egui::{Id, Modal};

use super::super::shortcuts::{GLOBAL, PLOT_KEYS, QUEUE_KEYS, TREE_KEYS};
use super::DialogOut;

/// The shortcut list.
pub fn shortcuts(ctx: &egui::Context) -> DialogOut {
    let mut out = DialogOut::default();
    let resp = Modal::new(Id::unique("shortcuts-dialog")).show(ctx, |ui| {
        ui.heading("Keyboard shortcuts");
        egui::Grid::new("keys-global")
            .num_columns(2)
            .striped(true)
            .show(ui, |ui| {
                for (k, _, what) in GLOBAL {
                    ui.monospace(ctx.format_shortcut(k));
                    ui.label(*what);
                    ui.end_row();
                }
            });
        ui.label(egui::RichText::new("Tree").strong());
        egui::Grid::new("keys-tree")
            .num_columns(2)
            .striped(true)
            .show(ui, |ui| {
                for (k, what) in TREE_KEYS {
                    ui.monospace(*k);
                    ui.label(*what);
                    ui.end_row();
                }
            });
        ui.label(egui::RichText::new("Ellipse view").strong());
        egui::Grid::new("keys-plot")
            .num_columns(2)
            .striped(true)
            .show(ui, |ui| {
                for (k, what) in PLOT_KEYS {
                    ui.monospace(*k);
                    ui.label(*what);
                    ui.end_row();
                }
            });
        ui.label(egui::RichText::new("Review queue").strong());
        egui::Grid::new("keys-queue")
            .num_columns(2)
            .striped(true)
            .show(ui, |ui| {
                for (k, what) in QUEUE_KEYS {
                    ui.monospace(*k);
                    ui.label(*what);
                    ui.end_row();
                }
            });
        if ui.button("Close").clicked() {
            out.close = true;
        }
    });
    if resp.should_close() {
        out.close = true;
    }
    out
}

/// About treewright.
pub fn about(ctx: &egui::Context) -> DialogOut {
    let mut out = DialogOut::default();
    let resp = Modal::new(Id::unique("about-dialog")).show(ctx, |ui| {
        ui.heading(format!("treewright {}", env!("CARGO_PKG_VERSION")));
        ui.label(env!("CARGO_PKG_DESCRIPTION"));
        ui.label(
            "Each phrase is a Gaussian; broad phrases have a large ln det Σ. Curators fix the \
             machine-built tree with edits kept in the override file; reviewers audit and sign off.",
        );
        if ui.button("Close").clicked() {
            out.close = true;
        }
    });
    if resp.should_close() {
        out.close = true;
    }
    out
}
