//! The workbench says when the audit's confidence is calibrated from the reviewer's
//! decisions: a copy of a real check set (`benches/real/wordnet-clothing-fitted`) with 30
//! decisions in its override layer, taken from its truth file, shows "Confidence calibrated
//! on … decisions" in the findings panel; the same set without decisions does not.

mod common;

use std::collections::{HashMap, HashSet};
use std::path::{Path, PathBuf};

use egui_kittest::Harness;
use egui_kittest::kittest::Queryable;
use treewright::gui::App;
use treewright::model::Workspace;
use treewright::model::audit::evaluate::{is_placement_rule, read_known_errors};
use treewright::model::edit::{Edit, ReviewStatus};

fn copy_set(name: &str) -> (tempfile::TempDir, PathBuf) {
    let src = Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("benches/real")
        .join(name);
    let tmp = tempfile::tempdir().unwrap();
    let dir = tmp.path().join(name);
    std::fs::create_dir_all(&dir).unwrap();
    for e in std::fs::read_dir(&src).unwrap() {
        let e = e.unwrap();
        std::fs::copy(e.path(), dir.join(e.file_name())).unwrap();
    }
    (tmp, dir)
}

fn open(dir: &std::path::Path) -> Harness<'static, App> {
    common::workbench::open_workbench(dir, [1280.0, 800.0])
}

#[test]
fn the_findings_panel_says_when_the_confidence_is_calibrated() {
    let (_t, dir) = copy_set("wordnet-clothing-fitted");
    {
        let h = open(&dir);
        assert!(
            h.query_by_label_contains("calibrated on").is_none(),
            "no decisions yet"
        );
    }
    // a reviewer decides the top 30 placement findings from the truth file
    let mut ws = Workspace::open(&dir).unwrap();
    let known = read_known_errors(&dir.join("known-errors.json"), &ws.project.phrases).unwrap();
    let truth: HashMap<_, _> = known.iter().map(|k| (k.node, k.true_parent)).collect();
    let r0 = ws.audit_now().unwrap();
    let mut seen = HashSet::new();
    let top: Vec<_> = r0
        .findings
        .iter()
        .filter(|f| !f.accepted && is_placement_rule(f.rule) && seen.insert(f.node))
        .map(|f| f.node)
        .take(30)
        .collect();
    for &n in &top {
        let id = ws.project.phrases.id(n).to_string();
        let edit = match truth.get(&n) {
            Some(Some(tp)) => Edit::Reparent {
                node: id,
                parent: ws.project.phrases.id(*tp).to_string(),
            },
            _ => Edit::Review {
                node: id,
                status: ReviewStatus::Approved,
                comment: String::new(),
            },
        };
        ws.edit(edit, "simulated reviewer", None).unwrap();
    }
    ws.save().unwrap();
    let h = open(&dir);
    h.get_by_label_contains("Confidence calibrated on 30 decisions");
    let report = h.state().doc.report().unwrap();
    assert!(report.calibration.is_some());
    assert_eq!(
        report.findings.len(),
        ws.audit_now().unwrap().findings.len(),
        "a decision never deletes a finding"
    );
}
