//! After File ▸ Import taxonomy…: what matched and what did not, list by list with counts,
//! each list copyable (one entry a line) and the whole report too.

use egui::{Id, Modal};

use super::DialogOut;
use crate::model::project::SkosReport;

/// The import report.
#[derive(Debug, Clone)]
pub struct TaxonomyReportDialog {
    /// The file imported (as the user picked it).
    pub file: String,
    /// What matched.
    pub report: SkosReport,
}

/// The report's lists: (title, entries).
fn sections(r: &SkosReport) -> [(&'static str, &[String]); 4] {
    [
        ("Concepts that match no phrase", &r.unmatched_concepts),
        ("Phrases that match no concept", &r.unmatched_phrases),
        ("Concepts with several broader concepts", &r.several_broader),
        (
            "Concepts matching a phrase an earlier concept matched",
            &r.duplicate_matches,
        ),
    ]
}

impl TaxonomyReportDialog {
    /// The report for `file`.
    pub fn new(file: impl Into<String>, report: SkosReport) -> Self {
        TaxonomyReportDialog {
            file: file.into(),
            report,
        }
    }

    /// One-line summary.
    pub fn summary(&self) -> String {
        format!(
            "{} of {} concepts matched a phrase",
            self.report.matched, self.report.concepts
        )
    }

    /// The whole report as plain text (what "Copy report" puts on the clipboard).
    pub fn text(&self) -> String {
        let mut s = format!("Taxonomy {}: {}\n", self.file, self.summary());
        for (title, list) in sections(&self.report) {
            s.push_str(&format!("\n{title} ({}):\n", list.len()));
            for e in list {
                s.push_str(&format!("  {e}\n"));
            }
        }
        s
    }

    /// Draw the dialog.
    pub fn ui(&mut self, ctx: &egui::Context) -> DialogOut {
        let mut out = DialogOut::default();
        let resp = Modal::new(Id::unique("taxonomy-report-dialog")).show(ctx, |ui| {
            ui.set_max_width(640.0);
            ui.heading("Taxonomy import report");
            ui.label(format!("{}: {}", self.file, self.summary()));
            egui::ScrollArea::vertical()
                .max_height(420.0)
                .show(ui, |ui| {
                    for (title, list) in sections(&self.report) {
                        let head = format!("{title} ({})", list.len());
                        egui::CollapsingHeader::new(&head)
                            .id_salt(title)
                            .default_open(!list.is_empty() && list.len() <= 50)
                            .show(ui, |ui| {
                                if list.is_empty() {
                                    ui.label("None.");
                                    return;
                                }
                                if ui.button(format!("Copy: {title}")).clicked() {
                                    ui.ctx().copy_text(list.join("\n"));
                                }
                                for e in list {
                                    ui.label(e);
                                }
                            });
                    }
                });
            ui.horizontal(|ui| {
                if ui.button("Copy report").clicked() {
                    ui.ctx().copy_text(self.text());
                }
                if ui.button("Close").clicked() {
                    out = DialogOut::close();
                }
            });
        });
        if resp.should_close() {
            out.close = true;
        }
        out
    }
}
