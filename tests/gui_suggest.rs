//! The suggestion panel driven headless by visible labels (egui_kittest).

use egui_kittest::Harness;
use egui_kittest::kittest::Queryable;
use treewright::gui::suggest_panel::{SuggestPanel, SuggestView};
use treewright::model::Project;
use treewright::model::effective::EffectiveTree;

mod common;

struct State {
    panel: SuggestPanel,
    project: Project,
    eff: EffectiveTree,
    selected: Vec<u32>,
}

#[test]
fn pick_a_phrase_see_offers_personalise_and_bulk_check() {
    let dir = common::project();
    let project = Project::load(dir.path()).unwrap();
    let eff = EffectiveTree::from_base(project.tree.as_ref().unwrap(), &project.phrases);
    let state = State {
        panel: SuggestPanel::default(),
        project,
        eff,
        selected: Vec::new(),
    };
    let mut harness = Harness::new_ui_state(
        |ui, s: &mut State| {
            let view = SuggestView {
                project: &s.project,
                eff: &s.eff,
                revision: 0,
                selected: None,
            };
            let picked = s.panel.show(ui, &view);
            s.selected.extend(picked);
        },
        state,
    );
    harness.set_size(egui::vec2(900.0, 800.0));
    harness.run();
    harness.get_by_label("Pick a phrase to see what a shopper would be offered.");

    harness
        .get_by_role(egui::accesskit::Role::TextInput)
        .focus();
    harness.run();
    harness
        .get_by_role(egui::accesskit::Role::TextInput)
        .type_text("succ");
    harness.run();
    harness.get_by_label("succulent").click();
    harness.run();
    assert_eq!(harness.state().panel.phrase, Some(1));
    harness.get_by_label(
        "A shopper using \"succulent\" sees: did you mean something broader: \"plants\"?",
    );
    harness.get_by_label("1. plants").click();
    harness.run();
    assert_eq!(harness.state().selected, vec![0]);

    // personalise
    harness.get_by_label("Shopper profile").click();
    harness.run();
    harness.get_by_label("balcony grower").click();
    harness.run();
    assert_eq!(harness.state().panel.user, Some(0));
    assert!(harness.get_all_by_label("for balcony grower").count() >= 1);

    // bulk check on a worker thread
    harness.get_by_label("Run bulk check").click();
    harness.step();
    harness.state_mut().panel.wait();
    harness.run();
    harness.get_by_label("2 phrases checked, 0 flagged");
    harness.get_by_label("Only flagged").click();
    harness.run();
    harness.get_by_label("0 of 2 rows");
}
