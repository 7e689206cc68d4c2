//! Row badges and colours. Every state is shown by text or shape first and colour second,
//! so the views stay readable for colour-blind users (no red/green pairs carry meaning alone).

use egui::{Color32, RichText};

use crate::model::audit::Severity;
use crate::model::edit::ReviewStatus;

/// Blue of the Okabe–Ito palette (colour-blind safe, Okabe & Ito 2008).
pub const BLUE: Color32 = Color32::from_rgb(0, 114, 178);
/// Orange of the Okabe–Ito palette.
pub const ORANGE: Color32 = Color32::from_rgb(230, 159, 0);
/// Vermillion of the Okabe–Ito palette.
pub const VERMILLION: Color32 = Color32::from_rgb(213, 94, 0);
/// Sky blue of the Okabe–Ito palette.
pub const SKY: Color32 = Color32::from_rgb(86, 180, 233);
/// Bluish green of the Okabe–Ito palette.
pub const TEAL: Color32 = Color32::from_rgb(0, 158, 115);
/// Reddish purple of the Okabe–Ito palette.
pub const PURPLE: Color32 = Color32::from_rgb(204, 121, 167);
/// Yellow of the Okabe–Ito palette.
pub const YELLOW: Color32 = Color32::from_rgb(240, 228, 66);

/// Colours for the plotted roles, in the order selected, parent, children, siblings.
pub const ROLE_COLOURS: [Color32; 4] = [VERMILLION, BLUE, TEAL, PURPLE];

/// A small text badge with a coloured frame-less background.
pub fn pill(text: &str, colour: Color32) -> RichText {
    RichText::new(text)
        .small()
        .strong()
        .color(Color32::BLACK)
        .background_color(colour)
}

/// The review badge: a symbol plus a word, never colour alone.
pub fn review(status: ReviewStatus) -> Option<(RichText, &'static str)> {
    match status {
        ReviewStatus::Unreviewed => None,
        ReviewStatus::Approved => Some((pill("OK", SKY), "Approved by a reviewer")),
        ReviewStatus::ToFix => Some((pill("FIX", YELLOW), "A reviewer asked for changes")),
    }
}

/// The pinned badge.
pub fn pinned() -> (RichText, &'static str) {
    (
        pill("PIN", Color32::from_gray(200)),
        "Pinned: stays under its parent when the tree is rebuilt",
    )
}

/// The merged-alias badge.
pub fn aliases(count: usize) -> (RichText, String) {
    (
        pill(&format!("+{count}"), Color32::from_gray(200)),
        format!("{count} phrase(s) merged into this node as aliases"),
    )
}

/// The finding-severity badge: a shape and a letter on a colour, so it reads without colour.
pub fn severity(s: Severity) -> (RichText, &'static str) {
    match s {
        Severity::Error => (pill("ERR", VERMILLION), "Worst open finding: error"),
        Severity::Warning => (pill("WARN", ORANGE), "Worst open finding: warning"),
        Severity::Info => (pill("INFO", SKY), "Worst open finding: information"),
    }
}

/// Text from the model for display with the bundled fonts, which lack arrows and a few
/// other symbols: `→` becomes `->`, `←` `<-`, `↔` `<->`, `‖` `||`.
pub fn plain(s: &str) -> String {
    s.replace('→', "->")
        .replace('←', "<-")
        .replace('↔', "<->")
        .replace('‖', "||")
}
