//! The two-parent ellipse plot shared by the merge dialog (a placement conflict: the node
//! with its parent under each side) and the ellipse panel (a placement finding: the node
//! with its current and its suggested parent): the given distributions projected on the
//! given axes, 1/2/3σ-equivalent ellipses, marker shapes and line styles as well as colours.

use std::hash::Hash;

use egui::Color32;
use egui_plot::{Legend, Line, LineStyle, MarkerShape, Plot, PlotPoint, PlotPoints, Points, Text};

use crate::model::PhraseId;
use crate::model::projection::{self, Projection};

use super::context::ViewCtx;

/// Points per ellipse outline.
const OUTLINE_POINTS: usize = 72;

/// One distribution of the plot: node, legend name, colour, marker, line style.
pub type Shown<'a> = (PhraseId, &'a str, Color32, MarkerShape, LineStyle);

/// Draw the plot (height 220 px). `salt` keeps plots of several nodes apart.
pub fn plot(
    ui: &mut egui::Ui,
    view: &ViewCtx,
    salt: impl Hash + Copy + std::fmt::Debug,
    shown: &[Shown],
    proj: &Projection,
) {
    let label = |p: PhraseId| match view.eff {
        Some(e) => e.label(p).to_string(),
        None => view.project.phrases.label(p).to_string(),
    };
    let g = &view.project.gaussians;
    let alphas = projection::sigma_levels();
    Plot::new(salt)
        .height(220.0)
        .data_aspect(1.0)
        .legend(Legend::default())
        .show_crosshair(false)
        .allow_scroll(false)
        .show(ui, |pui| {
            for &(p, name, colour, marker, style) in shown {
                let g2 = projection::project(&g.get(p as usize), &proj.axes);
                for (k, &alpha) in alphas.iter().enumerate() {
                    let pts: PlotPoints = g2.ellipse(alpha, OUTLINE_POINTS).into();
                    pui.line(
                        Line::new(name, pts)
                            .color(colour)
                            .style(style)
                            .width(2.0 - 0.4 * k as f32)
                            .allow_hover(false)
                            .id((salt, "ellipse", p, name, k)),
                    );
                }
                pui.points(
                    Points::new(name, vec![g2.mean])
                        .shape(marker)
                        .radius(5.0)
                        .filled(true)
                        .color(colour)
                        .id((salt, "mean", p, name)),
                );
                pui.text(
                    Text::new("", PlotPoint::new(g2.mean[0], g2.mean[1]), label(p))
                        .anchor(egui::Align2::LEFT_BOTTOM)
                        .allow_hover(false)
                        .id((salt, "label", p, name)),
                );
            }
        });
}
