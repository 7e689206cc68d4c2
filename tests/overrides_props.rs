//! Property tests of the override layer over random trees and random edit sequences: the
//! invariants of issue 4 (one root, acyclic, every phrase exactly once as node / alias /
//! excluded / unplaced, apply deterministic and every edit idempotent, undo restores the previous effective tree) and
//! agreement between `check_edit` (what the GUI and CLI refuse) and `apply`.

use proptest::prelude::*;
use treewright::model::edit::{Edit, EditRecord, ReviewStatus};
use treewright::model::effective::EffectiveTree;
use treewright::model::overrides::{OverrideLayer, apply, check_edit};
use treewright::model::phrase::PhraseRecord;
use treewright::model::{PhraseId, PhraseTable, Tree};

/// A random base tree: `n` phrases, phrase 0 the root, phrase i > 0 either unplaced or
/// under a placed phrase of smaller index.
fn arb_tree() -> impl Strategy<Value = (PhraseTable, Tree)> {
    (2usize..24)
        .prop_flat_map(|n| {
            (
                Just(n),
                prop::collection::vec((any::<u32>(), 0u8..8), n - 1),
            )
        })
        .prop_map(|(n, picks)| {
            let recs: Vec<PhraseRecord> = (0..n)
                .map(|i| PhraseRecord {
                    id: Some(format!("p{i}")),
                    label: format!("tag {}", i % 7),
                })
                .collect();
            let t = PhraseTable::from_records(&recs).unwrap();
            let mut placed = vec![0 as PhraseId];
            let mut edges = Vec::new();
            for (i, (r, u)) in picks.into_iter().enumerate() {
                let c = (i + 1) as PhraseId;
                if u == 0 {
                    continue; // unplaced
                }
                let p = placed[r as usize % placed.len()];
                edges.push((c, p));
                placed.push(c);
            }
            let tree = Tree::from_edges(&t, 0, &edges).unwrap();
            (t, tree)
        })
}

/// A random edit naming phrases by index; indices past the table are vanished phrases.
fn arb_edit() -> impl Strategy<Value = (u8, usize, usize, usize, u8)> {
    (0u8..9, 0usize..28, 0usize..28, 0usize..28, 0u8..3)
}

fn make_edit(n: usize, (kind, a, b, c, s): (u8, usize, usize, usize, u8)) -> Edit {
    // mostly existing phrases, sometimes a vanished one
    let id = |i: usize| {
        if i < 25 {
            format!("p{}", i % n)
        } else {
            format!("gone{i}")
        }
    };
    match kind {
        0 | 1 => Edit::Reparent {
            node: id(a),
            parent: id(b),
        },
        2 => Edit::Pin {
            node: id(a),
            parent: id(b),
        },
        3 => Edit::Unpin { node: id(a) },
        4 => Edit::Merge {
            sources: if s == 0 {
                vec![id(a), id(c)]
            } else {
                vec![id(a)]
            },
            into: id(b),
        },
        5 => Edit::Rename {
            node: id(a),
            label: format!("renamed {}", b % 3),
            language: None,
        },
        6 => Edit::Exclude { node: id(a) },
        7 => Edit::Include { node: id(a) },
        _ => Edit::Review {
            node: id(a),
            status: [
                ReviewStatus::Approved,
                ReviewStatus::ToFix,
                ReviewStatus::Unreviewed,
            ][s as usize],
            comment: String::new(),
        },
    }
}

fn rec(edit: Edit) -> EditRecord {
    EditRecord {
        edit,
        author: "prop".into(),
        time: "2026-12-02T00:00:00Z".into(),
        note: None,
    }
}

fn arb_case() -> impl Strategy<Value = (PhraseTable, Tree, Vec<EditRecord>)> {
    (arb_tree(), prop::collection::vec(arb_edit(), 1..40)).prop_map(|((t, tree), raw)| {
        let n = t.len();
        let edits = raw.into_iter().map(|e| rec(make_edit(n, e))).collect();
        (t, tree, edits)
    })
}

/// The structural invariants every effective tree must meet.
fn check_invariants(base: &Tree, eff: &EffectiveTree) -> Result<(), TestCaseError> {
    let n = eff.labels.len();
    let t = &eff.tree;
    prop_assert_eq!(t.root(), base.root(), "the root never changes");
    prop_assert!(t.is_placed(t.root()));
    prop_assert!(t.parent(t.root()).is_none());
    // acyclic and one root: every node's parent chain reaches the root in < n steps, and a
    // pre-order walk from the root visits every node exactly once
    for p in 0..n as PhraseId {
        if !t.is_placed(p) {
            prop_assert!(t.parent(p).is_none() && t.children(p).is_empty());
            continue;
        }
        let mut cur = p;
        let mut steps = 0;
        while let Some(x) = t.parent(cur) {
            prop_assert!(t.is_placed(x));
            prop_assert!(t.children(x).contains(&cur));
            cur = x;
            steps += 1;
            prop_assert!(steps < n, "cycle through {}", p);
        }
        prop_assert_eq!(cur, t.root());
    }
    let pre = t.preorder();
    prop_assert_eq!(pre.len(), t.node_count());
    let mut seen = vec![false; n];
    for &x in &pre {
        prop_assert!(!seen[x as usize]);
        seen[x as usize] = true;
    }
    // every phrase exactly once: node, alias, excluded or unplaced
    let unplaced = eff.unplaced();
    for p in 0..n as PhraseId {
        let i = p as usize;
        let roles = [
            t.is_placed(p),
            eff.alias_of[i].is_some(),
            eff.excluded[i],
            unplaced.contains(&p),
        ];
        prop_assert_eq!(
            roles.iter().filter(|&&b| b).count(),
            1,
            "phrase {} roles {:?}",
            p,
            roles
        );
        if let Some(target) = eff.alias_of[i] {
            // aliases point straight at a node or an excluded phrase, listed there once
            prop_assert!(eff.alias_of[target as usize].is_none());
            prop_assert!(t.is_placed(target) || eff.excluded[target as usize]);
            prop_assert_eq!(
                eff.aliases[target as usize]
                    .iter()
                    .filter(|&&a| a == p)
                    .count(),
                1
            );
        }
        for &a in &eff.aliases[i] {
            prop_assert_eq!(eff.alias_of[a as usize], Some(p));
        }
        if eff.pinned[i] {
            prop_assert!(t.is_placed(p));
        }
    }
    Ok(())
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 3000, ..ProptestConfig::default() })]

    #[test]
    fn effective_tree_invariants((t, base, edits) in arb_case()) {
        let (eff, problems) = apply(&base, &t, &edits);
        check_invariants(&base, &eff)?;
        for p in &problems {
            prop_assert!(p.index < edits.len());
            prop_assert_eq!(p.op.as_str(), edits[p.index].edit.op());
        }
        // every prefix is a valid effective tree too
        for k in 0..edits.len() {
            check_invariants(&base, &apply(&base, &t, &edits[..k]).0)?;
        }
    }

    #[test]
    fn apply_is_deterministic_and_each_edit_idempotent((t, base, edits) in arb_case()) {
        let (a, pa) = apply(&base, &t, &edits);
        let (b, pb) = apply(&base, &t, &edits);
        prop_assert_eq!(&a, &b);
        prop_assert_eq!(&pa, &pb);
        // applying every edit twice in a row gives the same effective tree
        let doubled: Vec<EditRecord> = edits.iter().flat_map(|e| [e.clone(), e.clone()]).collect();
        let (d, _) = apply(&base, &t, &doubled);
        prop_assert_eq!(&a, &d);
        // a refused edit changes nothing, so the accepted edits alone give the same tree
        let accepted: Vec<EditRecord> = edits
            .iter()
            .enumerate()
            .filter(|(i, _)| !pa.iter().any(|p| p.index == *i))
            .map(|(_, e)| e.clone())
            .collect();
        let (c, pc) = apply(&base, &t, &accepted);
        prop_assert_eq!(&a, &c);
        prop_assert!(pc.is_empty(), "{:?}", pc);
        // Re-applying the whole list to its own result is NOT asserted: it does not hold for
        // any layer that refuses edits. Shrunk counterexample: p4 unplaced; [reparent p4
        // under p3, reparent p4 under p5, exclude p5] leaves p4 under the root, but a second
        // pass puts it under p3 and then refuses the move under the now excluded p5.
    }

    #[test]
    fn undo_restores_previous_tree_and_check_edit_agrees((t, base, edits) in arb_case()) {
        let (last, before) = edits.split_last().unwrap();
        let (prev, _) = apply(&base, &t, before);
        let mut layer = OverrideLayer::new();
        for e in before {
            layer.push(e.clone());
        }
        // check_edit predicts exactly whether apply accepts the edit
        let verdict = check_edit(&prev, &t, &last.edit);
        let (after, problems) = apply(&base, &t, &edits);
        let refused = problems.iter().any(|p| p.index == before.len());
        prop_assert_eq!(verdict.is_err(), refused, "{:?} {:?}", last.edit, verdict);
        if refused {
            prop_assert_eq!(&after, &prev, "a refused edit changes nothing");
        }
        layer.push(last.clone());
        prop_assert_eq!(&apply(&base, &t, &layer.edits).0, &after);
        let undone = layer.undo();
        prop_assert_eq!(undone.as_ref(), Some(last));
        prop_assert_eq!(&apply(&base, &t, &layer.edits).0, &prev);
        prop_assert!(layer.can_redo());
        layer.redo();
        prop_assert_eq!(&apply(&base, &t, &layer.edits).0, &after);
    }
}
