//! Statistics of the selection (right): generality, KL both ways to the parent, containment
//! with its error, coverage by children, the sibling-overlap heat map, the build report's
//! elbow curve and tree-wide histograms with the node marked.

use egui::{Color32, Rect, Sense, Vec2, pos2, vec2};
use egui_plot::{Bar, BarChart, Line, MarkerShape, Plot, PlotPoints, Points, VLine};

use crate::model::PhraseId;
use crate::model::stats::sibling_overlap;

use super::badges;
use super::context::{Action, Panel, PanelKind, ViewCtx};

/// Histogram bins.
const BINS: usize = 24;
/// Largest overlap matrix drawn (bigger sibling groups show their first rows).
const MAX_MATRIX: usize = 24;

/// Viridis colour-map stops (perceptually uniform and readable with colour-vision
/// deficiencies; van der Walt & Smith, matplotlib 2015).
const VIRIDIS: [[u8; 3]; 5] = [
    [68, 1, 84],
    [59, 82, 139],
    [33, 145, 140],
    [94, 201, 98],
    [253, 231, 37],
];

/// Colour of a value in [0, 1] on the viridis ramp.
pub fn viridis(t: f64) -> Color32 {
    let t = t.clamp(0.0, 1.0) * (VIRIDIS.len() - 1) as f64;
    let i = (t.floor() as usize).min(VIRIDIS.len() - 2);
    let f = t - i as f64;
    let mix = |a: u8, b: u8| (a as f64 + (b as f64 - a as f64) * f).round() as u8;
    let (a, b) = (VIRIDIS[i], VIRIDIS[i + 1]);
    Color32::from_rgb(mix(a[0], b[0]), mix(a[1], b[1]), mix(a[2], b[2]))
}

/// Equal-width histogram of `values`: (bin centres, counts, bin width).
pub fn histogram(values: &[f64], bins: usize) -> Option<(Vec<f64>, Vec<usize>, f64)> {
    let finite: Vec<f64> = values.iter().copied().filter(|v| v.is_finite()).collect();
    let lo = finite.iter().copied().fold(f64::INFINITY, f64::min);
    let hi = finite.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    if finite.is_empty() || bins == 0 {
        return None;
    }
    let width = if hi > lo {
        (hi - lo) / bins as f64
    } else {
        1.0
    };
    let mut counts = vec![0usize; bins];
    for v in finite {
        let b = (((v - lo) / width) as usize).min(bins - 1);
        counts[b] += 1;
    }
    let centres = (0..bins).map(|b| lo + (b as f64 + 0.5) * width).collect();
    Some((centres, counts, width))
}

#[derive(Default)]
struct Cache {
    key: Option<(PhraseId, u64)>,
    /// (whose children, their ids, BC matrix)
    overlap: Option<(PhraseId, Vec<PhraseId>, Vec<Vec<f64>>)>,
    hist_key: Option<u64>,
    generality: Option<(Vec<f64>, Vec<usize>, f64)>,
    kl: Option<(Vec<f64>, Vec<usize>, f64)>,
}

/// State of the statistics panel.
#[derive(Default)]
pub struct StatsPanel {
    cache: Cache,
}

impl StatsPanel {
    fn refresh(&mut self, view: &ViewCtx, p: PhraseId) {
        if self.cache.hist_key != Some(view.generation) {
            self.cache.hist_key = Some(view.generation);
            let placed: Vec<PhraseId> = view.eff.map(|e| e.tree.preorder()).unwrap_or_default();
            let g = &view.project.gaussians;
            let generality: Vec<f64> = placed.iter().map(|&q| g.log_det(q as usize)).collect();
            self.cache.generality = histogram(&generality, BINS);
            self.cache.kl = view.report.and_then(|r| {
                let kl: Vec<f64> = placed
                    .iter()
                    .filter_map(|&q| r.stats.nodes.get(q as usize).and_then(|s| s.kl_to_parent))
                    .collect();
                histogram(&kl, BINS)
            });
        }
        if self.cache.key == Some((p, view.generation)) {
            return;
        }
        self.cache.key = Some((p, view.generation));
        self.cache.overlap = view.eff.and_then(|eff| {
            let tree = &eff.tree;
            if !tree.is_placed(p) {
                return None;
            }
            // the node's children when it has several, else its siblings
            let owner = if tree.children(p).len() >= 2 {
                p
            } else {
                tree.parent(p)?
            };
            let kids = tree.children(owner).to_vec();
            if kids.len() < 2 {
                return None;
            }
            let m = sibling_overlap(&view.project.gaussians, eff, owner);
            Some((owner, kids, m))
        });
    }
}

impl Panel for StatsPanel {
    fn kind(&self) -> PanelKind {
        PanelKind::Stats
    }

    fn ui(&mut self, ui: &mut egui::Ui, view: &ViewCtx) -> Vec<Action> {
        let mut actions = Vec::new();
        ui.heading("Statistics");
        let Some(&p) = view.selection.first() else {
            ui.label("Nothing selected.");
            return actions;
        };
        self.refresh(view, p);
        let g = &view.project.gaussians;
        // in the display language (View ▸ Label language)
        let label = |q: PhraseId| super::fonts::display_label(view.label(q)).into_owned();
        ui.label(egui::RichText::new(label(p)).strong().size(16.0));
        if view.selection.len() > 1 {
            ui.label(format!("(first of {} selected)", view.selection.len()));
        }
        let stats = view.report.and_then(|r| r.stats.nodes.get(p as usize));
        egui::Grid::new("node-stats")
            .num_columns(2)
            .striped(true)
            .show(ui, |ui| {
                let row = |ui: &mut egui::Ui, k: &str, v: String, tip: &str| {
                    ui.label(k).on_hover_text(tip);
                    ui.label(v);
                    ui.end_row();
                };
                row(
                    ui,
                    "id",
                    view.project.phrases.id(p).to_string(),
                    "stable phrase id",
                );
                row(
                    ui,
                    "generality",
                    format!("{:.3}", g.log_det(p as usize)),
                    "ln det Σ: larger = broader phrase",
                );
                row(
                    ui,
                    "entropy",
                    format!("{:.3} nats", g.entropy(p as usize)),
                    "differential entropy of the Gaussian",
                );
                if let Some(eff) = view.eff {
                    let parent = eff.tree.parent(p);
                    row(
                        ui,
                        "parent",
                        parent.map_or("(root)".into(), label),
                        "effective parent",
                    );
                    row(
                        ui,
                        "children",
                        eff.tree.children(p).len().to_string(),
                        "direct children",
                    );
                    if let Some((t, _)) = badges::review(eff.review[p as usize]) {
                        ui.label("review");
                        ui.horizontal(|ui| {
                            ui.label(t);
                            ui.label(eff.review_comment[p as usize].as_str());
                        });
                        ui.end_row();
                    }
                    let aliases = &eff.aliases[p as usize];
                    if !aliases.is_empty() {
                        let names: Vec<String> = aliases.iter().map(|&a| label(a)).collect();
                        row(
                            ui,
                            "aliases",
                            names.join(", "),
                            "phrases merged into this node",
                        );
                    }
                }
                if let Some(s) = stats {
                    row(ui, "depth", s.depth.to_string(), "root = 0");
                    row(ui, "subtree", s.subtree.to_string(), "nodes in the subtree");
                    let opt = |v: Option<f64>| v.map_or("–".to_string(), |x| format!("{x:.3}"));
                    row(
                        ui,
                        "KL(node || parent)",
                        opt(s.kl_to_parent),
                        "nats; small = the parent explains the node well",
                    );
                    row(
                        ui,
                        "KL(parent || node)",
                        opt(s.kl_from_parent),
                        "nats; the other direction",
                    );
                    row(
                        ui,
                        "BC with parent",
                        opt(s.bc_parent),
                        "Bhattacharyya coefficient, 1 = identical",
                    );
                    let sampled = |v: &Option<crate::model::gaussian::Sampled>| {
                        v.map_or("–".to_string(), |c| {
                            format!("{:.3} ± {:.3} (N = {})", c.value, c.std_error, c.samples)
                        })
                    };
                    row(
                        ui,
                        "containment in parent",
                        sampled(&s.containment),
                        "share of this node's mass inside the parent's region, ± standard error",
                    );
                    row(
                        ui,
                        "coverage by children",
                        sampled(&s.coverage),
                        "share of this node's mass inside at least one child's region",
                    );
                }
                // a tree built by the inclusion method: what the builder chose and why
                if let Some(inc) = view.build_report.and_then(|r| r.inclusion.as_ref())
                    && let Some(n) = inc.node(view.project.phrases.id(p))
                {
                    let name = |id: &str| {
                        view.project
                            .phrases
                            .get(id)
                            .map_or_else(|| id.to_string(), &label)
                    };
                    row(
                        ui,
                        "built parent",
                        format!("{} (cost {:.3})", name(&n.parent), n.cost),
                        "the parent the inclusion build chose, with its KL cost in nats",
                    );
                    row(
                        ui,
                        "runner-up parent",
                        n.runner_up.as_ref().map_or("–".to_string(), |r| {
                            format!("{} (cost {:.3})", name(&r.id), r.cost)
                        }),
                        "the cheapest other candidate the inclusion build considered",
                    );
                }
            });

        if let Some((owner, kids, m)) = &self.cache.overlap {
            ui.separator();
            ui.label(
                egui::RichText::new(format!(
                    "Overlap of the children of \"{}\" (Bhattacharyya coefficient)",
                    label(*owner)
                ))
                .strong(),
            );
            if let Some(a) = overlap_matrix(ui, kids, m, &label, p) {
                actions.push(Action::Reveal(a));
            }
        }

        if let Some(report) = view.build_report
            && let Some(nr) = report.node(view.project.phrases.id(p))
            && !nr.k_tried.is_empty()
        {
            ui.separator();
            ui.label(egui::RichText::new("Build: elbow curve").strong());
            ui.label(format!(
                "chosen k = {} ({})",
                nr.chosen_k,
                badges::plain(&nr.reason)
            ));
            let pts: Vec<[f64; 2]> = nr
                .k_tried
                .iter()
                .zip(&nr.inertia)
                .map(|(&k, &i)| [k as f64, i])
                .collect();
            let chosen: Vec<[f64; 2]> = pts
                .iter()
                .copied()
                .filter(|pt| pt[0] as usize == nr.chosen_k)
                .collect();
            Plot::new("elbow")
                .height(140.0)
                .x_axis_label("k")
                .y_axis_label("inertia")
                .allow_scroll(false)
                .show(ui, |pui| {
                    pui.line(Line::new("inertia", PlotPoints::from(pts)).color(badges::BLUE));
                    pui.points(
                        Points::new("chosen k", chosen)
                            .shape(MarkerShape::Diamond)
                            .radius(6.0)
                            .color(badges::VERMILLION),
                    );
                });
        }

        ui.separator();
        ui.label(egui::RichText::new("Tree-wide distributions (this node marked)").strong());
        if let Some(h) = &self.cache.generality {
            histogram_plot(
                ui,
                "hist-generality",
                "generality (ln det Σ)",
                h,
                Some(g.log_det(p as usize)),
            );
        }
        if let Some(h) = &self.cache.kl {
            let mark = stats.and_then(|s| s.kl_to_parent);
            histogram_plot(ui, "hist-kl", "KL(node || parent)", h, mark);
        }
        actions
    }
}

fn histogram_plot(
    ui: &mut egui::Ui,
    id: &str,
    name: &str,
    h: &(Vec<f64>, Vec<usize>, f64),
    mark: Option<f64>,
) {
    let (centres, counts, width) = h;
    let bars: Vec<Bar> = centres
        .iter()
        .zip(counts)
        .map(|(&c, &n)| Bar::new(c, n as f64).width(*width))
        .collect();
    Plot::new(id)
        .height(110.0)
        .x_axis_label(name)
        .allow_scroll(false)
        .allow_drag(false)
        .allow_zoom(false)
        .show(ui, |pui| {
            pui.bar_chart(BarChart::new(name, bars).color(badges::SKY));
            if let Some(x) = mark {
                pui.vline(
                    VLine::new("this node", x)
                        .color(badges::VERMILLION)
                        .width(2.0),
                );
            }
        });
}

/// A heat map of a symmetric matrix with values on hover; returns a row clicked.
fn overlap_matrix(
    ui: &mut egui::Ui,
    ids: &[PhraseId],
    m: &[Vec<f64>],
    label: &dyn Fn(PhraseId) -> String,
    current: PhraseId,
) -> Option<PhraseId> {
    let n = ids.len().min(MAX_MATRIX).min(m.len());
    if n == 0 {
        return None;
    }
    let cell = ((ui.available_width() - 20.0) / n as f32).clamp(8.0, 26.0);
    let (rect, _) = ui.allocate_exact_size(Vec2::splat(cell * n as f32), Sense::hover());
    let painter = ui.painter_at(rect);
    let mut clicked = None;
    for i in 0..n {
        for j in 0..n {
            let v = m[i].get(j).copied().unwrap_or(f64::NAN);
            let r = Rect::from_min_size(
                pos2(rect.min.x + j as f32 * cell, rect.min.y + i as f32 * cell),
                vec2(cell - 1.0, cell - 1.0),
            );
            let colour = if v.is_finite() {
                viridis(v)
            } else {
                Color32::GRAY
            };
            painter.rect_filled(r, 0.0, colour);
            if ids[i] == current || ids[j] == current {
                painter.rect_stroke(
                    r,
                    0.0,
                    egui::Stroke::new(1.0, Color32::WHITE),
                    egui::StrokeKind::Inside,
                );
            }
            let resp = ui.interact(r, ui.scope_id().with(("overlap", i, j)), Sense::click());
            let resp = resp.on_hover_text(format!(
                "{} × {}: BC = {:.3}",
                label(ids[i]),
                label(ids[j]),
                v
            ));
            if resp.clicked() {
                clicked = Some(ids[i]);
            }
        }
    }
    ui.horizontal(|ui| {
        ui.label("0");
        let (bar, _) = ui.allocate_exact_size(vec2(120.0, 10.0), Sense::hover());
        for k in 0..24 {
            let t = k as f64 / 23.0;
            let x0 = bar.min.x + bar.width() * k as f32 / 24.0;
            ui.painter().rect_filled(
                Rect::from_min_max(
                    pos2(x0, bar.min.y),
                    pos2(x0 + bar.width() / 24.0 + 0.5, bar.max.y),
                ),
                0.0,
                viridis(t),
            );
        }
        ui.label("1 (same)");
    });
    if ids.len() > n {
        ui.label(format!("first {n} of {} children shown", ids.len()));
    }
    clicked
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn histogram_counts_every_finite_value_once() {
        let (c, n, w) = histogram(&[0.0, 1.0, 2.0, 3.0, f64::NAN], 3).unwrap();
        assert_eq!(n.iter().sum::<usize>(), 4);
        assert_eq!(n, vec![1, 1, 2]);
        assert!((w - 1.0).abs() < 1e-12);
        assert!((c[0] - 0.5).abs() < 1e-12);
    }

    #[test]
    fn viridis_ends_match_the_published_map() {
        // matplotlib's viridis starts at #440154 and ends at #fde725 (van der Walt & Smith 2015)
        assert_eq!(viridis(0.0), Color32::from_rgb(0x44, 0x01, 0x54));
        assert_eq!(viridis(1.0), Color32::from_rgb(0xfd, 0xe7, 0x25));
    }
}
