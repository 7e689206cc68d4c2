//! Searchable picker of a target node for "Reparent to…" and "Merge into…".

use std::collections::HashMap;

use egui::{Id, Modal};

use crate::model::PhraseId;
use crate::model::edit::Edit;

use super::super::badges::plain;
use super::super::context::{Action, PickerKind, ViewCtx};
use super::{DialogOut, ok_cancel};

/// Most candidates listed at once (the search narrows the rest).
const MAX_LISTED: usize = 200;

/// State of the picker.
pub struct PickerDialog {
    kind: PickerKind,
    /// The nodes to move or merge.
    nodes: Vec<PhraseId>,
    query: String,
    target: Option<PhraseId>,
    focused: bool,
    /// Candidates for (query, generation).
    candidates: Option<((String, u64), Vec<PhraseId>)>,
    /// Why a target is refused (None = allowed), for the current generation.
    refusals: (u64, HashMap<PhraseId, Option<String>>),
    /// Impact preview of the chosen target: (target, generation, lines or why none).
    preview: Option<(PhraseId, u64, Result<Vec<String>, String>)>,
}

impl PickerDialog {
    /// Pick a target for `node`; when `node` is part of a multi-selection, all of it moves.
    pub fn new(kind: PickerKind, node: PhraseId, selection: &[PhraseId]) -> Self {
        let nodes = if selection.contains(&node) && kind == PickerKind::Merge {
            selection.to_vec()
        } else {
            vec![node]
        };
        PickerDialog {
            kind,
            nodes,
            query: String::new(),
            target: None,
            focused: false,
            candidates: None,
            refusals: (0, HashMap::new()),
            preview: None,
        }
    }

    fn edits(&self, view: &ViewCtx, target: PhraseId) -> Vec<Edit> {
        let ids = |p: PhraseId| view.project.phrases.id(p).to_string();
        match self.kind {
            PickerKind::Reparent => self
                .nodes
                .iter()
                .map(|&n| Edit::Reparent {
                    node: ids(n),
                    parent: ids(target),
                })
                .collect(),
            PickerKind::Merge => vec![Edit::Merge {
                sources: self
                    .nodes
                    .iter()
                    .filter(|&&n| n != target)
                    .map(|&n| ids(n))
                    .collect(),
                into: ids(target),
            }],
        }
    }

    /// Draw it.
    pub fn ui(&mut self, ctx: &egui::Context, view: &ViewCtx) -> DialogOut {
        let mut out = DialogOut::default();
        let Some(eff) = view.eff else {
            return DialogOut::close();
        };
        let names: Vec<&str> = self.nodes.iter().map(|&n| eff.label(n)).collect();
        let (title, verb) = match self.kind {
            PickerKind::Reparent => ("Reparent to…", "Move here"),
            PickerKind::Merge => ("Merge into…", "Merge"),
        };
        let resp = Modal::new(Id::unique("picker-dialog")).show(ctx, |ui| {
            ui.set_width(420.0);
            ui.heading(title);
            ui.label(format!("Node(s): {}", names.join(", ")));
            let r = ui.add(
                egui::TextEdit::singleline(&mut self.query)
                    .hint_text("type to search the tree")
                    .desired_width(400.0),
            );
            if !self.focused {
                r.request_focus();
                self.focused = true;
            }
            let q = self.query.trim().to_lowercase();
            let key = (q.clone(), view.generation);
            if self.candidates.as_ref().is_none_or(|c| c.0 != key) {
                let list: Vec<PhraseId> = eff
                    .tree
                    .preorder()
                    .into_iter()
                    .filter(|p| !self.nodes.contains(p))
                    .filter(|&p| {
                        // labels in every language, after NFC and case folding
                        q.is_empty()
                            || eff.any_label_contains(p, &crate::model::lang::fold(&q, None))
                    })
                    .take(MAX_LISTED)
                    .collect();
                self.candidates = Some((key, list));
            }
            if self.refusals.0 != view.generation {
                self.refusals = (view.generation, HashMap::new());
            }
            let candidates = self
                .candidates
                .as_ref()
                .map(|c| c.1.clone())
                .unwrap_or_default();
            ui.label(format!("{} candidate(s) shown", candidates.len()));
            egui::ScrollArea::vertical()
                .id_salt("picker-list")
                .max_height(260.0)
                .show_rows(ui, 20.0, candidates.len(), |ui, range| {
                    for &p in &candidates[range] {
                        let edits = self.edits(view, p);
                        let why = self
                            .refusals
                            .1
                            .entry(p)
                            .or_insert_with(|| edits.iter().find_map(|e| view.check(e).err()))
                            .clone();
                        let parent = eff
                            .tree
                            .parent(p)
                            .map(|q| {
                                format!(
                                    "  (under {})",
                                    super::super::fonts::display_label(view.label(q))
                                )
                            })
                            .unwrap_or_default();
                        let text = format!(
                            "{}{parent}",
                            super::super::fonts::display_label(view.label(p))
                        );
                        let r = ui.add_enabled(
                            why.is_none(),
                            egui::Button::selectable(self.target == Some(p), text),
                        );
                        let r = match &why {
                            Some(w) => {
                                r.on_disabled_hover_text(plain(&format!("Not possible: {w}")))
                            }
                            None => r,
                        };
                        if r.clicked() {
                            self.target = Some(p);
                        }
                        if r.double_clicked() {
                            out = DialogOut::act(edits.into_iter().map(Action::Edit).collect());
                        }
                    }
                });
            ui.separator();
            if let Some(t) = self.target {
                ui.label(format!("Target: {}", eff.label(t)));
                // what the edit would do, before it is confirmed (one edit at a time)
                let fresh =
                    matches!(&self.preview, Some((pt, g, _)) if *pt == t && *g == view.generation);
                if !fresh {
                    let edits = self.edits(view, t);
                    let lines = match edits.as_slice() {
                        [e] => view.queries.preview(e).map(|i| i.lines()),
                        _ => Err("shown for one node at a time".into()),
                    };
                    self.preview = Some((t, view.generation, lines));
                }
                if let Some((_, _, lines)) = &self.preview {
                    match lines {
                        Ok(l) => {
                            for line in l {
                                ui.label(egui::RichText::new(line.as_str()).small());
                            }
                        }
                        Err(e) => {
                            ui.weak(format!("No preview: {e}"));
                        }
                    }
                }
            } else {
                ui.label("Click a target above.");
            }
            let (ok, cancel) = ok_cancel(ui, verb, self.target.is_some());
            if ok && let Some(t) = self.target {
                out = DialogOut::act(self.edits(view, t).into_iter().map(Action::Edit).collect());
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
