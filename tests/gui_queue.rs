//! The review session through the queue (egui_kittest, by visible labels): the workbench
//! opens on the top of the queue, the keyboard flow (approve, skip), applying a suggestion
//! with its impact preview on hover, and the two-parent view of a placement finding.

mod common;

use egui::Key;
use egui::accesskit::Toggled;
use egui_kittest::Harness;
use egui_kittest::kittest::{NodeT, Queryable};
use treewright::gui::App;
use treewright::model::edit::Edit;
use treewright::model::queue::ItemState;

fn open(dir: &std::path::Path) -> Harness<'static, App> {
    common::workbench::open_workbench(dir, [1280.0, 900.0])
}

fn progress(h: &Harness<'_, App>) -> String {
    h.state().queue.as_ref().unwrap().progress().text()
}

/// Click the queue's list row of the first open item with a ready reparent edit.
fn select_item_with_edit(h: &mut Harness<'_, App>) -> (usize, Edit) {
    let (k, label, rule, edit) = {
        let q = h.state().queue.as_ref().unwrap();
        q.items
            .iter()
            .enumerate()
            .find_map(|(k, x)| match (&x.edit, x.state) {
                (Some(e @ Edit::Reparent { .. }), ItemState::Open) => {
                    Some((k, x.label.clone(), x.rule, e.clone()))
                }
                _ => None,
            })
            .expect("the demo queue has a reparent suggestion")
    };
    h.get_by_label(&format!("{}. {label} — {rule}", k + 1))
        .click();
    h.run();
    (k, edit)
}

#[test]
fn the_workbench_opens_on_the_top_of_the_queue() {
    let (_t, dir) = common::workbench::demo_dir();
    let h = open(&dir);
    let app = h.state();
    let q = app
        .queue
        .as_ref()
        .expect("the queue is built with the first audit");
    assert!(!q.items.is_empty());
    assert_eq!(
        app.selection,
        vec![q.items[0].node],
        "the top item is selected"
    );
    // shown: the queue's current item and the progress, here and in the status bar
    h.get_by_label(&format!("Progress: {}", progress(&h)));
    h.get_by_label(&format!("queue: {}", progress(&h)));
    assert!(progress(&h).starts_with("0 / "));
    h.get_by_label_contains(&format!("Why: {}", q.items[0].rule));
    // the ellipse view shows the selected node, not the empty hint
    assert!(
        h.query_by_label_contains("Select a node in the tree")
            .is_none()
    );
}

#[test]
fn approve_three_skip_one_apply_one_and_the_progress_follows() {
    let (_t, dir) = common::workbench::demo_dir();
    let mut h = open(&dir);
    let start = progress(&h);
    // apply one suggestion (the button; its preview is checked in the next test)
    let (k, edit) = select_item_with_edit(&mut h);
    h.get_by_label("Apply suggestion (S)").click();
    h.run();
    assert!(h.state().doc.layer.edits.iter().any(|r| r.edit == edit));
    assert_ne!(
        h.state().queue.as_ref().unwrap().items[k].state,
        ItemState::Open
    );
    let after_apply = progress(&h);
    assert_ne!(after_apply, start);
    h.get_by_label(&format!("Progress: {after_apply}"));
    // approve three with the keyboard (each moves on to the next waiting node)
    let reviewed = |h: &Harness<'_, App>| h.state().queue.as_ref().unwrap().progress().reviewed;
    let r0 = reviewed(&h);
    for i in 1..=3 {
        let current = h.state().selection[0];
        h.key_press(Key::A);
        h.run();
        assert_eq!(reviewed(&h), r0 + i, "approval {i}");
        let q = h.state().queue.as_ref().unwrap();
        let pos = q.position(current).unwrap();
        assert_eq!(q.items[pos].state, ItemState::Approved);
        assert_ne!(h.state().selection[0], current, "moved on");
    }
    // skip one: it stays waiting, the progress does not move, the selection does
    let current = h.state().selection[0];
    let before = progress(&h);
    h.key_press(Key::K);
    h.run();
    let q = h.state().queue.as_ref().unwrap();
    assert_eq!(
        q.items[q.position(current).unwrap()].state,
        ItemState::Skipped
    );
    assert_eq!(progress(&h), before);
    assert_ne!(h.state().selection[0], current);
    h.get_by_label(&format!("queue: {}", progress(&h)));
    assert_ne!(progress(&h), after_apply);
    // every decision is an edit of the override layer: 1 reparent + 3 reviews
    assert_eq!(h.state().doc.layer.edits.len(), 4);
}

#[test]
fn the_impact_preview_on_hover_equals_applying_and_re_auditing() {
    let (_t, dir) = common::workbench::demo_dir();
    let mut h = open(&dir);
    let (_, edit) = select_item_with_edit(&mut h);
    let impact = h.state().doc.preview(&edit).unwrap();
    h.get_by_label("Apply suggestion (S)").hover();
    h.run();
    let line = format!(
        "findings: {} resolved, {} created (open {} -> {})",
        impact.resolved.len(),
        impact.created.len(),
        impact.open_before,
        impact.open_after
    );
    h.get_by_label(&line);
    h.get_by_label("no sign-off becomes outdated");
    h.get_by_label("Apply suggestion (S)").click();
    h.run();
    // applied and re-audited: the open findings are what the preview said
    let report = h.state().doc.report().unwrap();
    let open = report.findings.iter().filter(|f| !f.accepted).count();
    assert_eq!(open, impact.open_after);
    assert_eq!(
        open,
        impact.open_before - impact.resolved.len() + impact.created.len()
    );
}

#[test]
fn a_placement_finding_shows_both_parents() {
    let (_t, dir) = common::workbench::demo_dir();
    let mut h = open(&dir);
    // a better-parent item of the queue
    let (k, label) = {
        let q = h.state().queue.as_ref().unwrap();
        q.items
            .iter()
            .enumerate()
            .find(|(_, x)| x.rule == "better-parent")
            .map(|(k, x)| (k, x.label.clone()))
            .expect("the demo has a better-parent finding")
    };
    h.get_by_label(&format!("{}. {label} — better-parent", k + 1))
        .click();
    h.run();
    h.get_by_label("Both parents: the node, its current parent and the suggested one");
    // the caption: KL and containment under each parent
    h.get_by_label_contains(&format!("\"{label}\" under "));
    h.get_by_label_contains("(now): KL");
    h.get_by_label_contains("(suggested): KL");
    h.get_by_label_contains("Contrast axis through the two parents");
    // the projection row says which projection this is: the two parents' contrast is the
    // active choice, not PCA (the panel's mode underneath stays PCA)
    let toggled = |h: &Harness<'_, App>, label: &str| {
        h.get_by_label(label).accesskit_node().toggled() == Some(Toggled::True)
    };
    assert!(toggled(&h, "Two parents: contrast"));
    assert!(!toggled(&h, "PCA"));
    // the finding row shows the explanation sentence; the numbers are in words on hover
    assert!(
        h.get_all_by_label_contains("better than its parent")
            .count()
            >= 1
    );
    // unticking "both parents" brings back the usual view, and PCA is active again
    h.get_by_label("both parents").click();
    h.run();
    assert!(h.query_by_label_contains("Both parents:").is_none());
    assert!(toggled(&h, "PCA"));
    assert!(!toggled(&h, "Two parents: contrast"));
    // picking the two-parent projection in the row shows the view again
    h.get_by_label("Two parents: contrast").click();
    h.run();
    h.get_by_label("Both parents: the node, its current parent and the suggested one");
    assert!(toggled(&h, "Two parents: contrast"));
}

#[test]
fn the_picker_shows_the_impact_before_it_confirms() {
    let (_t, dir) = common::workbench::demo_dir();
    let mut h = open(&dir);
    // "drought resistant" sits under "plants"; merge it into "drought tolerant" by the picker
    let dr = h
        .state()
        .doc
        .project
        .phrases
        .get("drought-resistant")
        .unwrap();
    h.state_mut().apply(treewright::gui::Action::Reveal(dr));
    h.run();
    h.get_all_by_label("drought resistant")
        .next()
        .unwrap()
        .click_secondary();
    h.run();
    h.get_by_label("Merge into…").click();
    h.run();
    h.event(egui::Event::Text("drought tol".into()));
    h.run();
    h.get_by_label("drought tolerant  (under perennials)")
        .click();
    h.run();
    // the preview of exactly the edit the picker would make, before "Merge" is pressed
    let edit = Edit::Merge {
        sources: vec!["drought-resistant".into()],
        into: "drought-tolerant".into(),
    };
    let impact = h.state().doc.preview(&edit).unwrap();
    h.get_by_label("Preview: merge drought-resistant into drought-tolerant");
    h.get_by_label(&format!(
        "findings: {} resolved, {} created (open {} -> {})",
        impact.resolved.len(),
        impact.created.len(),
        impact.open_before,
        impact.open_after
    ));
    assert!(
        impact.resolved.iter().any(|f| f.rule == "near-duplicate"),
        "{impact:?}"
    );
    assert!(h.state().doc.layer.edits.is_empty(), "nothing applied yet");
}

#[test]
fn the_suggestion_tab_follows_the_selection_unless_pinned() {
    let (_t, dir) = common::workbench::demo_dir();
    let mut h = open(&dir);
    h.get_by_label("Shopper suggestions").click();
    h.run();
    let line_of = |h: &Harness<'_, App>, label: &str| {
        h.query_by_label_contains(&format!("A shopper using \"{label}\""))
            .is_some()
    };
    let label = |h: &Harness<'_, App>, id: &str| {
        let app = h.state();
        let p = app.doc.project.phrases.get(id).unwrap();
        app.doc.eff.as_ref().unwrap().label(p).to_string()
    };
    // the top of the queue is selected at start, and the tab shows it
    let top = {
        let app = h.state();
        app.doc
            .eff
            .as_ref()
            .unwrap()
            .label(app.selection[0])
            .to_string()
    };
    assert!(line_of(&h, &top), "shows the selected {top}");
    // a new selection is followed
    let netting = h.state().doc.project.phrases.get("bird-netting").unwrap();
    h.state_mut()
        .apply(treewright::gui::Action::Reveal(netting));
    h.run();
    let netting_label = label(&h, "bird-netting");
    assert!(line_of(&h, &netting_label));
    // pinned: the selection moves, the tab stays
    h.get_by_label("Pin this phrase").click();
    h.run();
    let gifts = h.state().doc.project.phrases.get("gifts").unwrap();
    h.state_mut().apply(treewright::gui::Action::Reveal(gifts));
    h.run();
    assert!(line_of(&h, &netting_label), "still on the pinned phrase");
    assert!(!line_of(&h, &label(&h, "gifts")));
}
