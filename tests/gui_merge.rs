//! The workbench's "Merge with the file on disk" dialog (issue 18), driven by labels with
//! egui_kittest: a save refused because a script saved first opens the dialog, the curator
//! keeps the other side for the conflict, and the merged layer is saved.

use std::process::Command;

use egui_kittest::Harness;
use egui_kittest::kittest::Queryable;
use treewright::gui::context::Action;
use treewright::gui::{App, Settings};
use treewright::model::edit::Edit;
use treewright::model::overrides::parse_overrides;
use treewright::model::sample::write_demo;

#[test]
fn refused_save_offers_the_merge_dialog() {
    let t = tempfile::tempdir().unwrap();
    let dir = t.path().join("demo");
    write_demo(&dir).unwrap();
    let mut doc = treewright::gui::Doc::open(&dir).unwrap();
    doc.wait_for_audit();
    let app = App::new(
        doc,
        Settings {
            author: "win".into(),
            ..Settings::default()
        },
    );
    let mut h = Harness::builder()
        .with_size([1280.0, 800.0])
        .with_max_steps(12)
        .build_ui_state(|ui, app: &mut App| app.ui(ui), app);
    h.run();
    h.state_mut().apply(Action::Edit(Edit::Reparent {
        node: "aloe".into(),
        parent: "shrubs".into(),
    }));
    let out = Command::new(env!("CARGO_BIN_EXE_treewright"))
        .arg("edit")
        .arg(&dir)
        .args(["reparent", "aloe", "houseplants", "--author", "cli"])
        .output()
        .unwrap();
    assert!(out.status.success());
    h.state_mut().apply(Action::Save);
    h.run();
    h.get_by_label("Merge with the file on disk");
    h.get_by_label_contains("Conflict c1 (placement) on aloe");
    // the two-parent ellipse view: the parents are the ones the two reparent edits named
    h.get_by_label("Ellipses for c1");
    h.get_by_label_contains("under shrubs (mine): ");
    h.get_by_label_contains("under houseplants (theirs): ");
    h.get_by_label("Keep theirs").click();
    h.run();
    h.get_by_label("Merge and save").click();
    h.run();
    let edits = parse_overrides(&std::fs::read(dir.join("overrides.json")).unwrap(), "o").unwrap();
    assert_eq!(edits.len(), 1, "{edits:?}");
    assert_eq!(edits[0].author, "cli");
    assert!(h.query_by_label("Merge with the file on disk").is_none());
}

/// Ctrl+Z after "Merge and save" takes the whole merge back in one step; saving then opens
/// the merge dialog again instead of writing the other side's edit away.
#[test]
fn undo_takes_back_the_whole_merge() {
    let t = tempfile::tempdir().unwrap();
    let dir = t.path().join("demo");
    write_demo(&dir).unwrap();
    let mut doc = treewright::gui::Doc::open(&dir).unwrap();
    doc.wait_for_audit();
    let app = App::new(
        doc,
        Settings {
            author: "win".into(),
            ..Settings::default()
        },
    );
    let mut h = Harness::builder()
        .with_size([1280.0, 800.0])
        .with_max_steps(12)
        .build_ui_state(|ui, app: &mut App| app.ui(ui), app);
    h.run();
    h.state_mut().apply(Action::Edit(Edit::Reparent {
        node: "aloe".into(),
        parent: "shrubs".into(),
    }));
    let out = Command::new(env!("CARGO_BIN_EXE_treewright"))
        .arg("edit")
        .arg(&dir)
        .args(["rename", "bulb-planter", "Bulb tool", "--author", "cli"])
        .output()
        .unwrap();
    assert!(out.status.success());
    h.state_mut().apply(Action::Save);
    h.run();
    h.get_by_label("Merge and save").click();
    h.run();
    assert!(h.query_by_label("Merge with the file on disk").is_none());
    let on_disk = || parse_overrides(&std::fs::read(dir.join("overrides.json")).unwrap(), "o");
    assert_eq!(on_disk().unwrap().len(), 2);

    h.state_mut().apply(Action::Undo);
    h.run();
    h.get_by_label_contains("Undid the merge with the file on disk (2 edits back to 1");
    h.state_mut().apply(Action::Save);
    h.run();
    h.get_by_label("Merge with the file on disk");
    assert_eq!(on_disk().unwrap().len(), 2, "the merged file is kept");
}
