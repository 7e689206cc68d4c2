//! `verify` says everything that changed since the sign-off (issue 22).
//!
//! The property test checks the Done-when clause: after any sequence of edits, rebuilds of
//! the base tree and re-imports of the phrase table, the changes `verify` lists, applied to
//! the signed tree, give exactly the current effective tree (compared as canonical text, the
//! bytes the sign-off hashes). The end-to-end tests drive the binary on a copy of the demo
//! and check the listed moves against an independent route: the `apply` command's output
//! before and after the rebuild.

use std::collections::BTreeMap;
use std::path::Path;
use std::process::{Command, Output};

use proptest::prelude::*;
use treewright::model::PhraseTable;
use treewright::model::edit::{Edit, EditRecord};
use treewright::model::overrides::apply;
use treewright::model::phrase::PhraseRecord;
use treewright::model::signed::{SignedSource, SignedTree, since_signoff, since_signoff_uncaused};
use treewright::model::signoff::{canonical_tree, signoff_edit};
use treewright::model::tree::Tree;

const IDS: usize = 12;

fn id(k: u8) -> String {
    format!("p{}", k as usize % IDS)
}

/// A phrase table of the ids kept by `keep` (p0 always), labels of version `v`.
fn table(keep: u16, v: u8) -> PhraseTable {
    let recs: Vec<PhraseRecord> = (0..IDS)
        .filter(|&i| i == 0 || keep & (1 << i) != 0)
        .map(|i| PhraseRecord {
            id: Some(format!("p{i}")),
            label: format!("phrase {i} v{v}"),
        })
        .collect();
    PhraseTable::from_records(&recs).unwrap()
}

/// A base tree over `t` rooted at p0: each phrase under an earlier placed one, or left out.
fn tree(t: &PhraseTable, picks: &[u8]) -> Tree {
    let mut placed = vec!["p0".to_string()];
    let mut parent = BTreeMap::new();
    for (i, &k) in picks.iter().enumerate().take(IDS).skip(1) {
        let me = format!("p{i}");
        if t.get(&me).is_none() {
            continue;
        }
        if k.is_multiple_of(7) {
            continue;
        }
        let p = placed[k as usize % placed.len()].clone();
        parent.insert(me.clone(), p);
        placed.push(me);
    }
    Tree::from_id_map(t, "p0", &parent).unwrap()
}

fn rec(e: Edit) -> EditRecord {
    EditRecord {
        edit: e,
        author: "ines".into(),
        time: "2026-12-04T10:00:00Z".into(),
        note: None,
    }
}

fn edit(kind: u8, a: u8, b: u8) -> Edit {
    let (node, other) = (id(a), id(b));
    match kind % 7 {
        0 => Edit::Reparent {
            node,
            parent: other,
        },
        1 => Edit::Pin {
            node,
            parent: other,
        },
        2 => Edit::Unpin { node },
        3 => Edit::Merge {
            sources: vec![node],
            into: other,
        },
        4 => Edit::Rename {
            node,
            label: format!("label {a} {b}"),
            language: None,
        },
        5 => Edit::Exclude { node },
        _ => Edit::Include { node },
    }
}

#[derive(Debug, Clone)]
enum Op {
    Edit(u8, u8, u8),
    Rebuild(Vec<u8>),
    Reimport(u16, u8),
}

fn op() -> impl Strategy<Value = Op> {
    prop_oneof![
        6 => (any::<u8>(), any::<u8>(), any::<u8>()).prop_map(|(k, a, b)| Op::Edit(k, a, b)),
        1 => prop::collection::vec(any::<u8>(), IDS).prop_map(Op::Rebuild),
        1 => (any::<u16>(), any::<u8>()).prop_map(|(k, v)| Op::Reimport(k, v)),
    ]
}

struct World {
    phrases: PhraseTable,
    picks: Vec<u8>,
    base: Tree,
    edits: Vec<EditRecord>,
}

impl World {
    fn run(&mut self, o: &Op) {
        match o {
            Op::Edit(k, a, b) => self.edits.push(rec(edit(*k, *a, *b))),
            Op::Rebuild(p) => {
                self.picks = p.clone();
                self.base = tree(&self.phrases, &self.picks);
            }
            Op::Reimport(keep, v) => {
                self.phrases = table(*keep, *v);
                self.base = tree(&self.phrases, &self.picks);
            }
        }
    }
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(400))]

    #[test]
    fn the_listed_changes_turn_the_signed_tree_into_the_current_one(
        picks in prop::collection::vec(any::<u8>(), IDS),
        before in prop::collection::vec(op(), 0..8),
        after in prop::collection::vec(op(), 0..12),
    ) {
        let phrases = table(u16::MAX, 0);
        let base = tree(&phrases, &picks);
        let mut w = World { phrases, picks, base, edits: Vec::new() };
        for o in &before {
            w.run(o);
        }
        let (eff, _) = apply(&w.base, &w.phrases, &w.edits);
        let signed = SignedTree::of(&eff, &w.phrases);
        prop_assert_eq!(signed.to_canonical(), canonical_tree(&eff, &w.phrases));
        let index = w.edits.len();
        w.edits.push(rec(signoff_edit(&eff, &w.phrases, "rowan", 0)));
        let mut base_touched = false;
        for o in &after {
            base_touched |= !matches!(o, Op::Edit(..));
            w.run(o);
        }
        let (now, _) = apply(&w.base, &w.phrases, &w.edits);
        let since = since_signoff(&w.base, &w.phrases, &w.edits, index, Some(signed.clone()), "base")
            .unwrap();
        prop_assert!(since.complete);
        let mut back = signed.clone();
        let changes: Vec<_> = since.changes.iter().map(|c| c.change.clone()).collect();
        back.apply(&changes);
        prop_assert_eq!(back.to_canonical(), canonical_tree(&now, &w.phrases), "{:?}", changes);
        // every change has a cause; edits alone never blame the base tree
        for c in &since.changes {
            prop_assert!(!c.causes.is_empty());
            prop_assert!(c.causes.iter().all(|x| x != "cause not known"), "{:?}", c);
            if !base_touched {
                prop_assert!(c.causes.iter().all(|x| x.starts_with("edit #")), "{:?}", c);
            }
        }
        // the status bar's count comes from the same list, without the causes
        let quick = since_signoff_uncaused(&w.base, &w.phrases, &w.edits, index, Some(signed.clone()))
            .unwrap();
        let quick_changes: Vec<_> = quick.changes.iter().map(|c| c.change.clone()).collect();
        prop_assert_eq!(&quick_changes, &changes);
        prop_assert_eq!(quick.nodes_changed, since.nodes_changed);
        // without a snapshot and without a base change, the replay is exact too
        if !base_touched {
            let replayed = since_signoff(&w.base, &w.phrases, &w.edits, index, None, "base").unwrap();
            prop_assert_eq!(replayed.signed_tree, SignedSource::Replayed);
            prop_assert_eq!(&replayed.changes, &since.changes);
        }
    }
}

// ---- end to end on the demo ----

fn tw(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_treewright"))
        .args(args)
        .output()
        .unwrap()
}

fn ok(args: &[&str]) -> String {
    let o = tw(args);
    assert_eq!(o.status.code(), Some(0), "{args:?}: {}", text(&o));
    String::from_utf8_lossy(&o.stdout).into_owned()
}

fn text(o: &Output) -> String {
    format!(
        "{}{}",
        String::from_utf8_lossy(&o.stdout),
        String::from_utf8_lossy(&o.stderr)
    )
}

fn demo(tmp: &Path) -> String {
    let dir = tmp.join("demo");
    ok(&["sample", "--out", dir.to_str().unwrap()]);
    dir.to_str().unwrap().to_string()
}

/// Parent of every node in the `apply` command's output.
fn applied_parents(p: &str, out: &Path) -> BTreeMap<String, String> {
    ok(&["apply", p, "--out", out.to_str().unwrap()]);
    let v: serde_json::Value = serde_json::from_slice(&std::fs::read(out).unwrap()).unwrap();
    v["parent"]
        .as_object()
        .unwrap()
        .iter()
        .map(|(k, x)| (k.clone(), x.as_str().unwrap().to_string()))
        .collect()
}

fn verify_json(p: &str) -> (i32, serde_json::Value) {
    let o = tw(&["verify", p, "--json"]);
    let v = serde_json::from_slice(&o.stdout).unwrap_or(serde_json::Value::Null);
    (o.status.code().unwrap_or(-1), v)
}

fn changes_of(v: &serde_json::Value, kind: &str) -> Vec<serde_json::Value> {
    v["changes"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|c| c["kind"] == kind)
        .cloned()
        .collect()
}

fn sign_then_rebuild(tmp: &Path, edits: &[&[&str]]) -> (String, BTreeMap<String, String>) {
    let p = demo(tmp);
    for e in edits {
        let mut args = vec!["edit", p.as_str()];
        args.extend_from_slice(e);
        args.extend_from_slice(&["--author", "ines"]);
        ok(&args);
    }
    ok(&["signoff", &p, "--reviewer", "rowan"]);
    let signed = applied_parents(&p, &tmp.join("signed.json"));
    ok(&["build", &p, "--seed", "7", "--similarity", "kl"]);
    (p, signed)
}

#[test]
fn edits_a_sign_off_a_rebuild_and_a_rename_are_all_listed_with_causes() {
    let tmp = tempfile::tempdir().unwrap();
    let (p, signed) = sign_then_rebuild(
        tmp.path(),
        &[
            &["reparent", "aloe", "autumn"],
            &["rename", "acacia-wood-furniture", "acacia furniture"],
            &["exclude", "ant-bait-station"],
            &["merge", "aphid-spray", "--into", "animal-deterrents"],
        ],
    );
    ok(&[
        "edit",
        &p,
        "rename",
        "asparagus-crowns",
        "asparagus",
        "--author",
        "ines",
    ]);
    let now = applied_parents(&p, &tmp.path().join("now.json"));
    // independent route: the nodes whose parent differs between the two `apply` outputs
    let moved: BTreeMap<&String, (&String, &String)> = signed
        .iter()
        .filter_map(|(k, a)| now.get(k).filter(|b| *b != a).map(|b| (k, (a, b))))
        .collect();
    assert!(
        moved.len() > 100,
        "the rebuild moves many nodes: {}",
        moved.len()
    );
    let (code, v) = verify_json(&p);
    assert_eq!(code, 1);
    assert_eq!(v["complete"], true);
    assert_eq!(v["signed_tree"], "snapshot");
    let listed = changes_of(&v, "moved");
    assert_eq!(listed.len(), moved.len());
    for c in &listed {
        let node = c["node"].as_str().unwrap().to_string();
        let (from, to) = moved[&node];
        assert_eq!(
            (c["from"].as_str().unwrap(), c["to"].as_str().unwrap()),
            (from.as_str(), to.as_str())
        );
        let causes = c["causes"].as_array().unwrap();
        assert_eq!(causes.len(), 1, "{c}");
        assert!(
            causes[0]
                .as_str()
                .unwrap()
                .starts_with("base tree replaced on "),
            "{c}"
        );
        assert!(
            causes[0]
                .as_str()
                .unwrap()
                .ends_with("(build, seed 7, similarity kl)"),
            "{c}"
        );
    }
    let renamed = changes_of(&v, "renamed");
    assert_eq!(renamed.len(), 1, "{renamed:?}");
    assert_eq!(renamed[0]["node"], "asparagus-crowns");
    assert_eq!(
        renamed[0]["causes"],
        serde_json::json!(["edit #5 (rename asparagus-crowns to \"asparagus\")"])
    );
    // the text report says the same
    let o = tw(&["verify", &p]);
    let t = text(&o);
    assert!(
        t.contains(&format!(
            ", {} changes):",
            v["changes"].as_array().unwrap().len()
        )),
        "{t}"
    );
    assert!(
        t.contains("[edit #5 (rename asparagus-crowns to \"asparagus\")]"),
        "{t}"
    );
    // diff --against-signoff gives the same list, for the latest and for sign-off #4
    for extra in [None, Some("4")] {
        let mut args = vec!["diff", p.as_str(), "--json", "--against-signoff"];
        args.extend(extra);
        let d: serde_json::Value = serde_json::from_str(&ok(&args)).unwrap();
        assert_eq!(d["changes"], v["changes"]);
    }
    let o = tw(&["diff", &p, "--against-signoff", "2"]);
    assert_ne!(o.status.code(), Some(0));
    assert!(text(&o).contains("no sign-off at edit #2"), "{}", text(&o));
}

#[test]
fn a_rebuilt_base_with_no_edit_is_reported_node_by_node() {
    let tmp = tempfile::tempdir().unwrap();
    let (p, signed) = sign_then_rebuild(tmp.path(), &[]);
    let now = applied_parents(&p, &tmp.path().join("now.json"));
    let moved = signed
        .iter()
        .filter(|(k, a)| now.get(*k) != Some(a))
        .count();
    let (code, v) = verify_json(&p);
    assert_eq!(code, 1);
    assert_eq!(v["edits_since"], serde_json::json!([]));
    let all = v["changes"].as_array().unwrap();
    assert_eq!(changes_of(&v, "moved").len(), moved);
    assert!(moved > 0);
    assert!(all.iter().all(|c| {
        c["causes"].as_array().unwrap().len() == 1
            && c["causes"][0]
                .as_str()
                .unwrap()
                .starts_with("base tree replaced")
    }));
}

#[test]
fn a_tampered_snapshot_is_refused() {
    let tmp = tempfile::tempdir().unwrap();
    let p = demo(tmp.path());
    ok(&["signoff", &p, "--reviewer", "rowan"]);
    ok(&["edit", &p, "exclude", "aloe", "--author", "ines"]);
    let dir = Path::new(&p).join("signoffs");
    let snap = std::fs::read_dir(&dir)
        .unwrap()
        .map(|e| e.unwrap().path())
        .find(|f| !f.to_string_lossy().ends_with(".base.json"))
        .unwrap();
    let text0 = std::fs::read_to_string(&snap).unwrap();
    // hide a change: the signed tree now "already" excluded nothing new, but a label moved
    std::fs::write(
        &snap,
        text0.replacen("\"label\":\"aloe\"", "\"label\":\"aloes\"", 1),
    )
    .unwrap();
    let o = tw(&["verify", &p]);
    assert_eq!(o.status.code(), Some(2), "{}", text(&o));
    let t = text(&o);
    assert!(t.contains(&snap.display().to_string()), "{t}");
    assert!(
        t.contains("it was edited after the sign-off and is refused"),
        "{t}"
    );
    assert!(!tw(&["diff", &p, "--against-signoff"]).status.success());
}

#[test]
fn a_project_signed_before_snapshots_is_handled_plainly() {
    let tmp = tempfile::tempdir().unwrap();
    let p = demo(tmp.path());
    ok(&[
        "edit",
        &p,
        "rename",
        "aloe",
        "aloe vera",
        "--author",
        "ines",
    ]);
    ok(&["signoff", &p, "--reviewer", "rowan"]);
    std::fs::remove_dir_all(Path::new(&p).join("signoffs")).unwrap();
    ok(&["edit", &p, "exclude", "autumn", "--author", "ines"]);
    // same base: the edits up to the sign-off rebuild the signed tree exactly
    let (code, v) = verify_json(&p);
    assert_eq!(code, 1);
    assert_eq!(v["signed_tree"], "replayed");
    assert_eq!(v["complete"], true);
    assert!(!changes_of(&v, "excluded").is_empty());
    // after a rebuild the signed tree is unknown: said plainly, and not called complete
    ok(&["build", &p, "--seed", "7", "--similarity", "kl"]);
    let (code, v) = verify_json(&p);
    assert_eq!(code, 1);
    assert_eq!(v["signed_tree"], "missing");
    assert_eq!(v["complete"], false);
    let edits_only = v["changes"].as_array().unwrap();
    assert!(
        edits_only
            .iter()
            .all(|c| c["causes"][0].as_str().unwrap().starts_with("edit #"))
    );
    let t = text(&tw(&["verify", &p]));
    assert!(
        t.contains("NOT COMPLETE: the snapshot of the signed tree is missing"),
        "{t}"
    );
    assert!(t.contains("tree changes known ("), "{t}");
}

#[test]
fn a_sign_off_writes_no_snapshot_while_another_writer_holds_the_lock() {
    use treewright::model::lock::ProjectLock;
    let tmp = tempfile::tempdir().unwrap();
    let p = demo(tmp.path());
    let held = ProjectLock::acquire_within(Path::new(&p), std::time::Duration::ZERO).unwrap();
    let o = Command::new(env!("CARGO_BIN_EXE_treewright"))
        .args(["signoff", &p, "--reviewer", "rowan"])
        .env("TREEWRIGHT_LOCK_WAIT", "0.2")
        .output()
        .unwrap();
    assert!(!o.status.success(), "{}", text(&o));
    assert!(!Path::new(&p).join("signoffs").exists());
    drop(held);
    ok(&["signoff", &p, "--reviewer", "rowan"]);
    let names: Vec<String> = std::fs::read_dir(Path::new(&p).join("signoffs"))
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    // only the two files, no temporary left behind by the atomic writes
    assert_eq!(names.len(), 2, "{names:?}");
    let (code, _) = verify_json(&p);
    assert_eq!(code, 0);
}
