//! File ▸ Import taxonomy… in the workbench (egui_kittest, by labels): the menu offers it,
//! and importing a SKOS file makes it the tree, kept in the manifest with the previous
//! manifest backed up.

use std::path::Path;

use egui_kittest::Harness;
use egui_kittest::kittest::Queryable;
use treewright::gui::{Action, App, Settings};
use treewright::model::export::export_skos;
use treewright::model::sample::write_demo;

fn open(dir: &Path) -> Harness<'static, App> {
    let mut doc = treewright::gui::Doc::open(dir).unwrap();
    doc.wait_for_audit();
    let app = App::new(
        doc,
        Settings {
            author: "tester".into(),
            ..Settings::default()
        },
    );
    let mut h = Harness::builder()
        .with_size([1280.0, 800.0])
        .with_max_steps(12)
        .build_ui_state(|ui, app: &mut App| app.ui(ui), app);
    h.run();
    h
}

#[test]
fn import_taxonomy_sets_the_tree_and_keeps_the_previous_manifest() {
    let t = tempfile::tempdir().unwrap();
    let dir = t.path().join("fernhollow");
    write_demo(&dir).unwrap();
    let mut h = open(&dir);
    h.get_by_label("File").click();
    h.run();
    assert!(h.query_by_label("Import taxonomy…").is_some());

    // a taxonomy: the demo's effective tree as our SKOS export writes it
    let (ttl, want) = {
        let app = h.state();
        let eff = app.doc.eff.as_ref().unwrap();
        let phrases = &app.doc.project.phrases;
        let ttl = export_skos(eff, phrases, "http://example.org/fh/", "Fernhollow").unwrap();
        (ttl, eff.tree.to_file(phrases))
    };
    let src = t.path().join("hand-made.ttl");
    std::fs::write(&src, &ttl).unwrap();
    let before = std::fs::read_to_string(dir.join("project.json")).unwrap();

    h.state_mut().apply(Action::ImportTaxonomy(src));
    h.run();

    let manifest = std::fs::read_to_string(dir.join("project.json")).unwrap();
    assert!(
        manifest.contains("\"tree\": \"taxonomy.ttl\""),
        "{manifest}"
    );
    assert_eq!(
        std::fs::read_to_string(dir.join("project.json.bak")).unwrap(),
        before
    );
    assert!(dir.join("taxonomy.ttl").exists());
    {
        let app = h.state();
        let base = app.doc.project.tree.as_ref().unwrap();
        assert_eq!(base.to_file(&app.doc.project.phrases), want);
    }
    assert!(
        h.query_by_label_contains("Taxonomy in use as the tree")
            .is_some(),
        "status bar reports the import"
    );
}
