//! Headless workbench tests with egui_kittest: every flow is driven through visible labels,
//! the way a user would, on a fresh copy of the Fernhollow demo project.

use std::path::{Path, PathBuf};
use std::time::{Duration, Instant};

use egui::accesskit::Role;
use egui::{Key, Modifiers};
use egui_kittest::Harness;
use egui_kittest::kittest::Queryable;
use treewright::gui::{App, Settings};
use treewright::model::PhraseId;
use treewright::model::edit::{Edit, EditRecord};
use treewright::model::overrides::parse_overrides;
use treewright::model::sample::{SyntheticSpec, write_demo, write_synthetic};

fn demo_dir() -> (tempfile::TempDir, PathBuf) {
    let t = tempfile::tempdir().unwrap();
    let dir = t.path().join("fernhollow");
    write_demo(&dir).unwrap();
    (t, dir)
}

fn settings() -> Settings {
    Settings {
        author: "tester".into(),
        ..Settings::default()
    }
}

fn open(dir: &Path) -> Harness<'static, App> {
    let mut doc = treewright::gui::Doc::open(dir).unwrap();
    doc.wait_for_audit();
    let app = App::new(doc, settings());
    let mut h = Harness::builder()
        .with_size([1280.0, 800.0])
        .with_max_steps(12)
        .build_ui_state(|ui, app: &mut App| app.ui(ui), app);
    h.run();
    h
}

fn id_of(h: &Harness<'_, App>, id: &str) -> PhraseId {
    h.state().doc.project.phrases.get(id).unwrap()
}

fn parent_id(h: &Harness<'_, App>, id: &str) -> Option<String> {
    let app = h.state();
    let eff = app.doc.eff.as_ref().unwrap();
    let p = app.doc.project.phrases.get(id).unwrap();
    eff.tree
        .parent(p)
        .map(|q| app.doc.project.phrases.id(q).to_string())
}

/// Click a menu, then an item in it.
fn menu(h: &mut Harness<'_, App>, top: &str, entry: &str) {
    h.get_by_label(top).click();
    h.run();
    // menu entries with a shortcut carry it in their accessible label
    h.get_all_by_label_contains(entry).next().unwrap().click();
    h.run();
}

/// Step until `done` holds (the worker thread needs real time), at most `secs` seconds.
fn step_until(h: &mut Harness<'_, App>, secs: u64, done: impl Fn(&Harness<'_, App>) -> bool) {
    let start = Instant::now();
    while !done(h) {
        assert!(
            start.elapsed() < Duration::from_secs(secs),
            "timed out waiting"
        );
        std::thread::sleep(Duration::from_millis(20));
        h.step();
    }
    h.run_steps(2);
}

#[test]
fn opening_the_demo_shows_the_panels_and_counts() {
    let (_t, dir) = demo_dir();
    let h = open(&dir);
    h.get_by_label("Hierarchy");
    h.get_by_label("Findings");
    h.get_by_label("Ellipse projection");
    let n = h.state().doc.project.phrases.len();
    h.get_by_label(&format!("{n} phrases"));
    h.get_by_label("not signed off");
    // the planted unplaced phrases are listed outside the tree
    h.get_by_label_contains("Outside the tree: 3 unplaced");
}

#[test]
fn search_finds_and_selects_a_phrase() {
    let (_t, dir) = demo_dir();
    let mut h = open(&dir);
    h.key_press_modifiers(Modifiers::COMMAND, Key::F);
    h.run();
    h.get_by_role(Role::TextInput).type_text("peat free");
    h.run();
    h.get_by_label("Next match").click();
    h.run();
    let sel = h.state().selection.clone();
    assert_eq!(sel.len(), 1);
    let label = h
        .state()
        .doc
        .eff
        .as_ref()
        .unwrap()
        .label(sel[0])
        .to_string();
    assert!(label.contains("peat free"), "selected {label}");
    // the statistics panel shows the selected phrase's generality
    h.get_by_label("generality");
}

#[test]
fn reparent_through_the_context_menu_then_undo_redo_and_save() {
    let (_t, dir) = demo_dir();
    let mut h = open(&dir);
    assert_eq!(
        parent_id(&h, "bird-netting").as_deref(),
        Some("cushions-and-textiles")
    );
    // reveal the row, then right-click it
    let node = id_of(&h, "bird-netting");
    h.state_mut().apply(treewright::gui::Action::Reveal(node));
    h.run();
    h.get_all_by_label("bird netting")
        .next()
        .unwrap()
        .click_secondary();
    h.run();
    h.get_by_label("Reparent to…").click();
    h.run();
    h.event(egui::Event::Text("animal deter".into()));
    h.run();
    h.get_by_label("animal deterrents  (under pest control)")
        .click();
    h.run();
    h.get_by_label("Move here").click();
    h.run();
    assert_eq!(
        parent_id(&h, "bird-netting").as_deref(),
        Some("animal-deterrents")
    );
    h.get_by_label("UNSAVED EDITS");

    // undo with the keyboard, redo from the Edit menu
    h.key_press_modifiers(Modifiers::COMMAND, Key::Z);
    h.run();
    assert_eq!(
        parent_id(&h, "bird-netting").as_deref(),
        Some("cushions-and-textiles")
    );
    menu(&mut h, "Edit", "Redo");
    assert_eq!(
        parent_id(&h, "bird-netting").as_deref(),
        Some("animal-deterrents")
    );

    // save and read the override file back
    menu(&mut h, "File", "Save edits");
    h.get_by_label("saved");
    let bytes = std::fs::read(dir.join("overrides.json")).unwrap();
    let edits = parse_overrides(&bytes, "overrides.json").unwrap();
    assert_eq!(edits.len(), 1);
    assert_eq!(
        edits[0].edit,
        Edit::Reparent {
            node: "bird-netting".into(),
            parent: "animal-deterrents".into()
        }
    );
    assert_eq!(edits[0].author, "tester");
}

#[test]
fn a_refused_edit_says_why_and_changes_nothing() {
    let (_t, dir) = demo_dir();
    let mut h = open(&dir);
    let root = h.state().doc.eff.as_ref().unwrap().tree.root();
    let plants = id_of(&h, "plants");
    // moving a category under its own descendant would make a cycle
    let kid = h.state().doc.eff.as_ref().unwrap().tree.children(plants)[0];
    let ids = |p: PhraseId| h.state().doc.project.phrases.id(p).to_string();
    let edit = Edit::Reparent {
        node: ids(plants),
        parent: ids(kid),
    };
    h.state_mut().apply(treewright::gui::Action::Edit(edit));
    h.run();
    assert!(h.state().doc.layer.edits.is_empty());
    h.get_by_label_contains("Refused reparent");
    assert_ne!(root, plants);
}

#[test]
fn clicking_a_finding_selects_its_node_and_a_fix_applies_as_one_edit() {
    let (_t, dir) = demo_dir();
    let mut h = open(&dir);
    // each row shows the sentence that explains the finding under its title (the score,
    // threshold and confidence are in words on hover)
    let shown = {
        let f = &h.state().doc.report().unwrap().findings[0];
        treewright::gui::badges::plain(&f.explanation)
    };
    h.get_by_label(&shown);
    let (node, rule, label) = {
        let app = h.state();
        let f = &app.doc.report().unwrap().findings[0];
        let eff = app.doc.eff.as_ref().unwrap();
        let other = f
            .other
            .map(|o| format!(" vs {}", eff.label(o)))
            .unwrap_or_default();
        (
            f.node,
            f.rule,
            format!("{}: {}{other}", f.rule, eff.label(f.node)),
        )
    };
    h.get_by_label(&label).click();
    h.run();
    assert_eq!(
        h.state().selection,
        vec![h.state().doc.eff.as_ref().unwrap().resolve(node)]
    );
    assert!(!rule.is_empty());

    // the first "Apply fix" button belongs to the first open finding with a fix
    let expected: Edit = {
        let app = h.state();
        app.doc
            .report()
            .unwrap()
            .findings
            .iter()
            .filter(|f| !f.accepted)
            .find_map(|f| {
                f.suggestion
                    .as_ref()
                    .and_then(|s| s.edit.clone())
                    .filter(|e| app.doc.check(e).is_ok())
            })
            .expect("the demo has a finding with a suggested fix")
    };
    let before = h
        .state()
        .doc
        .report()
        .unwrap()
        .open_count(treewright::model::audit::Severity::Info);
    // move the pointer away so the finding's tooltip does not cover the buttons
    h.remove_cursor();
    h.run();
    h.get_all_by_label("Apply fix").next().unwrap().click();
    h.run();
    let app = h.state();
    assert_eq!(app.doc.layer.edits.len(), 1);
    assert_eq!(app.doc.layer.edits[0].edit, expected);
    let after = app
        .doc
        .report()
        .unwrap()
        .open_count(treewright::model::audit::Severity::Info);
    assert!(after < before, "open findings {before} -> {after}");
    // one Ctrl+Z takes the whole fix back
    h.key_press_modifiers(Modifiers::COMMAND, Key::Z);
    h.run();
    assert!(h.state().doc.layer.edits.is_empty());
}

#[test]
fn the_build_dialog_runs_to_completion_and_replaces_the_base_tree() {
    let (_t, dir) = demo_dir();
    let mut h = open(&dir);
    menu(&mut h, "Tree", "Build tree…");
    // the dialog opens on the inclusion method (the default); this test reads the divisive
    // build's elbow curve
    h.get_by_label("divisive").click();
    h.run();
    h.get_by_label("Start build").click();
    h.run_steps(2);
    step_until(&mut h, 120, |h| h.query_by_label("Use this tree").is_some());
    h.get_by_label_contains("Built a tree of");
    h.get_by_label("Use this tree").click();
    h.run();
    assert!(h.state().dialog.is_none() || h.query_by_label("Edits that no longer apply").is_some());
    assert!(dir.join("build-report.json").is_file());
    assert!(dir.join("tree.json.bak").is_file());
    let n = h.state().doc.eff.as_ref().unwrap().tree.node_count();
    assert_eq!(
        n,
        h.state().doc.project.phrases.len(),
        "the built tree places every phrase"
    );
    // the statistics of the new root show the builder's elbow curve
    if h.query_by_label("Edits that no longer apply").is_some() {
        h.get_by_label("Close").click();
        h.run();
    }
    let root = h.state().doc.eff.as_ref().unwrap().tree.root();
    h.state_mut().apply(treewright::gui::Action::Select(root));
    h.run();
    h.get_by_label("Build: elbow curve");
    h.get_by_label_contains("chosen k = ");
}

#[test]
fn the_build_dialog_offers_the_inclusion_method() {
    let (_t, dir) = demo_dir();
    let mut h = open(&dir);
    menu(&mut h, "Tree", "Build tree…");
    h.get_by_label("inclusion").click();
    h.run();
    // the method's one-line explanation is shown, the divisive-only fields are gone
    h.get_by_label_contains("contains it best");
    assert!(h.query_by_label("Largest k tried per node").is_none());
    // the inclusion method's own limits: a depth limit switched on (default 6)
    h.get_by_label("Depth limit").click();
    h.run();
    h.get_by_label("Start build").click();
    h.run_steps(2);
    step_until(&mut h, 120, |h| h.query_by_label("Use this tree").is_some());
    h.get_by_label("Use this tree").click();
    h.run();
    let report: serde_json::Value =
        serde_json::from_slice(&std::fs::read(dir.join("build-report.json")).unwrap()).unwrap();
    assert_eq!(report["method"], "inclusion");
    assert_eq!(report["inclusion"]["params"]["max_depth"], 6);
    assert!(report["inclusion"]["params"]["max_fanout"].is_null());
    assert!(report["depth"].as_u64().unwrap() <= 6);
    let nodes = report["inclusion"]["nodes"].as_array().unwrap();
    // every phrase but the root has its parent's cost recorded
    assert_eq!(nodes.len() + 1, h.state().doc.project.phrases.len());
    // the statistics panel shows what the builder chose for a node, and the runner-up
    if h.query_by_label("Edits that no longer apply").is_some() {
        h.get_by_label("Close").click();
        h.run();
    }
    let with_runner_up = nodes
        .iter()
        .find(|n| n["runner_up"].is_object())
        .expect("some phrase had a second candidate");
    let id = with_runner_up["node"].as_str().unwrap();
    let p = id_of(&h, id);
    h.state_mut().apply(treewright::gui::Action::Select(p));
    h.run();
    h.get_by_label("built parent");
    h.get_by_label("runner-up parent");
    let cost = with_runner_up["runner_up"]["cost"].as_f64().unwrap();
    h.get_by_label_contains(&format!("(cost {cost:.3})"));
}

#[test]
fn a_running_build_can_be_cancelled() {
    let t = tempfile::tempdir().unwrap();
    let dir = t.path().join("big");
    let spec = SyntheticSpec {
        phrases: 6_000,
        dim: 16,
        ..SyntheticSpec::default()
    };
    write_synthetic(&dir, &spec).unwrap();
    let mut h = open(&dir);
    let before = h.state().doc.project.tree.clone();
    menu(&mut h, "Tree", "Build tree…");
    // exact representatives over the whole table make the first split take a while
    if let Some(treewright::gui::dialogs::Dialog::Build(b)) = &mut h.state_mut().dialog {
        b.method = treewright::model::builder::BuildMethod::Divisive;
        b.params.exact_limit = 1_000_000;
        b.params.kmeans_restarts = 20;
    }
    // the divisive fields appear: let the dialog settle before the click
    h.run();
    h.get_by_label("Start build").click();
    // the click lands in the next frame, the frames after show the running build (the
    // centred dialog settles its new size over two frames)
    h.run_steps(4);
    h.get_by_label("Cancel build").click();
    h.run_steps(2);
    step_until(&mut h, 60, |h| h.query_by_label("Start build").is_some());
    h.get_by_label("Build cancelled.");
    assert_eq!(h.state().doc.project.tree, before);
}

#[test]
fn signing_off_changes_the_status_bar() {
    let (_t, dir) = demo_dir();
    let mut h = open(&dir);
    menu(&mut h, "Review", "Sign off…");
    h.get_by_label("Sign off the tree");
    h.get_by_label_contains("Open findings:");
    h.get_by_label("Sign off").click();
    h.run();
    h.get_by_label("SIGNED OFF");
    let app = h.state();
    let last = app.doc.layer.edits.last().unwrap();
    assert!(matches!(&last.edit, Edit::Signoff { reviewer, .. } if reviewer == "tester"));
    // the sign-off is saved right away
    assert!(!app.is_dirty());
    // any later edit makes the sign-off outdated
    let rename = Edit::Rename {
        node: "gifts".into(),
        label: "gift ideas".into(),
        language: None,
    };
    h.state_mut().apply(treewright::gui::Action::Edit(rename));
    h.run();
    h.get_by_label("SIGN-OFF OUTDATED");
}

#[test]
fn rename_with_f2_and_review_from_the_context_menu() {
    let (_t, dir) = demo_dir();
    let mut h = open(&dir);
    let gifts = id_of(&h, "gifts");
    h.state_mut().apply(treewright::gui::Action::Reveal(gifts));
    h.run();
    h.key_press(Key::F2);
    h.run();
    h.get_by_label("Rename a node");
    h.event(egui::Event::Key {
        key: Key::A,
        physical_key: None,
        pressed: true,
        repeat: false,
        modifiers: Modifiers::COMMAND,
    });
    h.event(egui::Event::Text("gift ideas".into()));
    h.run();
    h.get_by_label("Rename").click();
    h.run();
    assert_eq!(
        h.state().doc.eff.as_ref().unwrap().label(gifts),
        "gift ideas"
    );

    h.get_all_by_label_contains("gift ideas")
        .next()
        .unwrap()
        .click_secondary();
    h.run();
    h.get_by_label("Mark to fix…").click();
    h.run();
    h.event(egui::Event::Text("too broad for a shop tag".into()));
    h.run();
    h.get_by_label("Record review").click();
    h.run();
    let eff = h.state().doc.eff.as_ref().unwrap();
    assert_eq!(
        eff.review[gifts as usize],
        treewright::model::edit::ReviewStatus::ToFix
    );
    assert_eq!(
        eff.review_comment[gifts as usize],
        "too broad for a shop tag"
    );
}

#[test]
fn arrow_keys_move_the_selection_and_expand() {
    let (_t, dir) = demo_dir();
    let mut h = open(&dir);
    let root = h.state().doc.eff.as_ref().unwrap().tree.root();
    let first = h.state().doc.eff.as_ref().unwrap().tree.children(root)[0];
    h.state_mut().apply(treewright::gui::Action::Select(root));
    h.run();
    h.key_press(Key::ArrowDown);
    h.run();
    assert_eq!(h.state().selection, vec![first]);
    assert!(!h.state().tree_panel.is_expanded(first));
    h.key_press(Key::ArrowRight);
    h.run();
    assert!(h.state().tree_panel.is_expanded(first));
    h.key_press(Key::ArrowLeft);
    h.run();
    assert!(!h.state().tree_panel.is_expanded(first));
    h.key_press(Key::ArrowLeft);
    h.run();
    assert_eq!(h.state().selection, vec![root]);
}

#[test]
fn quitting_with_unsaved_edits_asks_first() {
    let (_t, dir) = demo_dir();
    let mut h = open(&dir);
    let e = Edit::Exclude {
        node: "gifts".into(),
    };
    h.state_mut().apply(treewright::gui::Action::Edit(e));
    h.run();
    menu(&mut h, "File", "Quit");
    h.get_by_label("Unsaved edits");
    assert!(!h.state().close_allowed());
    h.get_by_label("Save and close").click();
    h.run();
    assert!(h.state().close_allowed());
    assert!(dir.join("overrides.json").is_file());
}

#[test]
fn edits_left_in_the_recovery_file_are_offered_back() {
    let (_t, dir) = demo_dir();
    let rec = EditRecord {
        edit: Edit::Exclude {
            node: "gifts".into(),
        },
        author: "earlier".into(),
        time: "2026-12-01T09:00:00Z".into(),
        note: None,
    };
    let file = serde_json::json!({ "format": "treewright-recovery", "edits": [rec] });
    std::fs::write(
        dir.join(treewright::gui::autosave::FILE_NAME),
        serde_json::to_vec(&file).unwrap(),
    )
    .unwrap();
    let mut h = open(&dir);
    h.get_by_label("Recover unsaved edits?");
    h.get_by_label("Restore edits").click();
    h.run();
    let app = h.state();
    assert_eq!(app.doc.layer.edits, vec![rec]);
    assert!(app.is_dirty());
    assert!(app.doc.eff.as_ref().unwrap().excluded[id_of(&h, "gifts") as usize]);
}

#[test]
fn export_writes_skos_turtle() {
    let (_t, dir) = demo_dir();
    let mut h = open(&dir);
    menu(&mut h, "File", "Export…");
    h.get_by_label("Export the effective tree");
    h.get_by_label("Export").click();
    h.run();
    let ttl = std::fs::read_to_string(dir.join("exports/tree.ttl")).unwrap();
    // SKOS core vocabulary namespace (W3C SKOS Reference, 2009)
    assert!(ttl.contains("http://www.w3.org/2004/02/skos/core#"));
    assert!(ttl.contains("peat free compost"));
}

#[test]
fn settings_persist_as_json_and_tolerate_missing_fields() {
    let s = Settings {
        recent: vec![PathBuf::from("/tmp/a")],
        dark: true,
        ..settings()
    };
    let text = serde_json::to_string(&s).unwrap();
    let back: Settings = serde_json::from_str(&text).unwrap();
    assert_eq!(back, s);
    let partial: Settings = serde_json::from_str(r#"{"dark": true}"#).unwrap();
    assert!(partial.dark && partial.show_tree);
}

#[test]
fn merge_a_near_duplicate_through_search_and_the_picker() {
    let (_t, dir) = demo_dir();
    let mut h = open(&dir);
    h.key_press_modifiers(Modifiers::COMMAND, Key::F);
    h.run();
    h.get_by_role(Role::TextInput)
        .type_text("drought resistant");
    h.run();
    h.get_by_label("Next match").click();
    h.run();
    let dr = id_of(&h, "drought-resistant");
    assert_eq!(h.state().selection, vec![dr]);
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
    h.get_by_label("Merge").click();
    h.run();
    let dt = id_of(&h, "drought-tolerant");
    let eff = h.state().doc.eff.as_ref().unwrap();
    assert_eq!(eff.alias_of[dr as usize], Some(dt));
    assert_eq!(eff.aliases[dt as usize], vec![dr]);
    // the merged-alias badge is shown on the target's row
    h.get_by_label("+1");
}

#[test]
fn the_diff_window_lists_what_the_edits_changed() {
    let (_t, dir) = demo_dir();
    let mut h = open(&dir);
    let e = Edit::Reparent {
        node: "bird-netting".into(),
        parent: "animal-deterrents".into(),
    };
    h.state_mut().apply(treewright::gui::Action::Edit(e));
    h.run();
    menu(&mut h, "Tree", "Compare trees…");
    h.get_by_label("1 change(s)");
    h.get_by_label_contains("bird-netting: cushions-and-textiles -> animal-deterrents");
}

#[test]
fn dragging_a_row_onto_another_reparents_it() {
    let (_t, dir) = demo_dir();
    let mut h = open(&dir);
    let target = id_of(&h, "animal-deterrents");
    let node = id_of(&h, "bird-netting");
    h.state_mut().apply(treewright::gui::Action::Reveal(target));
    h.state_mut().apply(treewright::gui::Action::Reveal(node));
    h.run();
    let src = h
        .get_all_by_label("bird netting")
        .next()
        .unwrap()
        .rect()
        .center();
    let dst = h
        .get_all_by_label_contains("animal deterrents  (")
        .next()
        .unwrap()
        .rect()
        .center();
    h.hover_at(src);
    h.run();
    h.drag_at(src);
    h.step();
    for k in 1..=6 {
        let t = k as f32 / 6.0;
        h.hover_at(src + (dst - src) * t);
        h.step();
    }
    h.drop_at(dst);
    h.run();
    assert_eq!(
        parent_id(&h, "bird-netting").as_deref(),
        Some("animal-deterrents")
    );
    assert_eq!(h.state().doc.layer.edits.len(), 1);
}

#[test]
fn the_centre_switches_to_the_shopper_suggestions() {
    let (_t, dir) = demo_dir();
    let mut h = open(&dir);
    h.get_by_label("Shopper suggestions").click();
    h.run();
    h.get_by_label("Suggestion preview");
    assert!(h.query_by_label("Ellipse projection").is_none());
    h.get_by_label("Ellipses").click();
    h.run();
    h.get_by_label("Ellipse projection");
}

#[test]
fn ctrl_click_selects_two_nodes_for_the_contrast_projection() {
    let (_t, dir) = demo_dir();
    let mut h = open(&dir);
    let root = h.state().doc.eff.as_ref().unwrap().tree.root();
    let kids = h
        .state()
        .doc
        .eff
        .as_ref()
        .unwrap()
        .tree
        .children(root)
        .to_vec();
    let label = |h: &Harness<'_, App>, p: PhraseId| {
        let eff = h.state().doc.eff.as_ref().unwrap();
        format!("{}  ({})", eff.label(p), eff.tree.children(p).len())
    };
    let (a, b) = (label(&h, kids[0]), label(&h, kids[1]));
    h.get_by_label(&a).click();
    h.run();
    h.get_by_label(&b).click_modifiers(Modifiers::COMMAND);
    h.run();
    assert_eq!(h.state().selection, vec![kids[0], kids[1]]);
    h.get_by_label("contrast of two selected").click();
    h.run();
    h.get_by_label_contains("(contrast axis ");
    h.get_by_label_contains("This view explains");
    // Shift-click extends from the anchor over the rows between
    let d = label(&h, kids[3]);
    h.get_by_label(&d).click_modifiers(Modifiers::SHIFT);
    h.run();
    assert_eq!(h.state().selection, kids[..4].to_vec());
}

#[test]
fn the_panels_keep_their_size_from_frame_to_frame() {
    let (_t, dir) = demo_dir();
    let mut h = open(&dir);
    let p = id_of(&h, "bird-netting");
    h.state_mut().apply(treewright::gui::Action::Reveal(p));
    h.run();
    let edges = |h: &Harness<'_, App>| {
        (
            h.get_by_label("Clear").rect().max.x,
            h.get_by_label("Shopper suggestions").rect().min.x,
            h.get_by_label("Findings").rect().min.x,
        )
    };
    let first = edges(&h);
    h.run_steps(20);
    assert_eq!(edges(&h), first);
}

/// Placement doubts at info severity are collapsed by default on a real check set
/// (benches/real: WordNet 3.0 bird subtree, own-text Gaussians), and one checkbox shows them.
#[test]
fn placement_doubts_to_consider_are_collapsed_until_asked_for() {
    let t = tempfile::tempdir().unwrap();
    let src = Path::new(env!("CARGO_MANIFEST_DIR")).join("benches/real/wordnet-bird-own-text");
    let dir = t.path().join("bird");
    std::fs::create_dir(&dir).unwrap();
    for e in std::fs::read_dir(&src).unwrap() {
        let e = e.unwrap();
        std::fs::copy(e.path(), dir.join(e.file_name())).unwrap();
    }
    let mut h = open(&dir);
    let (open_total, to_consider) = {
        let r = h.state().doc.report().unwrap();
        let open = r.findings.iter().filter(|f| !f.accepted).count();
        let consider = r
            .findings
            .iter()
            .filter(|f| {
                !f.accepted
                    && f.severity == treewright::model::audit::Severity::Info
                    && ["better-parent", "weak-inclusion", "inverted-generality"].contains(&f.rule)
            })
            .count();
        (open, consider)
    };
    assert!(
        to_consider > 0,
        "the set has low-confidence placement doubts"
    );
    h.get_by_label(&format!(
        "{} shown of {open_total} ({open_total} open; {to_consider} to consider collapsed)",
        open_total - to_consider
    ));
    h.get_by_label("show placement doubts to consider").click();
    h.run();
    h.get_by_label(&format!(
        "{open_total} shown of {open_total} ({open_total} open)"
    ));
}
