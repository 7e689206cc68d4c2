//! The audit on the real check sets of `benches/real/` (hierarchies nobody here made, with
//! planted errors and their truth beside them; see `benches/real/README.md`): the figures
//! measured with the default configuration are held as floors, so a change that makes the
//! audit worse on real data fails here. The figures are those of `audit --known-errors`
//! ([`treewright::model::audit::evaluate`]), which uses the definitions of
//! `benches/real/measure.py`.

use std::path::{Path, PathBuf};
use std::process::Command;

use treewright::model::Project;
use treewright::model::audit::evaluate::{Evaluation, evaluate, read_known_errors};
use treewright::model::audit::{AuditConfig, audit};
use treewright::model::effective::EffectiveTree;

fn set_dir(name: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("benches/real")
        .join(name)
}

fn measure(name: &str) -> Evaluation {
    let dir = set_dir(name);
    let p = Project::load(&dir).unwrap();
    let tree = p.tree.clone().unwrap();
    let eff = EffectiveTree::from_base(&tree, &p.phrases);
    let r = audit(&p.gaussians, &p.phrases, &eff, &[], &AuditConfig::default());
    let known = read_known_errors(&dir.join("known-errors.json"), &p.phrases).unwrap();
    evaluate(&r, &p.phrases, &known)
}

/// Floors: (set, precision, recall, AP of the misplaced nodes, far found, better-parent
/// accuracy). Measured once with the default configuration (the README table), rounded
/// down to two decimals.
const FLOORS: [(&str, f64, f64, f64, usize, f64); 8] = [
    ("icd10cm-circulatory-fitted", 0.89, 0.74, 0.88, 28, 0.93),
    ("icd10cm-circulatory-own-text", 0.64, 0.78, 0.78, 28, 0.84),
    ("wordnet-bird-fitted", 1.00, 0.54, 0.89, 13, 0.92),
    ("wordnet-bird-own-text", 0.62, 0.45, 0.59, 12, 0.40),
    ("wordnet-clothing-fitted", 0.95, 0.59, 0.87, 9, 1.00),
    ("wordnet-clothing-own-text", 0.60, 0.43, 0.66, 7, 0.42),
    ("wordnet-structure-fitted", 1.00, 0.64, 0.86, 23, 0.68),
    ("wordnet-structure-own-text", 0.97, 0.56, 0.74, 23, 0.60),
];

#[test]
fn real_sets_keep_their_measured_figures() {
    let mut bad = Vec::new();
    for (name, prec, rec, ap, far, bp) in FLOORS {
        let e = measure(name);
        let far_found = e
            .kinds
            .iter()
            .find(|k| k.kind == "far")
            .map_or(0, |k| k.flagged);
        let got = (
            e.precision.unwrap_or(0.0),
            e.recall.unwrap_or(0.0),
            e.average_precision.unwrap_or(0.0),
            far_found,
            e.better_parent_accuracy.unwrap_or(0.0),
        );
        eprintln!(
            "{name}: precision {:.3} recall {:.3} AP {:.3} far {} better-parent {:.3}",
            got.0, got.1, got.2, got.3, got.4
        );
        if got.0 < prec || got.1 < rec || got.2 < ap || got.3 < far || got.4 < bp {
            bad.push(format!(
                "{name}: got {got:?}, floors {:?}",
                (prec, rec, ap, far, bp)
            ));
        }
    }
    assert!(bad.is_empty(), "{}", bad.join("\n"));
}

#[test]
fn known_errors_flag_prints_the_same_figures() {
    let name = "wordnet-clothing-fitted";
    let dir = set_dir(name);
    let out = Command::new(env!("CARGO_BIN_EXE_treewright"))
        .args([
            "audit",
            dir.to_str().unwrap(),
            "--known-errors",
            dir.join("known-errors.json").to_str().unwrap(),
            "--format",
            "json",
        ])
        .output()
        .unwrap();
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let e = measure(name);
    assert_eq!(v["flagged"].as_u64(), Some(e.flagged as u64));
    assert_eq!(v["precision"].as_f64(), e.precision);
    assert_eq!(v["average_precision"].as_f64(), e.average_precision);
    // a bad file: the error names the file, the entry and the field
    let tmp = tempfile::tempdir().unwrap();
    let bad = tmp.path().join("k.json");
    std::fs::write(&bad, r#"[{"node": "no-such-id"}]"#).unwrap();
    let out = Command::new(env!("CARGO_BIN_EXE_treewright"))
        .args([
            "audit",
            dir.to_str().unwrap(),
            "--known-errors",
            bad.to_str().unwrap(),
        ])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(
        err.contains("k.json: entry 0: node: unknown phrase id \"no-such-id\""),
        "{err}"
    );
}
