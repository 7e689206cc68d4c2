//! The findings list (right): the audit's findings with filters by rule and severity and a
//! sort by score. Clicking a finding selects and reveals its node; the buttons apply the
//! suggested fix (one undoable edit) or accept the node as it is (a review edit).
//!
//! Placement doubts the audit is not confident about (the placement rules at info severity,
//! "to consider") are collapsed by default: the list says how many there are and one
//! checkbox shows them.

use std::collections::HashMap;

use egui::{RichText, Sense};

use crate::model::audit::evaluate::is_placement_rule;
use crate::model::audit::{Finding, Severity};
use crate::model::edit::{Edit, ReviewStatus};
use crate::model::queue::score_in_words;

use super::badges;
use super::context::{Action, Panel, PanelKind, ViewCtx};

/// Height of one finding row (title, two lines of explanation, buttons) without spacing.
const ROW_HEIGHT: f32 = 76.0;

/// Sort order.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Sort {
    /// The audit's ranking.
    Rank,
    /// Score, largest first.
    Score,
}

/// State of the findings panel.
pub struct FindingsPanel {
    /// Only this rule (`None` = all).
    pub rule: Option<&'static str>,
    /// Lowest severity shown.
    pub min_severity: Severity,
    /// Include findings accepted as they are.
    pub show_accepted: bool,
    /// Include the low-confidence placement doubts ("to consider"), collapsed by default.
    pub show_consider: bool,
    /// Order.
    pub sort: Sort,
    cache: Option<Cached>,
}

/// Filtered finding indices and rule names, recomputed only when the audit or a filter
/// changes (a big tree has tens of thousands of findings).
struct Cached {
    key: (u64, Option<&'static str>, Severity, bool, bool, Sort),
    rules: Vec<&'static str>,
    shown: Vec<usize>,
    open: usize,
    /// Open findings to consider that the filters hide.
    consider_hidden: usize,
    /// Whether each suggested fix applies now (checked lazily, only for rows drawn).
    fix_ok: HashMap<usize, Option<String>>,
    /// Impact previews of the fixes hovered (lines, or why there is none).
    previews: HashMap<usize, Result<Vec<String>, String>>,
}

impl Default for FindingsPanel {
    fn default() -> Self {
        FindingsPanel {
            rule: None,
            min_severity: Severity::Info,
            show_accepted: false,
            show_consider: false,
            sort: Sort::Rank,
            cache: None,
        }
    }
}

fn severity_name(s: Severity) -> &'static str {
    match s {
        Severity::Info => "info and worse",
        Severity::Warning => "warnings and errors",
        Severity::Error => "errors only",
    }
}

/// A placement doubt the audit is not confident about: a placement rule at info severity.
pub fn is_to_consider(f: &Finding) -> bool {
    f.severity == Severity::Info && is_placement_rule(f.rule)
}

impl FindingsPanel {
    /// Indices of the findings shown with the current filters, in display order.
    pub fn filtered(&self, findings: &[Finding]) -> Vec<usize> {
        let mut v: Vec<usize> = (0..findings.len())
            .filter(|&i| {
                let f = &findings[i];
                f.severity >= self.min_severity
                    && self.rule.is_none_or(|r| f.rule == r)
                    && (self.show_accepted || !f.accepted)
                    && (self.show_consider || !is_to_consider(f))
            })
            .collect();
        if self.sort == Sort::Score {
            v.sort_by(|&a, &b| {
                findings[b]
                    .score
                    .total_cmp(&findings[a].score)
                    .then(a.cmp(&b))
            });
        }
        v
    }

    fn refresh(&mut self, view: &ViewCtx, findings: &[Finding]) {
        let key = (
            view.generation,
            self.rule,
            self.min_severity,
            self.show_accepted,
            self.show_consider,
            self.sort,
        );
        if self.cache.as_ref().is_some_and(|c| c.key == key) {
            return;
        }
        let mut rules: Vec<&'static str> = findings.iter().map(|f| f.rule).collect();
        rules.sort_unstable();
        rules.dedup();
        self.cache = Some(Cached {
            key,
            rules,
            shown: self.filtered(findings),
            open: findings.iter().filter(|f| !f.accepted).count(),
            consider_hidden: if self.show_consider {
                0
            } else {
                findings
                    .iter()
                    .filter(|f| !f.accepted && is_to_consider(f))
                    .count()
            },
            fix_ok: HashMap::new(),
            previews: HashMap::new(),
        });
    }
}

/// The banner of a tree that does not fit its embeddings as a whole
/// ([`treefit`](crate::model::audit::treefit)): above the findings, in the error colour.
fn misfit_banner(ui: &mut egui::Ui, fit: &crate::model::audit::treefit::TreeFit) {
    egui::Frame::group(ui.style())
        .fill(ui.visuals().extreme_bg_color)
        .show(ui, |ui| {
            ui.colored_label(
                ui.visuals().error_fg_color,
                "The tree as a whole does not fit the embeddings",
            );
            ui.label(format!(
                "median KL to the parent {:.2} nats vs {:.2} for a random parent; {:.1} % of \
                 the nodes contained in their parent vs {:.1} % for random parents. The \
                 findings below are mostly consequences: fix the tree or the embeddings first.",
                fit.median_kl,
                fit.baseline_median_kl,
                100.0 * fit.contained_share,
                100.0 * fit.baseline_contained_share
            ));
        });
}

impl Panel for FindingsPanel {
    fn kind(&self) -> PanelKind {
        PanelKind::Findings
    }

    /// Draw the panel; the list takes 42 % of the height (at least 160 points) and scrolls.
    fn ui(&mut self, ui: &mut egui::Ui, view: &ViewCtx) -> Vec<Action> {
        let list_height = (ui.available_height() * 0.42).max(160.0);
        let mut actions = Vec::new();
        ui.heading("Findings");
        let Some(report) = view.report else {
            if view.auditing {
                ui.horizontal(|ui| {
                    ui.spinner();
                    ui.label(format!(
                        "Auditing {} phrases in the background; you can browse and edit meanwhile.",
                        view.project.phrases.len()
                    ));
                });
            } else {
                ui.label("No audit yet: the project needs a tree.");
            }
            return actions;
        };
        if let Some(c) = &report.calibration {
            ui.label(format!("Confidence {}", c.describe()))
                .on_hover_text(
                    "learned from the reviewer's decisions in the override layer: fixes applied \
                     count as right findings, nodes approved as is as wrong ones",
                );
        }
        if !report.fit.fits {
            misfit_banner(ui, &report.fit);
        }
        self.refresh(view, &report.findings);
        let rules = self
            .cache
            .as_ref()
            .map(|c| c.rules.clone())
            .unwrap_or_default();
        ui.horizontal_wrapped(|ui| {
            egui::ComboBox::new("finding-rule", "rule")
                .selected_text(self.rule.unwrap_or("all rules"))
                .show_ui(ui, |ui| {
                    ui.selectable_value(&mut self.rule, None, "all rules");
                    for r in &rules {
                        ui.selectable_value(&mut self.rule, Some(*r), *r);
                    }
                });
            egui::ComboBox::new("finding-severity", "severity")
                .selected_text(severity_name(self.min_severity))
                .show_ui(ui, |ui| {
                    for s in [Severity::Info, Severity::Warning, Severity::Error] {
                        ui.selectable_value(&mut self.min_severity, s, severity_name(s));
                    }
                });
        });
        ui.horizontal_wrapped(|ui| {
            ui.label("Sort:");
            ui.radio_value(&mut self.sort, Sort::Rank, "rank");
            ui.radio_value(&mut self.sort, Sort::Score, "score");
            ui.checkbox(&mut self.show_accepted, "show accepted");
        });
        let hidden = self.cache.as_ref().map_or(0, |c| c.consider_hidden);
        if hidden > 0 || self.show_consider {
            ui.checkbox(&mut self.show_consider, "show placement doubts to consider")
                .on_hover_text(
                    "placement findings the audit is not confident about (info severity): \
                     collapsed by default",
                );
        }
        self.refresh(view, &report.findings);
        let Some(cache) = &mut self.cache else {
            return actions;
        };
        ui.label(if cache.consider_hidden > 0 {
            format!(
                "{} shown of {} ({} open; {} to consider collapsed)",
                cache.shown.len(),
                report.findings.len(),
                cache.open,
                cache.consider_hidden
            )
        } else {
            format!(
                "{} shown of {} ({} open)",
                cache.shown.len(),
                report.findings.len(),
                cache.open
            )
        });
        // in the display language (View ▸ Label language)
        let label = |p| super::fonts::display_label(view.label(p)).into_owned();
        egui::ScrollArea::vertical()
            .id_salt("findings-rows")
            .max_height(list_height)
            .auto_shrink([false, false])
            .show_rows(ui, ROW_HEIGHT, cache.shown.len(), |ui, range| {
                for &i in &cache.shown[range] {
                    let f = &report.findings[i];
                    let selected = view.selection.first() == Some(&f.node);
                    let frame = egui::Frame::group(ui.style()).inner_margin(2.0);
                    frame.show(ui, |ui| {
                        ui.set_height(ROW_HEIGHT - 6.0);
                        ui.set_width(ui.available_width());
                        ui.horizontal(|ui| {
                            let (t, tip) = badges::severity(f.severity);
                            ui.label(t).on_hover_text(tip);
                            let other = f
                                .other
                                .map(|o| format!(" vs {}", label(o)))
                                .unwrap_or_default();
                            let text =
                                RichText::new(format!("{}: {}{other}", f.rule, label(f.node)));
                            let r = ui
                                .add(
                                    egui::Button::selectable(selected, text)
                                        .truncate()
                                        .sense(Sense::click()),
                                )
                                .on_hover_text(format!(
                                    "{}\n{}\nclick to show the node",
                                    badges::plain(&f.explanation),
                                    score_in_words(f)
                                ));
                            if r.clicked() {
                                actions.push(Action::Reveal(f.node));
                            }
                        });
                        // the sentence that explains it, wrapped; the numbers in words on hover
                        ui.add(
                            egui::Label::new(RichText::new(badges::plain(&f.explanation)).small())
                                .wrap(),
                        )
                        .on_hover_text(score_in_words(f));
                        ui.horizontal(|ui| {
                            if f.accepted {
                                ui.label(badges::pill("accepted", badges::SKY));
                                return;
                            }
                            if let Some(s) = &f.suggestion
                                && let Some(edit) = &s.edit
                            {
                                let why = cache
                                    .fix_ok
                                    .entry(i)
                                    .or_insert_with(|| view.check(edit).err())
                                    .clone();
                                let b = ui
                                    .add_enabled(
                                        why.is_none(),
                                        egui::Button::new(RichText::new("Apply fix").small()),
                                    )
                                    .on_hover_ui(|ui| {
                                        ui.label(format!(
                                            "{}{} (one edit; Ctrl+Z undoes)",
                                            s.action,
                                            s.target
                                                .as_ref()
                                                .map(|t| format!(" to {t}"))
                                                .unwrap_or_default()
                                        ));
                                        // the impact preview, computed once per edit and tree
                                        let lines = cache.previews.entry(i).or_insert_with(|| {
                                            view.queries.preview(edit).map(|x| x.lines())
                                        });
                                        match lines {
                                            Ok(l) => {
                                                for line in l.iter() {
                                                    ui.label(line.as_str());
                                                }
                                            }
                                            Err(e) => {
                                                ui.label(format!("No preview: {e}"));
                                            }
                                        }
                                    });
                                let b = match why {
                                    Some(w) => b.on_disabled_hover_text(badges::plain(&format!(
                                        "Cannot apply: {w}"
                                    ))),
                                    None => b,
                                };
                                if b.clicked() {
                                    actions.push(Action::Reveal(f.node));
                                    actions.push(Action::Edit(edit.clone()));
                                }
                            }
                            if ui
                                .button(RichText::new("Accept as is").small())
                                .on_hover_text("Record a review: the node is fine as it is")
                                .clicked()
                            {
                                actions.push(Action::Edit(Edit::Review {
                                    node: view.project.phrases.id(f.node).to_string(),
                                    status: ReviewStatus::Approved,
                                    comment: format!(
                                        "accepted finding {}: {}",
                                        f.rule, f.explanation
                                    ),
                                }));
                            }
                        });
                    });
                }
            });
        actions
    }
}
