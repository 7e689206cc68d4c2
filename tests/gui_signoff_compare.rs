//! The workbench's sign-off state and its Compare trees window use the comparison `verify`
//! makes (issue 22), driven by visible labels on a fresh copy of the Fernhollow demo.

mod common;

use egui_kittest::Harness;
use egui_kittest::kittest::Queryable;
use treewright::gui::{Action, App};
use treewright::model::edit::Edit;
use treewright::model::sample::write_demo;

fn open(dir: &std::path::Path) -> Harness<'static, App> {
    common::workbench::open_workbench(dir, [1280.0, 800.0])
}

#[test]
fn the_status_bar_counts_the_changes_since_sign_off_and_opens_the_comparison() {
    let t = tempfile::tempdir().unwrap();
    let dir = t.path().join("fernhollow");
    write_demo(&dir).unwrap();
    let mut h = open(&dir);
    h.get_by_label("Review").click();
    h.run();
    h.get_all_by_label_contains("Sign off…")
        .next()
        .unwrap()
        .click();
    h.run();
    h.get_by_label("Sign off").click();
    h.run();
    h.get_by_label("SIGNED OFF");
    // the snapshot of the signed tree is kept beside the project
    assert_eq!(std::fs::read_dir(dir.join("signoffs")).unwrap().count(), 2);
    for e in [
        Edit::Rename {
            node: "gifts".into(),
            label: "gift ideas".into(),
            language: None,
        },
        Edit::Exclude {
            node: "aloe".into(),
        },
    ] {
        h.state_mut().apply(Action::Edit(e));
        h.run();
    }
    h.get_by_label("SIGN-OFF OUTDATED");
    h.get_by_label("changed since sign-off: 2 nodes, see Compare trees")
        .click();
    h.run();
    h.get_by_label("Compare trees");
    h.get_by_label_contains("changed since sign-off: 2 nodes (signed tree from its snapshot");
    h.get_by_label_contains(
        "renamed   gifts: \"gifts\" -> \"gift ideas\"    [edit #1 (rename gifts",
    );
    h.get_by_label_contains("excluded  aloe    [edit #2 (exclude aloe)]");
}
