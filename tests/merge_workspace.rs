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
