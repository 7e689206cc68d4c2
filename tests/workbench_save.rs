//! The workbench's save when someone else saved first (issue 20): nothing is overwritten and
//! nothing is discarded; the edits go to the recovery file and the message says so.

use std::process::Command;

use treewright::gui::Doc;
use treewright::gui::autosave::{FILE_NAME, Recovery};
use treewright::model::edit::{Edit, ReviewStatus};
use treewright::model::sample::write_demo;

#[test]
fn a_refused_save_keeps_the_edits_in_the_recovery_file() {
    let t = tempfile::tempdir().unwrap();
    let dir = t.path().join("demo");
    write_demo(&dir).unwrap();
    let mut doc = Doc::open(&dir).unwrap();
    doc.wait_for_audit();
    let root = doc.project.tree.as_ref().unwrap().root();
    let kid = doc.eff.as_ref().unwrap().tree.children(root)[0];
    let kid = doc.project.phrases.id(kid).to_string();
    doc.edit(
        Edit::Review {
            node: kid.clone(),
            status: ReviewStatus::Approved,
            comment: "from the window".into(),
        },
        "win",
        None,
    )
    .unwrap();
    // a script records an edit meanwhile
    let out = Command::new(env!("CARGO_BIN_EXE_treewright"))
        .arg("edit")
        .arg(&dir)
        .args(["rename", &kid, "renamed by a script", "--author", "cli"])
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let on_disk = std::fs::read(dir.join("overrides.json")).unwrap();

    let msg = doc.save().unwrap_err();
    assert!(msg.contains("changed on disk"), "{msg}");
    assert!(
        msg.contains(FILE_NAME),
        "the message names the recovery file: {msg}"
    );
    assert_eq!(
        std::fs::read(dir.join("overrides.json")).unwrap(),
        on_disk,
        "the other writer's file is untouched"
    );
    // reopening offers the window's edit back
    let again = Doc::open(&dir).unwrap();
    let rec = Recovery::find(&again).expect("a recovery file");
    assert!(rec.extra.iter().any(|r| r.author == "win"), "{rec:?}");
}
