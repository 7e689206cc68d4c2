//! Export the effective tree as SKOS (Turtle), CSV or JSON.

use std::path::PathBuf;

use crate::model::Project;

use egui::{Id, Modal};

use super::super::context::{Action, ViewCtx};
use super::{DialogOut, ok_cancel};
use crate::model::export::Format;

/// State of the export dialog.
pub struct ExportDialog {
    format: Format,
    path: String,
    base_iri: String,
    scheme_label: String,
}

fn default_path(project: &Project, f: Format) -> String {
    project
        .dir
        .join("exports")
        .join(format!("tree.{}", f.extension()))
        .display()
        .to_string()
}

impl ExportDialog {
    /// Defaults: SKOS into the project's `exports/` folder.
    pub fn new(view: &ViewCtx) -> Self {
        let name = view.project.manifest.name.clone();
        let slug: String = name
            .to_lowercase()
            .chars()
            .map(|c| if c.is_ascii_alphanumeric() { c } else { '-' })
            .collect();
        ExportDialog {
            format: Format::Skos,
            path: default_path(view.project, Format::Skos),
            base_iri: format!("https://example.org/{}/", slug.trim_matches('-')),
            scheme_label: name,
        }
    }

    /// Draw it.
    pub fn ui(&mut self, ctx: &egui::Context, view: &ViewCtx) -> DialogOut {
        let mut out = DialogOut::default();
        let resp = Modal::new(Id::unique("export-dialog")).show(ctx, |ui| {
            ui.set_width(480.0);
            ui.heading("Export the effective tree");
            let before = self.format;
            ui.horizontal(|ui| {
                ui.label("Format:");
                ui.radio_value(&mut self.format, Format::Skos, "SKOS (Turtle)");
                ui.radio_value(&mut self.format, Format::Csv, "CSV");
                ui.radio_value(&mut self.format, Format::Json, "JSON");
            });
            if before != self.format && self.path == default_path(view.project, before) {
                self.path = default_path(view.project, self.format);
            }
            egui::Grid::new("export-grid")
                .num_columns(2)
                .show(ui, |ui| {
                    ui.label("File:");
                    ui.horizontal(|ui| {
                        ui.add(
                            egui::TextEdit::singleline(&mut self.path)
                                .desired_width(330.0)
                                .hint_text("output file"),
                        );
                        if ui.button("Browse…").clicked()
                            && let Some(p) = rfd::FileDialog::new()
                                .set_directory(&view.project.dir)
                                .set_file_name(format!("tree.{}", self.format.extension()))
                                .save_file()
                        {
                            self.path = p.display().to_string();
                        }
                    });
                    ui.end_row();
                    if self.format == Format::Skos {
                        ui.label("Base IRI:");
                        ui.add(
                            egui::TextEdit::singleline(&mut self.base_iri).hint_text("base IRI"),
                        );
                        ui.end_row();
                        ui.label("Scheme label:");
                        ui.add(
                            egui::TextEdit::singleline(&mut self.scheme_label)
                                .hint_text("scheme label"),
                        );
                        ui.end_row();
                    }
                });
            let (ok, cancel) = ok_cancel(ui, "Export", !self.path.trim().is_empty());
            if ok {
                out = DialogOut::act(vec![Action::Export {
                    format: self.format,
                    path: PathBuf::from(self.path.trim()),
                    base_iri: self.base_iri.trim().to_string(),
                    scheme_label: self.scheme_label.trim().to_string(),
                }]);
            } else if cancel {
                out = DialogOut::close();
            }
        });
        if resp.should_close() {
            out.close = true;
        }
        out
    }
}
