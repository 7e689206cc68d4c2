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

#[test]
fn import_report_dialog_lists_what_matched_nothing_with_counts_and_copies_it() {
    let t = tempfile::tempdir().unwrap();
    let dir = t.path().join("fernhollow");
    write_demo(&dir).unwrap();
    let mut h = open(&dir);
    let (ids, n) = {
        let p = &h.state().doc.project.phrases;
        let ids: Vec<String> = (0..3).map(|i| p.id(i).to_string()).collect();
        (ids, p.len())
    };
    // three concepts matched by notation, one with two broader concepts, one matching nothing
    let ttl = format!(
        "@prefix skos: <http://www.w3.org/2004/02/skos/core#> .
@prefix ex: <http://example.org/fh/> .
ex:c0 a skos:Concept ; skos:notation \"{}\" .
ex:c1 a skos:Concept ; skos:notation \"{}\" ; skos:broader ex:c0 .
ex:c2 a skos:Concept ; skos:notation \"{}\" ; skos:broader ex:c0, ex:c1 .
ex:gnomes a skos:Concept ; skos:prefLabel \"Garden gnome statues\"@en ; skos:broader ex:c0 .
",
        ids[0], ids[1], ids[2]
    );
    let src = t.path().join("hand-made.ttl");
    std::fs::write(&src, ttl).unwrap();
    h.get_by_label("File").click();
    h.run();
    h.state_mut().apply(Action::ImportTaxonomy(src));
    h.run();

    assert!(h.query_by_label("Taxonomy import report").is_some());
    assert!(
        h.query_by_label_contains("3 of 4 concepts matched a phrase")
            .is_some()
    );
    assert!(
        h.query_by_label("Concepts that match no phrase (1)")
            .is_some()
    );
    let unmatched = format!("Phrases that match no concept ({})", n - 3);
    assert!(h.query_by_label(&unmatched).is_some(), "{unmatched}");
    assert!(
        h.query_by_label("Concepts with several broader concepts (1)")
            .is_some()
    );
    assert!(
        h.query_by_label_contains("Garden gnome statues").is_some(),
        "the unmatched concept is listed"
    );

    // copy one list, then the whole report: the text goes to the clipboard
    let copied = |h: &Harness<'static, App>| -> Vec<String> {
        h.output()
            .platform_output
            .commands
            .iter()
            .filter_map(|c| match c {
                egui::OutputCommand::CopyText(s) => Some(s.clone()),
                _ => None,
            })
            .collect()
    };
    h.get_by_label("Copy: Concepts that match no phrase")
        .click();
    h.step();
    let got = copied(&h);
    assert!(
        got.iter()
            .any(|s| s.contains("Garden gnome statues") && !s.contains("Phrases that")),
        "{got:?}"
    );
    h.get_by_label("Copy report").click();
    h.step();
    let got = copied(&h);
    assert!(
        got.iter()
            .any(|s| s.contains("Concepts that match no phrase (1):")
                && s.contains(&unmatched)
                && s.contains("<http://example.org/fh/c2>: kept <http://example.org/fh/c0>")),
        "{got:?}"
    );

    h.get_by_label("Close").click();
    h.run();
    assert!(h.query_by_label("Taxonomy import report").is_none());
}
