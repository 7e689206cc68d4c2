//! The ellipse projection (centre): the selected nodes, optionally with their parent,
//! children and siblings, projected to 2-D (PCA, two dimensions, or a contrast axis) and
//! drawn as 1/2/3σ-equivalent probability ellipses.

use std::collections::HashMap;

use egui::Color32;
use egui_plot::{Legend, Line, LineStyle, MarkerShape, Plot, PlotPoint, PlotPoints, Points, Text};

use crate::model::PhraseId;
use crate::model::gaussian::{GaussianView, Sampled, containment};
use crate::model::projection::{self, Gaussian2, Projection};

use super::badges::ROLE_COLOURS;
use super::context::{Action, Panel, PanelKind, ViewCtx};
use super::two_parent_plot;
use crate::model::two_parents::{TwoParents, placement_of, two_parents};

/// Most children / siblings drawn (the rest are listed as "… and N more").
pub const MAX_RELATIVES: usize = 40;
/// Points per ellipse outline.
const OUTLINE_POINTS: usize = 72;
/// Pixels within which a mean counts as hovered / clicked.
const PICK_RADIUS: f32 = 14.0;
/// Samples for the containment shown on hover (when the audit has none).
const HOVER_SAMPLES: usize = 2000;

/// How a shown node relates to the selection.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum Role {
    /// Selected.
    Selected,
    /// Parent of the (first) selected node.
    Parent,
    /// A child of a selected node.
    Child,
    /// A sibling of the first selected node.
    Sibling,
}

impl Role {
    fn name(self) -> &'static str {
        match self {
            Role::Selected => "selected",
            Role::Parent => "parent",
            Role::Child => "children",
            Role::Sibling => "siblings",
        }
    }

    fn colour(self) -> Color32 {
        match self {
            Role::Selected => ROLE_COLOURS[0],
            Role::Parent => ROLE_COLOURS[1],
            Role::Child => ROLE_COLOURS[2],
            Role::Sibling => ROLE_COLOURS[3],
        }
    }

    /// Marker shape: roles differ by shape and line style, not only by colour.
    fn marker(self) -> MarkerShape {
        match self {
            Role::Selected => MarkerShape::Diamond,
            Role::Parent => MarkerShape::Square,
            Role::Child => MarkerShape::Circle,
            Role::Sibling => MarkerShape::Up,
        }
    }

    fn line_style(self) -> LineStyle {
        match self {
            Role::Selected | Role::Parent => LineStyle::Solid,
            Role::Child => LineStyle::dashed_loose(),
            Role::Sibling => LineStyle::dotted_loose(),
        }
    }
}

/// The label of the projection choice of the two-parent view.
pub const TWO_PARENTS_PROJECTION: &str = "Two parents: contrast";

/// Projection choice.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum Mode {
    /// PCA of the shown distributions.
    Pca,
    /// Two coordinate axes.
    Dims(usize, usize),
    /// Axis through the first two selected means plus the best orthogonal axis.
    Contrast,
}

#[derive(Clone, PartialEq)]
struct Key {
    shown: Vec<(PhraseId, Role)>,
    mode: Mode,
    generation: u64,
}

struct Layout {
    projection: Projection,
    items: Vec<(PhraseId, Role, Gaussian2)>,
}

/// Node, current parent, suggested parent, generation: what a two-parent view is for.
type TwoKey = (PhraseId, PhraseId, PhraseId, u64);

/// State of the ellipse panel.
pub struct EllipsePanel {
    /// Show the parent of the first selected node.
    pub with_parent: bool,
    /// Show the children of the selected nodes.
    pub with_children: bool,
    /// Show the siblings of the first selected node.
    pub with_siblings: bool,
    /// Projection.
    pub mode: Mode,
    /// Which of the 1σ / 2σ / 3σ ellipses are drawn.
    pub levels: [bool; 3],
    /// Write labels at the means.
    pub labels: bool,
    fit: bool,
    key: Option<Key>,
    layout: Option<Layout>,
    problem: Option<String>,
    hover_containment: HashMap<(PhraseId, u64), Sampled>,
    /// For a node with a placement finding, show it with its current and its suggested
    /// parent in the projection that separates the two parents.
    pub both_parents: bool,
    /// The two-parent view of the last (node, current, suggested, generation).
    two: Option<(TwoKey, Option<TwoParents>)>,
}

impl Default for EllipsePanel {
    fn default() -> Self {
        EllipsePanel {
            with_parent: true,
            with_children: true,
            with_siblings: false,
            mode: Mode::Pca,
            levels: [true, true, true],
            labels: true,
            fit: true,
            key: None,
            layout: None,
            problem: None,
            hover_containment: HashMap::new(),
            both_parents: true,
            two: None,
        }
    }
}

impl EllipsePanel {
    /// The nodes drawn for a selection, each once, with its role.
    pub fn shown(&self, view: &ViewCtx) -> Vec<(PhraseId, Role)> {
        let mut out: Vec<(PhraseId, Role)> = Vec::new();
        let push = |out: &mut Vec<(PhraseId, Role)>, p: PhraseId, r: Role| {
            if !out.iter().any(|x| x.0 == p) {
                out.push((p, r));
            }
        };
        for &p in view.selection {
            push(&mut out, p, Role::Selected);
        }
        let Some(eff) = view.eff else { return out };
        let tree = &eff.tree;
        let first = view
            .selection
            .first()
            .copied()
            .filter(|&p| tree.is_placed(p));
        if let Some(f) = first {
            if self.with_parent
                && let Some(par) = tree.parent(f)
            {
                push(&mut out, par, Role::Parent);
            }
            if self.with_siblings
                && let Some(par) = tree.parent(f)
            {
                for &s in tree.children(par).iter().take(MAX_RELATIVES) {
                    push(&mut out, s, Role::Sibling);
                }
            }
        }
        if self.with_children {
            for &p in view.selection {
                if tree.is_placed(p) {
                    for &c in tree.children(p).iter().take(MAX_RELATIVES) {
                        push(&mut out, c, Role::Child);
                    }
                }
            }
        }
        out
    }

    fn relayout(&mut self, view: &ViewCtx, shown: Vec<(PhraseId, Role)>) {
        let key = Key {
            shown,
            mode: self.mode,
            generation: view.generation,
        };
        if self.key.as_ref() == Some(&key) {
            return;
        }
        let g = &view.project.gaussians;
        let views: Vec<GaussianView> = key.shown.iter().map(|&(p, _)| g.get(p as usize)).collect();
        let proj = match self.mode {
            Mode::Pca => projection::pca(&views),
            Mode::Dims(a, b) => projection::dimensions(&views, a, b),
            Mode::Contrast => match view.selection {
                [a, b, ..] => {
                    projection::contrast(&views, &g.get(*a as usize), &g.get(*b as usize))
                }
                _ => None,
            },
        };
        self.problem = None;
        self.layout = match proj {
            Some(projection) => {
                let items = key
                    .shown
                    .iter()
                    .zip(&views)
                    .map(|(&(p, r), v)| (p, r, projection::project(v, &projection.axes)))
                    .collect();
                Some(Layout { projection, items })
            }
            None => {
                self.problem = Some(match self.mode {
                    Mode::Pca => "PCA needs at least two dimensions.".into(),
                    Mode::Dims(_, _) => format!(
                        "Choose two different dimensions below {}.",
                        g.dim()
                    ),
                    Mode::Contrast => {
                        "Contrast needs two selected nodes with different means (Ctrl-click a second node)."
                            .into()
                    }
                });
                None
            }
        };
        self.key = Some(key);
        self.fit = true;
    }

    /// `two`: whether the two-parent view can be shown for the selection (then the
    /// projection row offers it) and whether it is shown (then it is the active choice).
    fn controls(&mut self, ui: &mut egui::Ui, view: &ViewCtx, two: (bool, bool)) {
        let d = view.project.gaussians.dim();
        ui.horizontal_wrapped(|ui| {
            ui.label("Show:");
            ui.checkbox(&mut self.with_parent, "parent");
            ui.checkbox(&mut self.with_children, "children");
            ui.checkbox(&mut self.with_siblings, "siblings");
            ui.checkbox(&mut self.labels, "labels");
            ui.checkbox(&mut self.both_parents, "both parents")
                .on_hover_text(
                    "For a node with a placement finding: the node, its current parent and the \
                 suggested parent, on the axis through the two parents",
                );
        });
        ui.horizontal_wrapped(|ui| {
            ui.label("Ellipses:");
            ui.checkbox(&mut self.levels[0], "1σ");
            ui.checkbox(&mut self.levels[1], "2σ");
            ui.checkbox(&mut self.levels[2], "3σ");
            let [a, b, c] = projection::sigma_levels().map(|p| p * 100.0);
            ui.label(format!("({a:.0} %, {b:.0} %, {c:.0} % of the 2-D mass)"));
            if ui
                .button("Fit view")
                .on_hover_text("Zoom to show everything (or double-click the plot)")
                .clicked()
            {
                self.fit = true;
            }
        });
        ui.horizontal_wrapped(|ui| {
            ui.label("Projection:");
            let (two_available, two_shown) = two;
            let mut kind = match self.mode {
                _ if two_shown => 3,
                Mode::Pca => 0,
                Mode::Dims(..) => 1,
                Mode::Contrast => 2,
            };
            let before = kind;
            ui.radio_value(&mut kind, 0, "PCA");
            ui.radio_value(&mut kind, 1, "two dimensions");
            ui.radio_value(&mut kind, 2, "contrast of two selected");
            if two_available {
                ui.radio_value(&mut kind, 3, TWO_PARENTS_PROJECTION)
                    .on_hover_text(
                        "The axis through the current and the suggested parent's means, plus \
                         the best orthogonal axis",
                    );
            }
            if kind != before {
                // the two-parent view is a projection choice too: picking another one
                // leaves it, picking it turns it on
                self.both_parents = kind == 3;
                self.mode = match kind {
                    0 => Mode::Pca,
                    1 => Mode::Dims(0, 1.min(d.saturating_sub(1))),
                    2 => Mode::Contrast,
                    _ => self.mode,
                };
            }
            if let Mode::Dims(a, b) = &mut self.mode {
                let max = d.saturating_sub(1);
                ui.add(egui::DragValue::new(a).range(0..=max).prefix("x: dim "));
                ui.add(egui::DragValue::new(b).range(0..=max).prefix("y: dim "));
            }
        });
    }

    fn containment_of(&mut self, view: &ViewCtx, p: PhraseId) -> Option<Sampled> {
        if let Some(r) = view.report
            && let Some(s) = r.stats.nodes.get(p as usize)
        {
            return s.containment;
        }
        let eff = view.eff?;
        let parent = eff.tree.parent(p)?;
        let g = &view.project.gaussians;
        let key = (p, view.generation);
        if !self.hover_containment.contains_key(&key) {
            if self.hover_containment.len() > 4096 {
                self.hover_containment.clear();
            }
            let c = containment(
                &g.get(p as usize),
                &g.get(parent as usize),
                0.95,
                HOVER_SAMPLES,
                u64::from(p),
            );
            self.hover_containment.insert(key, c);
        }
        self.hover_containment.get(&key).copied()
    }
}

impl EllipsePanel {
    /// Whether the selected node has an open placement finding with a suggested parent and
    /// a two-parent projection (computed once per node, parents and generation).
    fn two_parents_ready(&mut self, view: &ViewCtx) -> bool {
        let ([node], Some(report), Some(eff)) = (view.selection, view.report, view.eff) else {
            return false;
        };
        let Some(current) = eff.tree.parent(*node) else {
            return false;
        };
        let Some((_, suggested)) = placement_of(report, &view.project.phrases, *node) else {
            return false;
        };
        if suggested == current {
            return false;
        }
        let key = (*node, current, suggested, view.generation);
        if self.two.as_ref().map(|t| t.0) != Some(key) {
            let t = two_parents(&view.project.gaussians, *node, current, suggested);
            self.two = Some((key, t));
        }
        matches!(&self.two, Some((_, Some(_))))
    }

    /// The two-parent view of the selected node when [`Self::two_parents_ready`]; false
    /// (nothing drawn) otherwise.
    fn two_parent_view(&mut self, ui: &mut egui::Ui, view: &ViewCtx) -> bool {
        let (Some(((node, current, suggested, _), Some(t))), Some(eff)) = (&self.two, view.eff)
        else {
            return false;
        };
        let (node, current, suggested) = (node, *current, *suggested);
        let label = |p: PhraseId| eff.label(p).to_string();
        ui.strong("Both parents: the node, its current parent and the suggested one");
        ui.add(egui::Label::new(t.caption(&label)).wrap());
        let [ex, ey] = t.projection.explained;
        ui.label(format!(
            "Contrast axis through the two parents ({:.1} % of the shown spread) and the best \
             orthogonal axis ({:.1} %).",
            ex * 100.0,
            ey * 100.0
        ));
        let shown = [
            (
                *node,
                "node",
                Role::Selected.colour(),
                MarkerShape::Diamond,
                LineStyle::Solid,
            ),
            (
                current,
                "current parent",
                Role::Parent.colour(),
                MarkerShape::Square,
                LineStyle::Solid,
            ),
            (
                suggested,
                "suggested parent",
                Role::Child.colour(),
                MarkerShape::Up,
                LineStyle::dashed_loose(),
            ),
        ];
        two_parent_plot::plot(ui, view, ("two-parents", *node), &shown, &t.projection);
        true
    }
}

impl Panel for EllipsePanel {
    fn kind(&self) -> PanelKind {
        PanelKind::Ellipses
    }

    fn ui(&mut self, ui: &mut egui::Ui, view: &ViewCtx) -> Vec<Action> {
        let mut actions = Vec::new();
        ui.heading("Ellipse projection");
        let two_available = self.two_parents_ready(view);
        let two_shown = self.both_parents && two_available;
        self.controls(ui, view, (two_available, two_shown));
        if view.selection.is_empty() {
            ui.label("Select a node in the tree (Ctrl-click for more) to see its ellipses.");
            return actions;
        }
        if two_shown && self.two_parent_view(ui, view) {
            return actions;
        }
        let shown = self.shown(view);
        self.relayout(view, shown);
        let Some(layout) = &self.layout else {
            if let Some(p) = &self.problem {
                ui.label(p);
            }
            return actions;
        };
        let [ex, ey] = layout.projection.explained;
        let axis_name = |i: usize| match self.mode {
            Mode::Pca => format!("PC{}", i + 1),
            Mode::Dims(a, b) => format!("dim {}", if i == 0 { a } else { b }),
            Mode::Contrast => {
                if i == 0 {
                    "contrast axis".into()
                } else {
                    "best orthogonal axis".into()
                }
            }
        };
        let x_label = format!("{} ({:.1} % of shown variance)", axis_name(0), ex * 100.0);
        let y_label = format!("{} ({:.1} % of shown variance)", axis_name(1), ey * 100.0);
        ui.label(format!(
            "This view explains {:.1} % of the shown spread ({} {:.1} %, {} {:.1} %).",
            (ex + ey) * 100.0,
            axis_name(0),
            ex * 100.0,
            axis_name(1),
            ey * 100.0
        ));
        let eff = view.eff;
        // in the display language (View ▸ Label language)
        let label_of = |p: PhraseId| super::fonts::display_label(view.label(p)).into_owned();
        let alphas = projection::sigma_levels();
        let levels = self.levels;
        let labels = self.labels;
        let items: Vec<(PhraseId, Role, Gaussian2)> = layout.items.clone();
        let mut plot = Plot::new("ellipses")
            .data_aspect(1.0)
            .legend(Legend::default())
            .x_axis_label(x_label)
            .y_axis_label(y_label)
            .show_crosshair(false)
            .allow_double_click_reset(true);
        if std::mem::take(&mut self.fit) {
            plot = plot.reset();
        }
        let pr = plot.show(ui, |pui| {
            for &(p, role, g2) in &items {
                for (k, &alpha) in alphas.iter().enumerate() {
                    if !levels[k] {
                        continue;
                    }
                    let pts: PlotPoints = g2.ellipse(alpha, OUTLINE_POINTS).into();
                    // one colour per role (so the legend shows it); the 1σ line is the widest
                    let base = if role == Role::Selected { 2.4 } else { 1.6 };
                    let width = base - 0.4 * k as f32;
                    pui.line(
                        Line::new(role.name(), pts)
                            .color(role.colour())
                            .style(role.line_style())
                            .width(width)
                            .allow_hover(false)
                            .id(("ellipse", p, k)),
                    );
                }
                pui.points(
                    Points::new(role.name(), vec![g2.mean])
                        .shape(role.marker())
                        .radius(5.0)
                        .filled(true)
                        .color(role.colour())
                        .id(("mean", p)),
                );
                if labels {
                    pui.text(
                        // unnamed: labels stay out of the legend
                        Text::new("", PlotPoint::new(g2.mean[0], g2.mean[1]), label_of(p))
                            .anchor(egui::Align2::LEFT_BOTTOM)
                            .allow_hover(false)
                            .id(("label", p)),
                    );
                }
            }
        });
        // nearest mean under the pointer
        let hovered = pr.response.hover_pos().and_then(|pos| {
            items
                .iter()
                .map(|&(p, _, g2)| {
                    let s = pr
                        .transform
                        .position_from_point(&PlotPoint::new(g2.mean[0], g2.mean[1]));
                    (p, s.distance(pos))
                })
                .filter(|&(_, d)| d <= PICK_RADIUS)
                .min_by(|a, b| a.1.total_cmp(&b.1))
                .map(|(p, _)| p)
        });
        if let Some(p) = hovered {
            let g = &view.project.gaussians;
            let mut tip = format!(
                "{}\ngenerality (ln det Σ): {:.3}",
                label_of(p),
                g.log_det(p as usize)
            );
            match self.containment_of(view, p) {
                Some(c) => tip.push_str(&format!(
                    "\ncontainment in parent: {:.3} ± {:.3}",
                    c.value, c.std_error
                )),
                None => tip.push_str("\ncontainment in parent: (root or unplaced)"),
            }
            tip.push_str("\nclick to select");
            pr.response.clone().on_hover_text(tip);
            if pr.response.clicked() {
                actions.push(Action::Reveal(p));
            }
        }
        let more: usize = view
            .selection
            .iter()
            .filter_map(|&p| eff.map(|e| e.tree.children(p).len()))
            .map(|n| n.saturating_sub(MAX_RELATIVES))
            .sum();
        if more > 0 && self.with_children {
            ui.label(format!("… and {more} more children not drawn"));
        }
        actions
    }
}
