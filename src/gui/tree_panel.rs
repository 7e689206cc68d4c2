//! The tree panel: an expandable, virtualised list of the tree's nodes.

use crate::model::{PhraseId, Project};

use super::app::Action;

/// Height of one row in points.
const ROW_HEIGHT: f32 = 20.0;

/// State of the tree panel: which nodes are expanded, and the flattened visible rows.
pub struct TreePanel {
    expanded: Vec<bool>,
    rows: Vec<(PhraseId, u32)>,
    dirty: bool,
}

impl TreePanel {
    /// A panel with the root expanded.
    pub fn new(project: &Project) -> Self {
        let mut expanded = vec![false; project.phrases.len()];
        if let Some(t) = &project.tree {
            expanded[t.root() as usize] = true;
        }
        TreePanel {
            expanded,
            rows: Vec::new(),
            dirty: true,
        }
    }

    /// Expand or collapse a node.
    pub fn set_expanded(&mut self, p: PhraseId, open: bool) {
        self.expanded[p as usize] = open;
        self.dirty = true;
    }

    /// Expand every node.
    pub fn expand_all(&mut self) {
        self.expanded.iter_mut().for_each(|e| *e = true);
        self.dirty = true;
    }

    /// Rows currently visible when scrolled through: (node, depth).
    pub fn visible_rows(&mut self, project: &Project) -> &[(PhraseId, u32)] {
        if self.dirty {
            self.rows.clear();
            if let Some(t) = &project.tree {
                let mut stack = vec![(t.root(), 0u32)];
                while let Some((x, depth)) = stack.pop() {
                    self.rows.push((x, depth));
                    if self.expanded[x as usize] {
                        for &c in t.children(x).iter().rev() {
                            stack.push((c, depth + 1));
                        }
                    }
                }
            }
            self.dirty = false;
        }
        &self.rows
    }

    /// Draw the panel.
    pub fn ui(
        &mut self,
        ui: &mut egui::Ui,
        project: &Project,
        selection: &[PhraseId],
    ) -> Vec<Action> {
        let mut actions = Vec::new();
        ui.heading("Tree");
        let Some(tree) = &project.tree else {
            ui.label("This project has no tree yet.");
            return actions;
        };
        let rows = self.visible_rows(project).to_vec();
        let mut toggles = Vec::new();
        egui::ScrollArea::vertical()
            .auto_shrink([false, false])
            .show_rows(ui, ROW_HEIGHT, rows.len(), |ui, range| {
                for &(p, depth) in &rows[range] {
                    ui.horizontal(|ui| {
                        ui.add_space(depth as f32 * 14.0);
                        let kids = tree.children(p).len();
                        if kids > 0 {
                            let open = self.expanded[p as usize];
                            let icon = if open { "⏷" } else { "⏵" };
                            if ui
                                .small_button(icon)
                                .on_hover_text(if open { "Collapse" } else { "Expand" })
                                .clicked()
                            {
                                toggles.push((p, !open));
                            }
                        } else {
                            ui.add_space(18.0);
                        }
                        let label = project.phrases.label(p);
                        let text = if kids > 0 {
                            format!("{label}  ({kids})")
                        } else {
                            label.to_string()
                        };
                        if ui.selectable_label(selection.contains(&p), text).clicked() {
                            actions.push(Action::Select(p));
                        }
                    });
                }
            });
        for (p, open) in toggles {
            self.set_expanded(p, open);
        }
        actions
    }
}
