//! The status bar: counts at a glance.

use crate::model::Project;

/// Draw the status bar.
pub fn ui(ui: &mut egui::Ui, project: &Project) {
    ui.horizontal(|ui| {
        ui.label(format!("{} phrases", project.phrases.len()));
        ui.separator();
        match &project.tree {
            Some(t) => {
                ui.label(format!("{} nodes", t.node_count()));
                ui.separator();
                ui.label(format!("{} unplaced", t.unplaced().len()));
            }
            None => {
                ui.label("no tree");
            }
        }
        ui.separator();
        ui.label(format!(
            "d = {} ({})",
            project.gaussians.dim(),
            project.gaussians.kind().as_str()
        ));
    });
}
