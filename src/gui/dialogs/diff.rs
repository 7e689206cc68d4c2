//! Compare trees: the base tree against the effective tree (what the edits changed), or a
//! tree file against the effective tree.

use egui::Window;

use crate::model::diff::{TreeChange, base_vs_effective, compare};
use crate::model::effective::EffectiveTree;
use crate::model::project::load_tree;

use super::super::badges::plain;
use super::super::context::{Action, ViewCtx};
use super::DialogOut;

#[derive(Debug, Clone, PartialEq, Eq)]
enum Against {
    Base,
    File,
}

/// State of the diff window.
pub struct DiffDialog {
    against: Against,
    path: String,
    changes: Option<Result<Vec<TreeChange>, String>>,
    for_generation: Option<u64>,
    filter: String,
}

impl DiffDialog {
    /// Start with base vs effective.
    pub fn new(view: &ViewCtx) -> Self {
        DiffDialog {
            against: Against::Base,
            path: view.project.tree_path().display().to_string(),
            changes: None,
            for_generation: None,
            filter: String::new(),
        }
    }

    fn compute(&mut self, view: &ViewCtx) {
        let Some(eff) = view.eff else {
            self.changes = Some(Err("the project has no tree".into()));
            return;
        };
        let phrases = &view.project.phrases;
        self.changes = Some(match self.against {
            Against::Base => match &view.project.tree {
                Some(base) => Ok(base_vs_effective(base, phrases, eff)),
                None => Err("the project has no base tree".into()),
            },
            Against::File => load_tree(std::path::Path::new(self.path.trim()), phrases)
                .map(|t| compare(&EffectiveTree::from_base(&t, phrases), eff, phrases))
                .map_err(|e| e.to_string()),
        });
        self.for_generation = Some(view.generation);
    }

    fn node_of(c: &TreeChange) -> &str {
        match c {
            TreeChange::Moved { node, .. }
            | TreeChange::Merged { node, .. }
            | TreeChange::Excluded { node }
            | TreeChange::Included { node }
            | TreeChange::Placed { node, .. }
            | TreeChange::Unplaced { node }
            | TreeChange::Renamed { node, .. } => node,
        }
    }

    /// Draw it.
    pub fn ui(&mut self, ctx: &egui::Context, view: &ViewCtx) -> DialogOut {
        let mut out = DialogOut::default();
        if self.against == Against::Base && self.for_generation != Some(view.generation) {
            self.compute(view);
        }
        let mut open = true;
        Window::new("Compare trees")
            .open(&mut open)
            .default_size([520.0, 420.0])
            .resizable(true)
            .show(ctx, |ui| {
                ui.horizontal(|ui| {
                    if ui
                        .radio_value(
                            &mut self.against,
                            Against::Base,
                            "base -> effective (the edits)",
                        )
                        .clicked()
                    {
                        self.compute(view);
                    }
                    ui.radio_value(&mut self.against, Against::File, "tree file -> effective");
                });
                if self.against == Against::File {
                    ui.horizontal(|ui| {
                        ui.add(
                            egui::TextEdit::singleline(&mut self.path)
                                .desired_width(300.0)
                                .hint_text("tree file (JSON or CSV)"),
                        );
                        if ui.button("Browse…").clicked()
                            && let Some(p) = rfd::FileDialog::new()
                                .set_directory(&view.project.dir)
                                .add_filter("tree", &["json", "csv"])
                                .pick_file()
                        {
                            self.path = p.display().to_string();
                        }
                        if ui.button("Compare").clicked() {
                            self.compute(view);
                        }
                    });
                }
                ui.horizontal(|ui| {
                    ui.label("Filter:");
                    ui.add(egui::TextEdit::singleline(&mut self.filter).hint_text("id or label"));
                });
                ui.separator();
                match &self.changes {
                    None => {
                        ui.label("Choose a tree file and press Compare.");
                    }
                    Some(Err(e)) => {
                        ui.label(format!("Cannot compare: {e}"));
                    }
                    Some(Ok(changes)) => {
                        let f = self.filter.trim().to_lowercase();
                        let shown: Vec<&TreeChange> = changes
                            .iter()
                            .filter(|c| f.is_empty() || c.to_string().to_lowercase().contains(&f))
                            .collect();
                        ui.label(format!("{} change(s)", shown.len()));
                        egui::ScrollArea::vertical()
                            .id_salt("diff-list")
                            .auto_shrink([false, false])
                            .show_rows(ui, 18.0, shown.len(), |ui, range| {
                                for c in &shown[range] {
                                    let r = ui
                                        .add(
                                            egui::Button::selectable(false, plain(&c.to_string()))
                                                .truncate(),
                                        )
                                        .on_hover_text("Click to show the node in the tree");
                                    if r.clicked()
                                        && let Some(p) = view.project.phrases.get(Self::node_of(c))
                                    {
                                        out.actions.push(Action::Reveal(p));
                                    }
                                }
                            });
                    }
                }
            });
        if !open {
            out.close = true;
        }
        out
    }
}
