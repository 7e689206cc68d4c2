//! The workbench applies edits while the first audit runs in the background and never shows
//! a stale report as current (issue 17, part 5), driven headless with egui_kittest.
//!
//! While the audit runs the findings panel says so and no report is offered; once it is
//! done, the report is the audit of the tree *with* the edits made meanwhile: it equals a
//! fresh audit, from scratch and in place, of the same project with the same edits. The
//! broken twin, a workbench that shows the background auditor's result as it arrives
//! (the audit of the tree before the edits), is the audit of the unedited tree; the test
//! checks that this differs from the fresh audit, so showing it would fail the comparison.

use std::time::{Duration, Instant};

use egui_kittest::Harness;
use egui_kittest::kittest::Queryable;
use treewright::gui::{Action, App, Doc, Settings};
use treewright::model::audit::AuditReport;
use treewright::model::edit::Edit;
use treewright::model::sample::{SyntheticSpec, write_synthetic};
use treewright::model::{AuditMode, Workspace};

/// Findings as comparable tuples: rule, node, other node, severity, score (to 1e-9).
fn key(r: &AuditReport) -> Vec<(String, u32, Option<u32>, String, i64)> {
    let mut v: Vec<_> = r
        .findings
        .iter()
        .map(|f| {
            (
                f.rule.to_string(),
                f.node,
                f.other,
                format!("{:?}", f.severity),
                (f.score * 1e9).round() as i64,
            )
        })
        .collect();
    v.sort();
    v
}

#[test]
fn edits_during_the_background_audit_never_show_a_stale_report() {
    let t = tempfile::tempdir().unwrap();
    let dir = t.path().join("big");
    let spec = SyntheticSpec {
        phrases: 6_000,
        dim: 16,
        ..SyntheticSpec::default()
    };
    write_synthetic(&dir, &spec).unwrap();

    let doc = Doc::open(&dir).unwrap();
    assert_eq!(doc.audit_mode(), AuditMode::Background);
    assert!(doc.is_auditing(), "the first audit runs in the background");
    // edits picked from the tree as loaded: three leaves excluded, one leaf moved under the
    // root, one renamed
    let (edits, root) = {
        let eff = doc.eff.as_ref().unwrap();
        let tree = &eff.tree;
        let depth = tree.depths();
        let leaves: Vec<u32> = tree
            .preorder()
            .into_iter()
            .filter(|&x| tree.children(x).is_empty() && depth[x as usize] >= 2)
            .collect();
        let id = |x: u32| doc.project.phrases.id(x).to_string();
        let root = id(tree.root());
        (
            vec![
                Edit::Exclude {
                    node: id(leaves[0]),
                },
                Edit::Exclude {
                    node: id(leaves[7]),
                },
                Edit::Exclude {
                    node: id(leaves[40]),
                },
                Edit::Reparent {
                    node: id(leaves[100]),
                    parent: root.clone(),
                },
                Edit::Rename {
                    node: id(leaves[200]),
                    label: "renamed while auditing".into(),
                    language: None,
                },
            ],
            root,
        )
    };
    assert!(!root.is_empty());

    let app = App::new(
        doc,
        Settings {
            author: "tester".into(),
            ..Settings::default()
        },
    );
    let mut h = Harness::builder()
        .with_size([1280.0, 800.0])
        .with_max_steps(4)
        .build_ui_state(|ui, app: &mut App| app.ui(ui), app);
    let mut edited_while_auditing = 0;
    for e in &edits {
        let auditing = h.state().doc.is_auditing();
        h.state_mut().apply(Action::Edit(e.clone()));
        h.step();
        if auditing {
            edited_while_auditing += 1;
        }
        if h.state().doc.is_auditing() {
            // no report is offered as current, and the panel says why
            assert!(h.state().doc.report().is_none());
            assert!(
                h.query_by_label_contains("Auditing 6000 phrases in the background")
                    .is_some()
            );
        }
    }
    assert!(
        edited_while_auditing >= 1,
        "the audit finished before the first edit; the test saw nothing"
    );
    let start = Instant::now();
    while h.state().doc.is_auditing() {
        assert!(
            start.elapsed() < Duration::from_secs(300),
            "audit never ended"
        );
        assert!(h.state().doc.report().is_none());
        std::thread::sleep(Duration::from_millis(20));
        h.step();
    }
    h.step();
    assert!(h.query_by_label_contains("Auditing").is_none());
    let shown = key(h
        .state()
        .doc
        .report()
        .expect("a report once the audit is done"));
    assert_eq!(h.state().doc.layer.edits.len(), edits.len());

    // a fresh audit, in place, of the same project with the same edits
    let mut fresh = Workspace::open_with(&dir, AuditMode::Inline).unwrap();
    for e in &edits {
        fresh.edit(e.clone(), "tester", None).unwrap();
    }
    let want = key(fresh.report().unwrap());
    assert_eq!(
        shown, want,
        "the shown report is the audit of the edited tree"
    );

    // the twin's report (the audit of the tree before the edits) is not that
    let stale = Workspace::open_with(&dir, AuditMode::Inline).unwrap();
    assert_ne!(
        key(stale.report().unwrap()),
        want,
        "the edits change the audit, so a stale report would be caught"
    );
}
