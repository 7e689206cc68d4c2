use std::collections::BTreeSet;

use super::*;
use crate::model::audit::audit;
use crate::model::edit::ReviewStatus;
use crate::model::workspace::AuditMode;

fn demo() -> (tempfile::TempDir, Workspace) {
    let dir = tempfile::tempdir().unwrap();
    crate::model::sample::write_demo(dir.path()).unwrap();
    let ws = Workspace::open_with(dir.path(), AuditMode::Inline).unwrap();
    (dir, ws)
}

fn open_set(r: &AuditReport, ws: &Workspace) -> BTreeSet<(String, String, Option<String>)> {
    let id = |p: PhraseId| ws.project.phrases.id(p).to_string();
    r.findings
        .iter()
        .filter(|f| !f.accepted)
        .map(|f| (f.rule.to_string(), id(f.node), f.other.map(id)))
        .collect()
}

fn as_set(v: &[FindingChange]) -> BTreeSet<(String, String, Option<String>)> {
    v.iter()
        .map(|f| (f.rule.to_string(), f.node.clone(), f.other.clone()))
        .collect()
}

fn first_reparent(ws: &Workspace) -> Edit {
    ws.report()
        .unwrap()
        .findings
        .iter()
        .filter(|f| !f.accepted)
        .find_map(|f| match f.suggestion.as_ref()?.edit.as_ref()? {
            e @ Edit::Reparent { .. } => Some(e.clone()),
            _ => None,
        })
        .expect("the demo has a reparent suggestion")
}

#[test]
fn the_preview_equals_applying_the_edit_and_re_auditing() {
    let (_dir, mut ws) = demo();
    let edit = first_reparent(&ws);
    let before = ws.report().unwrap().clone();
    let edits_before = ws.layer.edits.len();
    let impact = ws.preview(&edit).unwrap();
    // the preview changes nothing
    assert_eq!(ws.report().unwrap(), &before);
    assert_eq!(ws.layer.edits.len(), edits_before);
    assert!(!impact.resolved.is_empty(), "{impact:?}");
    let b = open_set(&before, &ws);
    ws.edit(edit.clone(), "ines", None).unwrap();
    // the workbench's own re-audit after the edit
    let a = open_set(ws.report().unwrap(), &ws);
    let want_resolved: BTreeSet<_> = b.difference(&a).cloned().collect();
    let want_created: BTreeSet<_> = a.difference(&b).cloned().collect();
    assert_eq!(as_set(&impact.resolved), want_resolved);
    assert_eq!(as_set(&impact.created), want_created);
    assert_eq!((impact.open_before, impact.open_after), (b.len(), a.len()));
    // and a full audit from scratch of the edited tree agrees (the demo is searched
    // exhaustively, so nothing depends on the cached searches)
    let p = &ws.project;
    let full = audit(
        &p.gaussians,
        &p.phrases,
        ws.effective().unwrap(),
        &ws.problems,
        &ws.audit_config().unwrap(),
    );
    assert_eq!(open_set(&full, &ws), a);
    // the moved phrase's top broader offer after the edit is the one the bulk check ranks
    // first on the edited tree
    let Edit::Reparent { node, parent } = &edit else {
        unreachable!()
    };
    let row = ws.project.phrases.find(node).unwrap();
    let params = SuggestParams::default();
    let ctx = SuggestCtx::new(&p.gaussians, &p.phrases, ws.effective().unwrap(), &params);
    let top = suggest::top_broader(&ctx, row).map(|c| c.id);
    assert!(impact.moved >= 1);
    match impact.offers.iter().find(|o| &o.id == node) {
        Some(o) => assert_eq!(o.after, top),
        None => assert_ne!(top.as_deref(), Some(parent.as_str()), "an unchanged offer"),
    }
    assert!(!impact.signoff_outdated, "never signed off");
}

#[test]
fn an_approval_accepts_the_node_findings_and_moves_nothing() {
    let (_dir, ws) = demo();
    let f = ws
        .report()
        .unwrap()
        .findings
        .iter()
        .find(|f| !f.accepted && f.rule == "better-parent")
        .unwrap()
        .clone();
    let node = ws.project.phrases.id(f.node).to_string();
    let impact = ws
        .preview(&Edit::Review {
            node: node.clone(),
            status: ReviewStatus::Approved,
            comment: String::new(),
        })
        .unwrap();
    assert!(impact.created.is_empty(), "{impact:?}");
    assert!(
        impact
            .resolved
            .iter()
            .any(|x| x.node == node && x.rule == "better-parent")
    );
    assert_eq!((impact.moved, impact.offers.len()), (0, 0));
}

#[test]
fn a_move_after_a_signoff_outdates_it_and_a_review_does_not() {
    let (_dir, mut ws) = demo();
    let so = ws.signoff_edit("ines").unwrap();
    ws.edit(so, "ines", None).unwrap();
    let edit = first_reparent(&ws);
    assert!(ws.preview(&edit).unwrap().signoff_outdated);
    let Edit::Reparent { node, .. } = edit else {
        unreachable!()
    };
    let review = Edit::Review {
        node,
        status: ReviewStatus::ToFix,
        comment: "check".into(),
    };
    let i = ws.preview(&review).unwrap();
    assert!(!i.signoff_outdated);
    assert!(i.lines().iter().any(|l| l.contains("no sign-off")));
}

#[test]
fn a_refused_edit_is_refused_by_the_preview() {
    let (_dir, ws) = demo();
    let root = ws.effective().unwrap().tree.root();
    let child = ws.effective().unwrap().tree.children(root)[0];
    let id = |p| ws.project.phrases.id(p).to_string();
    // the root under its own child: a cycle
    let e = ws.preview(&Edit::Reparent {
        node: id(root),
        parent: id(child),
    });
    assert!(matches!(e, Err(WorkspaceError::Refused(_))), "{e:?}");
}

#[test]
fn same_canonical_agrees_with_the_sign_off_hash() {
    use crate::model::signoff::tree_hash;
    let (_dir, ws) = demo();
    let eff = ws.effective().unwrap();
    let phrases = &ws.project.phrases;
    let base = ws.base().unwrap();
    let id = |p: PhraseId| phrases.id(p).to_string();
    let root = eff.tree.root();
    let a = eff.tree.children(root)[0];
    let b = eff.tree.children(root)[1];
    let leaf = *eff.tree.children(a).first().unwrap_or(&a);
    let edits = [
        Edit::Rename {
            node: id(leaf),
            label: "renamed".into(),
            language: None,
        },
        Edit::Review {
            node: id(leaf),
            status: ReviewStatus::Approved,
            comment: String::new(),
        },
        Edit::Pin {
            node: id(leaf),
            parent: id(eff.tree.parent(leaf).unwrap()),
        },
        Edit::Reparent {
            node: id(leaf),
            parent: id(b),
        },
        Edit::Exclude { node: id(leaf) },
        Edit::Merge {
            sources: vec![id(leaf)],
            into: id(b),
        },
    ];
    for e in edits {
        let mut recs = ws.layer.edits.clone();
        recs.push(overrides::record(e.clone(), "t", None));
        let (after, _) = overrides::apply(base, phrases, &recs);
        assert_eq!(
            same_canonical(eff, &after),
            tree_hash(eff, phrases) == tree_hash(&after, phrases),
            "{e:?}"
        );
    }
}
