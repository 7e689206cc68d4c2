//! The incremental re-audit: `Auditor::update` after edits must equal a full recompute
//! (split from `tests.rs`, which holds the shared fixtures).

use super::search::{Order, Searcher, needs_search};
use super::tests::*;
use super::*;
use crate::model::edit::{Edit, ReviewStatus};

#[test]
fn update_equals_a_full_recompute() {
    let nest = Nested::new(5, 4, 12, 51);
    let g = nest.gaussians();
    let (wrong, _) = misplace(&nest.parent, 0.05, 1);
    let eff0 = nest.eff(&wrong);
    let cfg = AuditConfig {
        exhaustive_limit: 0,
        ..AuditConfig::default()
    };
    let mut auditor = Auditor::new(&g, &nest.phrases, &eff0, &[], cfg.clone());
    // apply the top suggestion by hand and then a second move
    let f = auditor
        .report()
        .findings
        .iter()
        .find(|f| f.rule == BETTER_PARENT)
        .unwrap()
        .clone();
    let mut p1 = wrong.clone();
    p1[f.node as usize] = f.other.unwrap();
    let eff1 = nest.eff(&p1);
    let r1 = auditor.update(&g, &nest.phrases, &eff1, &[]).clone();
    assert!(
        !r1.findings
            .iter()
            .any(|x| x.rule == BETTER_PARENT && x.node == f.node)
    );
    let mut p2 = p1.clone();
    p2[7] = 0;
    let mut eff2 = nest.eff(&p2);
    eff2.review[3] = ReviewStatus::Approved;
    eff2.pinned[5] = true;
    // renames reach the explanations of other nodes' findings
    for f in r1.findings.iter().filter(|f| f.other.is_some()).take(3) {
        eff2.labels[f.other.unwrap() as usize] = format!("renamed {}", f.node);
    }
    eff2.labels[1] = "renamed one".into();
    let r2 = auditor.update(&g, &nest.phrases, &eff2, &[]).clone();
    // a fresh auditor on the first tree, fully recomputed on the same index
    let fresh = Auditor::new(&g, &nest.phrases, &eff0, &[], cfg);
    let order = Order::of(&eff2);
    let s = Searcher {
        g: &g,
        engine: &fresh.engine,
        eff: &eff2,
        order: &order,
        index: &fresh.index,
        cfg: &fresh.cfg,
        exhaustive: false,
    };
    let placement: Vec<Placement> = (0..g.len() as PhraseId)
        .map(|p| {
            if needs_search(&eff2, p) {
                s.place(p)
            } else {
                Placement::default()
            }
        })
        .collect();
    let stats = fresh.engine.compute(&g, &eff2);
    let want = assemble(
        &g,
        &nest.phrases,
        &eff2,
        &[],
        &fresh.cfg,
        stats.clone(),
        &placement,
    );
    // the update keeps the candidate searches of nodes no edit touched (module
    // documentation), and the confidences read every node's search: given the auditor's own
    // searches the update equals a full assemble exactly
    let same_search = assemble(
        &g,
        &nest.phrases,
        &eff2,
        &[],
        &fresh.cfg,
        stats,
        &auditor.placement,
    );
    assert_eq!(r2, same_search);
    // against fresh searches everywhere, the findings agree except for the confidences
    // and their p-values (and the severities that follow them)
    let strip = |r: &AuditReport| -> Vec<Finding> {
        let mut v: Vec<Finding> = r
            .findings
            .iter()
            .map(|f| Finding {
                confidence: 0.0,
                evidence: 0.0,
                severity: Severity::Info,
                ..f.clone()
            })
            .collect();
        v.sort_by(|a, b| {
            (a.rule, a.node, a.other, &a.explanation).cmp(&(
                b.rule,
                b.node,
                b.other,
                &b.explanation,
            ))
        });
        v
    };
    assert_eq!(strip(&r2), strip(&want));
    assert_eq!(r2.stats, want.stats);
}

#[test]
fn update_after_a_merge_and_an_exclusion_equals_a_full_recompute() {
    use crate::model::edit::EditRecord;
    use crate::model::overrides::apply;
    let nest = Nested::new(4, 3, 8, 71);
    let g = nest.gaussians();
    let base = nest.eff(&nest.parent).tree;
    let cfg = AuditConfig {
        exhaustive_limit: 0,
        ..AuditConfig::default()
    };
    let rec = |edit: Edit| EditRecord {
        edit,
        author: "test".into(),
        time: "2026-12-02T07:00:00Z".into(),
        note: None,
    };
    let (eff0, _) = apply(&base, &nest.phrases, &[]);
    let mut auditor = Auditor::new(&g, &nest.phrases, &eff0, &[], cfg.clone());
    let edits = vec![
        rec(Edit::Merge {
            sources: vec!["n2".into()],
            into: "n1".into(),
        }),
        rec(Edit::Exclude { node: "n3".into() }),
        rec(Edit::Reparent {
            node: "n30".into(),
            parent: "n4".into(),
        }),
    ];
    let (eff1, problems) = apply(&base, &nest.phrases, &edits);
    assert!(problems.is_empty(), "{problems:?}");
    let got = auditor.update(&g, &nest.phrases, &eff1, &problems).clone();
    assert!(!eff1.tree.is_placed(2) && !eff1.tree.is_placed(3));
    assert!(got.findings.iter().all(|f| f.node != 2 && f.node != 3));
    let order = Order::of(&eff1);
    let s = Searcher {
        g: &g,
        engine: &auditor.engine,
        eff: &eff1,
        order: &order,
        index: &auditor.index,
        cfg: &auditor.cfg,
        exhaustive: false,
    };
    let placement: Vec<Placement> = (0..g.len() as PhraseId)
        .map(|p| {
            if needs_search(&eff1, p) {
                s.place(p)
            } else {
                Placement::default()
            }
        })
        .collect();
    let stats = auditor.engine.compute(&g, &eff1);
    let want = assemble(
        &g,
        &nest.phrases,
        &eff1,
        &problems,
        &auditor.cfg,
        stats,
        &placement,
    );
    assert_eq!(got, want);
}
