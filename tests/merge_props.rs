//! Property tests of the three-way merge of override layers (issue 18) over random trees and
//! random edit sequences that share a common base: a clean merge equals applying both
//! sides' edits (in either order), merging is symmetric up to the reported order, merging a
//! layer with itself changes nothing, and every merged effective tree keeps the invariants
//! (one root, no cycle, every phrase exactly once). Common practice, no source.

use std::collections::BTreeSet;

use proptest::prelude::*;
use treewright::model::edit::{Edit, EditRecord, ReviewStatus};
use treewright::model::effective::EffectiveTree;
use treewright::model::merge::{Side, merge, state_fingerprint};
use treewright::model::overrides::apply;
use treewright::model::phrase::PhraseRecord;
use treewright::model::{PhraseId, PhraseTable, Tree};

fn arb_tree() -> impl Strategy<Value = (PhraseTable, Tree)> {
    (3usize..16)
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
                    label: format!("tag {i}"),
                })
                .collect();
            let t = PhraseTable::from_records(&recs).unwrap();
            let mut placed = vec![0 as PhraseId];
            let mut edges = Vec::new();
            for (i, (r, u)) in picks.into_iter().enumerate() {
                let c = (i + 1) as PhraseId;
                if u == 0 {
                    continue;
                }
                let p = placed[r as usize % placed.len()];
                edges.push((c, p));
                placed.push(c);
            }
            (t.clone(), Tree::from_edges(&t, 0, &edges).unwrap())
        })
}

type Raw = (u8, usize, usize, u8);

fn arb_edits(max: usize) -> impl Strategy<Value = Vec<Raw>> {
    prop::collection::vec((0u8..8, 0usize..16, 0usize..16, 0u8..3), 0..max)
}

fn make(n: usize, (kind, a, b, s): Raw, who: &str, k: usize) -> EditRecord {
    let id = |i: usize| format!("p{}", i % n);
    let edit = match kind {
        0 | 1 => Edit::Reparent {
            node: id(a),
            parent: id(b),
        },
        2 => Edit::Pin {
            node: id(a),
            parent: id(b),
        },
        3 => Edit::Merge {
            sources: vec![id(a)],
            into: id(b),
        },
        4 => Edit::Rename {
            node: id(a),
            label: format!("{who} {}", s),
            language: None,
        },
        5 => Edit::Exclude { node: id(a) },
        6 => Edit::Include { node: id(a) },
        _ => Edit::Review {
            node: id(a),
            status: [
                ReviewStatus::Approved,
                ReviewStatus::ToFix,
                ReviewStatus::Unreviewed,
            ][s as usize],
            comment: String::new(),
        },
    };
    EditRecord {
        edit,
        author: who.into(),
        time: format!("2026-12-04T10:{:02}:{:02}Z", k / 60, k % 60),
        note: None,
    }
}

/// (phrases, base tree, base edits, ours, theirs); each side may undo the last base edit.
type Case = (
    PhraseTable,
    Tree,
    Vec<EditRecord>,
    Vec<EditRecord>,
    Vec<EditRecord>,
);

fn arb_case() -> impl Strategy<Value = Case> {
    (
        arb_tree(),
        arb_edits(6),
        arb_edits(6),
        arb_edits(6),
        any::<bool>(),
        any::<bool>(),
    )
        .prop_map(|((t, tree), b, o, th, undo_o, undo_t)| {
            let n = t.len();
            let base: Vec<EditRecord> = b
                .into_iter()
                .enumerate()
                .map(|(k, e)| make(n, e, "base", k))
                .collect();
            let side = |raw: Vec<Raw>, who: &str, undo: bool| {
                let mut v = base.clone();
                if undo {
                    v.pop();
                }
                v.extend(
                    raw.into_iter()
                        .enumerate()
                        .map(|(k, e)| make(n, e, who, 100 + k)),
                );
                v
            };
            let ours = side(o, "ana", undo_o);
            let theirs = side(th, "ben", undo_t);
            (t, tree, base, ours, theirs)
        })
}

fn check_invariants(base: &Tree, eff: &EffectiveTree) -> Result<(), TestCaseError> {
    let n = eff.labels.len();
    let t = &eff.tree;
    prop_assert_eq!(t.root(), base.root());
    prop_assert!(t.parent(t.root()).is_none());
    for p in 0..n as PhraseId {
        if !t.is_placed(p) {
            continue;
        }
        let (mut cur, mut steps) = (p, 0);
        while let Some(x) = t.parent(cur) {
            cur = x;
            steps += 1;
            prop_assert!(steps < n, "cycle through {}", p);
        }
        prop_assert_eq!(cur, t.root());
    }
    let unplaced = eff.unplaced();
    for p in 0..n as PhraseId {
        let i = p as usize;
        let roles = [
            t.is_placed(p),
            eff.alias_of[i].is_some(),
            eff.excluded[i],
            unplaced.contains(&p),
        ];
        prop_assert_eq!(roles.iter().filter(|&&b| b).count(), 1);
    }
    Ok(())
}

fn keys(v: &[EditRecord]) -> BTreeSet<String> {
    v.iter()
        .map(|r| serde_json::to_string(r).unwrap())
        .collect()
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 1500, ..ProptestConfig::default() })]

    #[test]
    fn merge_properties((t, tree, base, ours, theirs) in arb_case()) {
        let m = merge(&tree, &t, &base, &ours, &theirs);
        let s = merge(&tree, &t, &base, &theirs, &ours);
        // symmetric up to the reported order: the same edits conflict, sides swapped
        prop_assert_eq!(m.conflicts.len(), s.conflicts.len());
        let side_keys = |m: &treewright::model::merge::MergeOutcome, side: Side| {
            keys(&m.conflicts.iter().flat_map(|c| c.side(side).to_vec()).collect::<Vec<_>>())
        };
        prop_assert_eq!(side_keys(&m, Side::Ours), side_keys(&s, Side::Theirs));
        prop_assert_eq!(side_keys(&m, Side::Theirs), side_keys(&s, Side::Ours));
        prop_assert_eq!(keys(&m.edits), keys(&s.edits));
        if m.is_clean() {
            // a clean merge equals applying both sides' edits, in either order
            let mut both = base.iter().filter(|r| !m.dropped.contains(r)).cloned().collect::<Vec<_>>();
            both.extend(m.added_ours.iter().cloned());
            both.extend(m.added_theirs.iter().cloned());
            prop_assert_eq!(&m.edits, &both);
            let fm = state_fingerprint(&apply(&tree, &t, &m.edits).0, &t);
            let fs = state_fingerprint(&apply(&tree, &t, &s.edits).0, &t);
            prop_assert_eq!(fm, fs);
        }
        // every merged effective tree keeps the invariants, whichever side is taken
        check_invariants(&tree, &apply(&tree, &t, &m.edits).0)?;
        for side in [Side::Ours, Side::Theirs] {
            check_invariants(&tree, &apply(&tree, &t, &m.take_all(side)).0)?;
        }
        // merging a layer with itself changes nothing
        let same = merge(&tree, &t, &base, &ours, &ours);
        prop_assert!(same.is_clean());
        prop_assert_eq!(&same.edits, &ours);
    }
}
