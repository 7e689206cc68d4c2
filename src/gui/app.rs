//! The app shell: owns the project and the selection, wires panels to the model.

use std::path::Path;

use crate::model::{LoadError, PhraseId, Project};

use super::status_bar;
use super::tree_panel::TreePanel;

/// Something a panel asks the shell to do.
#[derive(Debug, Clone, PartialEq)]
pub enum Action {
    /// Select one node (replacing the selection).
    Select(PhraseId),
}

/// The workbench window.
pub struct App {
    /// The open project.
    pub project: Project,
    /// Selected phrases.
    pub selection: Vec<PhraseId>,
    tree_panel: TreePanel,
}

impl App {
    /// Load a project and build the panels.
    pub fn open(path: &Path) -> Result<Self, LoadError> {
        let project = Project::load(path)?;
        Ok(Self::new(project))
    }

    /// Wrap an already loaded project.
    pub fn new(project: Project) -> Self {
        let tree_panel = TreePanel::new(&project);
        App {
            project,
            selection: Vec::new(),
            tree_panel,
        }
    }

    fn apply(&mut self, action: Action) {
        match action {
            Action::Select(p) => self.selection = vec![p],
        }
    }

    /// Draw one frame into the window's root `ui`.
    pub fn ui(&mut self, ui: &mut egui::Ui) {
        let mut actions = Vec::new();
        egui::Panel::bottom("status").show(ui, |ui| {
            status_bar::ui(ui, &self.project);
        });
        egui::Panel::left("tree")
            .resizable(true)
            .default_size(340.0)
            .show(ui, |ui| {
                actions.extend(self.tree_panel.ui(ui, &self.project, &self.selection));
            });
        egui::CentralPanel::default().show(ui, |ui| match self.selection.first() {
            Some(&p) => {
                let g = &self.project.gaussians;
                ui.heading(self.project.phrases.label(p));
                ui.label(format!("id: {}", self.project.phrases.id(p)));
                ui.label(format!(
                    "generality (ln det Σ): {:.3}",
                    g.log_det(p as usize)
                ));
                ui.label(format!("entropy: {:.3} nats", g.entropy(p as usize)));
            }
            None => {
                ui.label("Select a phrase in the tree.");
            }
        });
        for a in actions {
            self.apply(a);
        }
    }
}

impl eframe::App for App {
    fn ui(&mut self, ui: &mut egui::Ui, _frame: &mut eframe::Frame) {
        App::ui(self, ui);
    }
}
