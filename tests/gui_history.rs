//! Issue 23 in the workbench, driven through visible labels (egui_kittest): undo after a
//! save appends a revert (the saved file only grows), a saved sign-off is not undone
//! without a reason, a reverted sign-off shows in the status bar, and the sign-off dialog's
//! key-file field signs the sign-off so that `verify` with an allowed-signers file passes.

mod common;

use std::path::Path;

use egui::accesskit::Role;
use egui_kittest::Harness;
use egui_kittest::kittest::{NodeT, Queryable};
use treewright::gui::{Action, App};
use treewright::model::edit::Edit;
use treewright::model::overrides::OverrideLayer;

fn open(dir: &std::path::Path) -> Harness<'static, App> {
    common::workbench::open_workbench(dir, [1280.0, 800.0])
}

fn saved(dir: &Path) -> Vec<treewright::model::edit::EditRecord> {
    OverrideLayer::load(&dir.join("overrides.json"))
        .unwrap()
        .edits
}

#[test]
fn undo_after_save_appends_a_revert_and_the_file_only_grows() {
    let (_t, dir) = common::workbench::demo_dir();
    let mut h = open(&dir);
    let base_tree = h.state().doc.eff.as_ref().unwrap().tree.clone();
    h.state_mut().apply(Action::Edit(Edit::Exclude {
        node: "gifts".into(),
    }));
    h.state_mut().apply(Action::Save);
    h.run();
    let before = saved(&dir);
    assert_eq!(before.len(), 1);
    h.state_mut().apply(Action::Undo);
    h.run();
    h.get_by_label_contains("a revert was appended");
    h.state_mut().apply(Action::Save);
    h.run();
    let after = saved(&dir);
    assert_eq!(after.len(), 2);
    assert_eq!(after[0], before[0]);
    assert!(matches!(after[1].edit, Edit::Revert { edit: 0, .. }));
    assert_eq!(after[1].author, "tester");
    assert_eq!(h.state().doc.eff.as_ref().unwrap().tree, base_tree);
    // redo of the saved undo appends a revert of the revert
    h.state_mut().apply(Action::Redo);
    h.state_mut().apply(Action::Save);
    h.run();
    let redone = saved(&dir);
    assert_eq!(redone.len(), 3, "{redone:?}");
    assert!(
        matches!(redone[2].edit, Edit::Revert { edit: 1, .. }),
        "{redone:?}"
    );
    assert_ne!(h.state().doc.eff.as_ref().unwrap().tree, base_tree);
    // an unsaved edit is still simply dropped (nothing was recorded yet)
    h.state_mut().apply(Action::Edit(Edit::Exclude {
        node: "bird-netting".into(),
    }));
    h.state_mut().apply(Action::Undo);
    h.run();
    assert_eq!(h.state().doc.layer.edits.len(), 3);
    assert!(!h.state().is_dirty());
}

#[test]
fn a_saved_sign_off_is_not_undone_and_a_reverted_one_shows() {
    let (_t, dir) = common::workbench::demo_dir();
    let mut h = open(&dir);
    let e = h.state().doc.signoff_edit("rowan").unwrap();
    h.state_mut().apply(Action::Edit(e));
    h.state_mut().apply(Action::Save);
    h.state_mut().apply(Action::Undo);
    h.run();
    h.get_by_label_contains("reverting it needs a reason");
    assert_eq!(h.state().doc.layer.edits.len(), 1);
    // reverted on the command line, with a reason
    let o = std::process::Command::new(env!("CARGO_BIN_EXE_treewright"))
        .args([
            "undo",
            dir.to_str().unwrap(),
            "--reason",
            "wrong range",
            "--author",
            "ines",
        ])
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let mut h = open(&dir);
    h.run();
    h.get_by_label("SIGN-OFF REVERTED");
    h.get_by_label("not signed off");
}

#[test]
fn the_sign_off_dialog_signs_with_a_key_file() {
    let (t, dir) = common::workbench::demo_dir();
    let keys = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/data/signing");
    let key = t.path().join("rowan_ed25519");
    std::fs::copy(keys.join("rowan_ed25519"), &key).unwrap();
    let public = std::fs::read_to_string(keys.join("rowan_ed25519.pub")).unwrap();
    std::fs::write(dir.join("reviewers.allowed"), format!("tester {public}")).unwrap();
    let m = dir.join("project.json");
    let mut v: serde_json::Value = serde_json::from_slice(&std::fs::read(&m).unwrap()).unwrap();
    v["signoff"] = serde_json::json!({"allowed_signers": "reviewers.allowed"});
    std::fs::write(&m, serde_json::to_vec_pretty(&v).unwrap()).unwrap();

    let mut h = open(&dir);
    h.get_by_label("Review").click();
    h.run();
    h.get_all_by_label_contains("Sign off…")
        .next()
        .unwrap()
        .click();
    h.run();
    let field = |h: &Harness<'static, App>| {
        h.get_all_by_label("Key file:")
            .find(|n| n.accesskit_node().role() == Role::TextInput)
            .is_some()
    };
    assert!(field(&h), "the dialog has a key-file field");
    h.get_all_by_label("Key file:")
        .find(|n| n.accesskit_node().role() == Role::TextInput)
        .unwrap()
        .focus();
    h.run();
    h.get_all_by_label("Key file:")
        .find(|n| n.accesskit_node().role() == Role::TextInput)
        .unwrap()
        .type_text(key.to_str().unwrap());
    h.run();
    h.get_by_label("Sign off").click();
    h.run();
    h.get_by_label("SIGNED OFF");
    let edits = saved(&dir);
    assert!(
        matches!(&edits[0].edit, Edit::Signoff { signature: Some(s), .. } if s.contains("SSH SIGNATURE")),
        "{edits:?}"
    );
    let o = std::process::Command::new(env!("CARGO_BIN_EXE_treewright"))
        .args(["verify", dir.to_str().unwrap()])
        .output()
        .unwrap();
    let text = String::from_utf8_lossy(&o.stdout);
    assert_eq!(o.status.code(), Some(0), "{text}");
    assert!(text.contains("an allowed key of its reviewer"), "{text}");
}
