//! Compare trees: the base tree against the effective tree (what the edits changed), a
//! tree file against the effective tree, or the tree the latest sign-off signed against the
//! effective tree (each change with its causes, the comparison `verify` makes).

use egui::Window;

use crate::model::diff::{TreeChange, base_vs_effective, compare};
use crate::model::effective::EffectiveTree;
use crate::model::project::load_tree;
use crate::model::signed::{SignedSource, SinceSignoff};

use super::super::badges::plain;
use super::super::context::{Action, ViewCtx};
use super::DialogOut;

#[derive(Debug, Clone, PartialEq, Eq)]
enum Against {
    Base,
    File,
    Signoff,
}

/// One line of the list: the text shown and the phrase id it is about.
type Row = (String, String);

/// State of the diff window.
pub struct DiffDialog {
    against: Against,
    path: String,
    changes: Option<Result<Vec<Row>, String>>,
    header: Option<String>,
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
            header: None,
            for_generation: None,
            filter: String::new(),
        }
    }

    /// Start with the latest sign-off's tree against the effective tree.
    pub fn on_signoff(view: &ViewCtx) -> Self {
        let mut d = Self::new(view);
        d.against = Against::Signoff;
        d
    }

    fn rows(changes: Vec<TreeChange>) -> Vec<Row> {
        changes
            .iter()
            .map(|c| (c.to_string(), Self::node_of(c).to_string()))
            .collect()
    }

    fn compute(&mut self, view: &ViewCtx) {
        let Some(eff) = view.eff else {
            self.changes = Some(Err("the project has no tree".into()));
            return;
        };
        let phrases = &view.project.phrases;
        self.header = None;
        self.changes = Some(match self.against {
            Against::Base => match &view.project.tree {
                Some(base) => Ok(Self::rows(base_vs_effective(base, phrases, eff))),
                None => Err("the project has no base tree".into()),
            },
            Against::File => load_tree(std::path::Path::new(self.path.trim()), phrases)
                .map(|t| {
                    Self::rows(compare(
                        &EffectiveTree::from_base(&t, phrases),
                        eff,
                        phrases,
                    ))
                })
                .map_err(|e| e.to_string()),
            Against::Signoff => view.queries.since_signoff().map(|s| {
                self.header = Some(signed_header(&s));
                s.changes
                    .iter()
                    .map(|c| (c.to_string(), c.change.node().to_string()))
                    .collect()
            }),
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
        if self.against != Against::File && self.for_generation != Some(view.generation) {
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
                    if ui
                        .radio_value(
                            &mut self.against,
                            Against::Signoff,
                            "signed -> effective (since sign-off)",
                        )
                        .clicked()
                    {
                        self.compute(view);
                    }
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
                        if let Some(h) = &self.header {
                            ui.label(plain(h));
                        }
                        let f = self.filter.trim().to_lowercase();
                        let shown: Vec<&Row> = changes
                            .iter()
                            .filter(|c| f.is_empty() || c.0.to_lowercase().contains(&f))
                            .collect();
                        ui.label(format!("{} change(s)", shown.len()));
                        egui::ScrollArea::vertical()
                            .id_salt("diff-list")
                            .auto_shrink([false, false])
                            .show_rows(ui, 18.0, shown.len(), |ui, range| {
                                for (text, node) in &shown[range] {
                                    let r = ui
                                        .add(
                                            egui::Button::selectable(false, plain(text)).truncate(),
                                        )
                                        .on_hover_text("Click to show the node in the tree");
                                    if r.clicked()
                                        && let Some(p) = view.project.phrases.get(node)
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

/// The line above the list of changes since the sign-off.
fn signed_header(s: &SinceSignoff) -> String {
    let source = match s.signed_tree {
        SignedSource::Snapshot => "signed tree from its snapshot",
        SignedSource::Replayed => "no snapshot; signed tree rebuilt exactly from the edits",
        SignedSource::Missing => {
            "NOT COMPLETE: the signed tree was not kept; only what the edits since changed"
        }
    };
    let base = s
        .base_changed
        .as_deref()
        .map(|b| format!("; {b}"))
        .unwrap_or_default();
    format!(
        "sign-off edit #{}: changed since sign-off: {} nodes ({source}{base})",
        s.index, s.nodes_changed
    )
}
