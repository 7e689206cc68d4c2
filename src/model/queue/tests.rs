use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

use super::*;
use crate::model::workspace::{AuditMode, Workspace};
use crate::model::{PhraseTable, Tree};

fn small() -> (PhraseTable, EffectiveTree) {
    // root ─ a ─ a1, a2 ; root ─ b ; c unplaced
    let t = PhraseTable::from_ids(&["root", "a", "a1", "a2", "b", "c"]).unwrap();
    let mut parent = BTreeMap::new();
    for (c, p) in [("a", "root"), ("a1", "a"), ("a2", "a"), ("b", "root")] {
        parent.insert(c.to_string(), p.to_string());
    }
    let tree = Tree::from_id_map(&t, "root", &parent).unwrap();
    let eff = EffectiveTree::from_base(&tree, &t);
    (t, eff)
}

#[test]
fn reach_is_subtree_size_or_traffic_under_the_node() {
    // counted by hand
    let (_, mut eff) = small();
    assert_eq!(reach(&eff, None), vec![5.0, 3.0, 1.0, 1.0, 1.0, 1.0]);
    let w = [1.0, 10.0, 100.0, 1000.0, 5.0, 7.0];
    assert_eq!(
        reach(&eff, Some(&w)),
        vec![1116.0, 1110.0, 100.0, 1000.0, 5.0, 7.0]
    );
    // an alias's traffic counts for its target (c merged into b)
    eff.alias_of[5] = Some(4);
    eff.aliases[4] = vec![5];
    assert_eq!(reach(&eff, Some(&w))[4], 12.0);
    assert_eq!(reach(&eff, Some(&w))[0], 1123.0);
}

fn write(dir: &Path, name: &str, text: &str) -> PathBuf {
    let p = dir.join(name);
    std::fs::write(&p, text).unwrap();
    p
}

#[test]
fn weights_files_are_read_and_validated() {
    let (t, _) = small();
    let dir = tempfile::tempdir().unwrap();
    let j = write(dir.path(), "w.json", r#"{"a": 3, "b": 0.5}"#);
    let w = load_weights(&j, &t).unwrap();
    assert_eq!(w, vec![0.0, 3.0, 0.0, 0.0, 0.5, 0.0]);
    let c = write(dir.path(), "w.csv", "id,weight\na1,4\nc, 2.5\n");
    let w = load_weights(&c, &t).unwrap();
    assert_eq!(w, vec![0.0, 0.0, 4.0, 0.0, 0.0, 2.5]);
    let cases = [
        ("u.json", r#"{"zzz": 1}"#, "\"zzz\" is not a phrase"),
        ("n.json", r#"{"a": -1}"#, "the weight of \"a\""),
        ("s.json", r#"{"a": "many"}"#, "the weight of \"a\""),
        ("l.json", r#"[1, 2]"#, "expected an object"),
        (
            "h.csv",
            "phrase,count\na,1\n",
            "header must be \"id,weight\"",
        ),
        ("x.csv", "id,weight\na,NaN\n", "the weight of \"a\""),
        ("r.csv", "id,weight\na,1,2\n", "row 2"),
        ("w.txt", "a 1", "must be a .json or .csv"),
    ];
    for (name, text, want) in cases {
        let p = write(dir.path(), name, text);
        let e = load_weights(&p, &t).unwrap_err().to_string();
        assert!(e.contains(name), "{e} names the file");
        assert!(e.contains(want), "{name}: {e}");
    }
    let e = load_weights(&dir.path().join("missing.json"), &t)
        .unwrap_err()
        .to_string();
    assert!(e.contains("missing.json"), "{e}");
}

fn demo() -> Workspace {
    let dir = tempfile::tempdir().unwrap();
    crate::model::sample::write_demo(dir.path()).unwrap();
    let ws = Workspace::open_with(dir.path(), AuditMode::Inline).unwrap();
    // the workspace holds everything it needs in memory; nothing is written in these tests
    std::mem::forget(dir);
    ws
}

fn queue_of(ws: &Workspace) -> ReviewQueue {
    ReviewQueue::build(
        ws.report().unwrap(),
        ws.effective().unwrap(),
        &ws.project.phrases,
        None,
    )
}

fn refresh(q: &mut ReviewQueue, ws: &Workspace) {
    q.update(
        ws.report().unwrap(),
        ws.effective().unwrap(),
        &ws.project.phrases,
        None,
    );
}

#[test]
fn the_demo_queue_is_ordered_by_confidence_times_reach() {
    let ws = demo();
    let q = queue_of(&ws);
    let report = ws.report().unwrap();
    let eff = ws.effective().unwrap();
    assert!(q.items.len() >= 5, "{}", q.items.len());
    let sizes = eff.tree.subtree_sizes();
    for w in q.items.windows(2) {
        assert!(w[0].risk >= w[1].risk);
    }
    for x in &q.items {
        // risk recomputed from the report: the node's highest confidence × its subtree size
        let conf = report
            .findings
            .iter()
            .filter(|f| f.node == x.node && f.rule != "unreviewed" && f.rule != "stale-edit")
            .map(|f| f.confidence)
            .fold(0.0, f64::max);
        let size = if eff.tree.is_placed(x.node) {
            sizes[x.node as usize] as f64
        } else {
            1.0
        };
        assert!((x.risk - conf * size).abs() < 1e-9, "{}", x.id);
        assert_eq!(x.state, ItemState::Open);
        assert!(!x.why.is_empty() && !x.suggested.is_empty());
    }
    // every node with an open per-node finding is queued exactly once
    let mut nodes: Vec<PhraseId> = report
        .findings
        .iter()
        .filter(|f| f.rule != "unreviewed" && f.rule != "stale-edit")
        .map(|f| f.node)
        .collect();
    nodes.sort_unstable();
    nodes.dedup();
    assert_eq!(nodes.len(), q.items.len());
    assert_eq!(q.progress().reviewed, 0);
}

#[test]
fn decisions_move_the_progress_and_the_update_keeps_the_order() {
    let mut ws = demo();
    let mut q = queue_of(&ws);
    let order: Vec<PhraseId> = q.items.iter().map(|x| x.node).collect();
    // approve the first, mark the second to fix, skip the third
    let id = |ws: &Workspace, p: PhraseId| ws.project.phrases.id(p).to_string();
    let approve = Edit::Review {
        node: id(&ws, order[0]),
        status: ReviewStatus::Approved,
        comment: String::new(),
    };
    ws.edit(approve, "ines", None).unwrap();
    refresh(&mut q, &ws);
    assert_eq!(q.items[0].state, ItemState::Approved);
    let p1 = q.progress();
    assert_eq!((p1.reviewed, p1.queued), (1, order.len()));
    let share = q.items[0].reach / q.items.iter().map(|x| x.reach).sum::<f64>();
    assert!((p1.weighted_share - share).abs() < 1e-12);
    let to_fix = Edit::Review {
        node: id(&ws, order[1]),
        status: ReviewStatus::ToFix,
        comment: "wrong aisle".into(),
    };
    ws.edit(to_fix, "ines", None).unwrap();
    refresh(&mut q, &ws);
    assert_eq!(q.items[1].state, ItemState::ToFix);
    q.skip(2);
    assert_eq!(q.items[2].state, ItemState::Skipped);
    assert_eq!(q.next_open(Some(1)), Some(3));
    assert_eq!(q.previous_open(Some(3)), Some(2));
    // apply the first ready reparent suggestion among the open rows
    let (i, edit) = q
        .items
        .iter()
        .enumerate()
        .find_map(|(i, x)| match (&x.edit, x.state) {
            (Some(e @ Edit::Reparent { .. }), ItemState::Open) => Some((i, e.clone())),
            _ => None,
        })
        .expect("the demo has a reparent suggestion");
    ws.edit(edit, "ines", None).unwrap();
    refresh(&mut q, &ws);
    assert_ne!(q.items[i].state, ItemState::Open, "{:?}", q.items[i]);
    let kept: Vec<PhraseId> = q.items.iter().take(order.len()).map(|x| x.node).collect();
    assert_eq!(kept, order, "rows keep their places");
    assert!(q.progress().reviewed >= 3);
    assert_eq!(
        q.items[2].state,
        ItemState::Skipped,
        "a skip survives updates"
    );
    // a fresh build agrees on every state but the session's skip
    let fresh = queue_of(&ws);
    for x in &fresh.items {
        let k = q.position(x.node).expect("queued");
        let mine = q.items[k].state;
        let mine = if mine == ItemState::Skipped {
            ItemState::Open
        } else {
            mine
        };
        assert_eq!(mine, x.state, "{}", x.id);
    }
}
