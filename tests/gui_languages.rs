//! The workbench on the three-shop sample (`sample-projects/fernhollow-intl`: English,
//! German and Japanese labels): the View menu switches the label language, the tree's search
//! finds a phrase by a label in any language, and with a CJK system font installed (found
//! with fontdb, as at start) a Japanese label is drawn with real glyphs.

use std::path::{Path, PathBuf};

use egui::{FontFamily, FontId};
use egui_kittest::Harness;
use egui_kittest::kittest::Queryable;
use treewright::gui::fonts::{fallback_definitions, install};
use treewright::gui::{App, Settings};

fn sample_copy() -> (tempfile::TempDir, PathBuf) {
    let src = Path::new(env!("CARGO_MANIFEST_DIR")).join("sample-projects/fernhollow-intl");
    let t = tempfile::tempdir().unwrap();
    let dir = t.path().join("intl");
    std::fs::create_dir_all(&dir).unwrap();
    for f in [
        "project.json",
        "phrases.json",
        "embeddings.json",
        "tree.json",
    ] {
        std::fs::copy(src.join(f), dir.join(f)).unwrap();
    }
    (t, dir)
}

/// Open the workbench; `fonts`: definitions installed before the first frame (else egui's
/// own, with boxes allowed for the glyphs they lack: kittest panics on a missing glyph).
fn open(
    dir: &Path,
    settings: Settings,
    fonts: Option<egui::FontDefinitions>,
) -> Harness<'static, App> {
    let mut doc = treewright::gui::Doc::open(dir).unwrap();
    doc.wait_for_audit();
    let app = App::new(doc, settings);
    let mut h = Harness::builder()
        .with_size([1280.0, 800.0])
        .with_max_steps(12)
        .allow_missing_glyphs()
        .build_ui_state(|ui, app: &mut App| app.ui(ui), app);
    match fonts {
        Some(defs) => h.ctx.set_fonts(defs),
        None => h
            .ctx
            .set_missing_glyph_policy(egui::MissingGlyphPolicy::Tofu),
    }
    h.run();
    h
}

/// Whether some widget's label contains `s`.
fn shows(h: &Harness<'_, App>, s: &str) -> bool {
    h.query_all_by_label_contains(s).next().is_some()
}

fn settings() -> Settings {
    Settings {
        author: "tester".into(),
        ..Settings::default()
    }
}

#[test]
fn the_view_menu_switches_the_label_language_and_search_matches_any_language() {
    let (_t, dir) = sample_copy();
    let mut h = open(&dir, settings(), None);
    assert!(shows(&h, "plants"));
    h.get_by_label("View").click();
    h.run();
    h.get_by_label("de").click();
    h.run();
    assert_eq!(h.state().settings.display_language.as_deref(), Some("de"));
    assert!(shows(&h, "Pflanzen"));
    assert!(shows(&h, "Gartenbedarf"));
    // search by the Japanese label: the match is shown in the display language
    h.key_press_modifiers(egui::Modifiers::COMMAND, egui::Key::F);
    h.run();
    h.get_by_role(egui::accesskit::Role::TextInput)
        .type_text("じょうろ");
    h.run();
    assert!(shows(&h, "Gießkanne"));
    assert!(!shows(&h, "Gartenschere"));
    // English, any case, finds the same phrase
    h.key_press_modifiers(egui::Modifiers::COMMAND, egui::Key::F);
    h.run();
    h.key_press_modifiers(egui::Modifiers::COMMAND, egui::Key::A);
    h.run();
    h.get_by_role(egui::accesskit::Role::TextInput)
        .type_text("GIFT VOUCHER");
    h.run();
    assert!(shows(&h, "Gutschein"));
    // Japanese display: a phrase without a Japanese label shows its default-language label
    h.get_by_label("View").click();
    h.run();
    h.get_by_label("ja").click();
    h.run();
    assert!(shows(&h, "gift voucher"));
    assert!(shows(&h, "ギフト"));
}

#[test]
fn cjk_label_is_drawn_with_non_empty_glyphs_when_a_cjk_font_is_present() {
    let mut db = fontdb::Database::new();
    db.load_system_fonts();
    let (defs, report) = fallback_definitions(&db);
    if report.missing.contains(&"Chinese/Japanese (CJK)") {
        println!(
            "SKIPPED: no CJK font on this system (install fonts-noto-cjk or fonts-wqy-microhei); \
             found: {:?}",
            report.added
        );
        return;
    }
    let text = "多肉植物";
    let font = FontId::new(14.0, FontFamily::Proportional);
    // the broken twin: egui's bundled fonts alone have no glyph for it (boxes)
    let plain = egui::Context::default();
    plain.set_fonts(egui::FontDefinitions::default());
    let _ = plain.run_ui(Default::default(), |_| {});
    assert!(!plain.fonts_mut(|f| f.has_glyphs(&font, text)));

    let (_t, dir) = sample_copy();
    // kittest panics on a glyph no font has, so drawing the whole window in Japanese is
    // itself a check
    let mut h = open(
        &dir,
        Settings {
            display_language: Some("ja".into()),
            ..settings()
        },
        Some(defs),
    );
    assert!(shows(&h, "植物"));
    h.key_press_modifiers(egui::Modifiers::COMMAND, egui::Key::F);
    h.run();
    h.get_by_role(egui::accesskit::Role::TextInput)
        .type_text(text);
    h.run();
    assert!(shows(&h, text));
    assert!(h.ctx.fonts_mut(|f| f.has_glyphs(&font, text)));
    let galley = h
        .ctx
        .fonts_mut(|f| f.layout_no_wrap(text.into(), font.clone(), egui::Color32::BLACK));
    let glyphs: Vec<_> = galley.rows.iter().flat_map(|r| r.glyphs.iter()).collect();
    assert_eq!(glyphs.len(), 4);
    for g in glyphs {
        assert!(!g.uv_rect.is_nothing(), "{:?} has no pixels", g.chr);
        assert!(g.advance_width > 4.0, "{:?}", g.chr);
    }
    // install() is what the workbench runs at start
    let _ = install(&h.ctx);
}
