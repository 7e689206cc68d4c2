//! The workbench's way forward when saving finds the override file changed on disk:
//! `Workspace::merge_with_disk` + `Workspace::finish_merge` (issue 18).

use std::collections::BTreeMap;
use std::process::Command;

use treewright::model::edit::Edit;
use treewright::model::merge::Side;
use treewright::model::overrides::parse_overrides;
use treewright::model::{Workspace, WorkspaceError};

fn tw(args: &[&str]) {
    let o = Command::new(env!("CARGO_BIN_EXE_treewright"))
        .args(args)
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
}

fn reparent(n: &str, p: &str) -> Edit {
    Edit::Reparent {
        node: n.into(),
        parent: p.into(),
    }
}

#[test]
fn refused_save_merges_with_the_file_on_disk() {
    let t = tempfile::tempdir().unwrap();
    let dir = t.path().join("demo");
    let d = dir.to_str().unwrap();
    tw(&["sample", "--out", d]);
    tw(&["edit", d, "review", "aloe", "approved", "--author", "ana"]);
    let mut ws = Workspace::open(&dir).unwrap();
    // someone else saves meanwhile
    tw(&[
        "edit",
        d,
        "reparent",
        "aloe",
        "houseplants",
        "--author",
        "cara",
    ]);
    tw(&[
        "edit",
        d,
        "rename",
        "bulb-planter",
        "Bulb tool",
        "--author",
        "cara",
    ]);
    ws.edit(reparent("bird-netting", "wildlife-gardening"), "ben", None)
        .unwrap();
    ws.edit(reparent("aloe", "shrubs"), "ben", None).unwrap();
    assert!(matches!(ws.save(), Err(WorkspaceError::Overrides(_))));

    let m = ws.merge_with_disk().unwrap();
    assert_eq!(m.added_theirs.len(), 2, "what the other side added");
    assert_eq!(m.conflicts.len(), 1);
    let c = &m.conflicts[0];
    assert_eq!(c.nodes, ["aloe"]);
    assert_eq!(c.ours[0].author, "ben");
    assert_eq!(c.theirs[0].author, "cara");
    let choices = BTreeMap::from([(c.id.clone(), Side::Theirs)]);
    ws.finish_merge(&m, &choices).unwrap();

    let on_disk = parse_overrides(&std::fs::read(ws.overrides_path()).unwrap(), "o").unwrap();
    assert_eq!(on_disk, ws.layer.edits);
    let eff = ws.effective().unwrap();
    let row = |id: &str| ws.project.phrases.get(id).unwrap();
    let parent = |id: &str| ws.project.phrases.id(eff.tree.parent(row(id)).unwrap());
    assert_eq!(parent("aloe"), "houseplants");
    assert_eq!(parent("bird-netting"), "wildlife-gardening");
    assert_eq!(eff.label(row("bulb-planter")), "Bulb tool");
    assert!(!ws.layer.is_dirty());

    // a merge computed before yet another save is refused, not written over it
    ws.edit(reparent("aloe", "shrubs"), "ben", None).unwrap();
    tw(&["edit", d, "rename", "aloe", "Aloe vera", "--author", "cara"]);
    let m = ws.merge_with_disk().unwrap();
    tw(&[
        "edit",
        d,
        "rename",
        "bird-netting",
        "Netting",
        "--author",
        "cara",
    ]);
    assert!(ws.finish_merge(&m, &BTreeMap::new()).is_err());
    let m = ws.merge_with_disk().unwrap();
    assert!(m.is_clean());
    ws.finish_merge(&m, &BTreeMap::new()).unwrap();
    assert_eq!(ws.layer.edits.len(), 7);
}

/// Undo takes a whole merge back in one step, and the edits the other side saved are not
/// lost by it: the merged file stays on disk, so the next save is refused and offers the
/// merge again (issue 18, "Undo covers the merge as one step").
#[test]
fn undo_takes_the_merge_back_as_one_step_and_loses_nothing() {
    let t = tempfile::tempdir().unwrap();
    let dir = t.path().join("demo");
    let d = dir.to_str().unwrap();
    tw(&["sample", "--out", d]);
    let mut ws = Workspace::open(&dir).unwrap();
    tw(&[
        "edit",
        d,
        "rename",
        "bulb-planter",
        "Bulb tool",
        "--author",
        "cara",
    ]);
    tw(&[
        "edit",
        d,
        "reparent",
        "aloe",
        "houseplants",
        "--author",
        "cara",
    ]);
    ws.edit(reparent("bird-netting", "wildlife-gardening"), "ben", None)
        .unwrap();
    ws.edit(reparent("aloe", "shrubs"), "ben", None).unwrap();
    let mine = ws.layer.edits.clone();
    let tree_mine = ws.effective().unwrap().tree.clone();
    assert!(ws.save().is_err());
    let m = ws.merge_with_disk().unwrap();
    let c = m.conflicts[0].id.clone();
    ws.finish_merge(&m, &BTreeMap::from([(c.clone(), Side::Theirs)]))
        .unwrap();
    let merged = ws.layer.edits.clone();
    assert_eq!(merged.len(), 3, "{merged:?}");
    let tree_merged = ws.effective().unwrap().tree.clone();
    // one more edit on top is undone on its own first
    ws.edit(reparent("bird-netting", "hand-tools"), "ben", None)
        .unwrap();
    assert!(matches!(
        ws.undo_step(),
        Some(treewright::model::overrides::Step::Edit(_))
    ));
    assert_eq!(ws.layer.edits, merged);

    // one undo step: the edits and the effective tree are mine again
    assert_eq!(
        ws.undo_step(),
        Some(treewright::model::overrides::Step::Merge { from: 3, to: 2 })
    );
    assert_eq!(ws.layer.edits, mine);
    assert_eq!(ws.effective().unwrap().tree, tree_mine);
    assert!(
        ws.layer.undo().is_some(),
        "below the merge, edits undo one by one"
    );
    ws.redo_step().unwrap();

    // saving now must not write the other side's edits away
    assert!(matches!(ws.save(), Err(WorkspaceError::Overrides(_))));
    let on_disk = parse_overrides(&std::fs::read(ws.overrides_path()).unwrap(), "o").unwrap();
    assert_eq!(on_disk, merged, "the merged file is untouched");
    let again = ws.merge_with_disk().unwrap();
    assert_eq!(again.conflicts.len(), 1, "the choice is offered again");

    // redo puts the whole merge back, and it saves
    assert_eq!(
        ws.redo_step(),
        Some(treewright::model::overrides::Step::Merge { from: 2, to: 3 })
    );
    assert_eq!(ws.layer.edits, merged);
    assert_eq!(ws.effective().unwrap().tree, tree_merged);
    assert!(!ws.layer.is_dirty());
    ws.save().unwrap();
    assert!(
        ws.redo_step().is_some(),
        "the edit on top redoes after the merge"
    );
    ws.save().unwrap();
    let on_disk = parse_overrides(&std::fs::read(ws.overrides_path()).unwrap(), "o").unwrap();
    assert_eq!(on_disk.len(), 4);
}
