//! A SKOS taxonomy (Turtle) read as the project's tree: matching rules, reports, refusals,
//! and the round trip through our own SKOS export. The SKOS vocabulary (skos:broader,
//! skos:narrower, skos:notation, skos:prefLabel, skos:altLabel) is the W3C SKOS Reference
//! (W3C Recommendation, 18 August 2009).

mod common;

use proptest::prelude::*;
use treewright::model::edit::{Edit, EditRecord};
use treewright::model::effective::EffectiveTree;
use treewright::model::export::export_skos;
use treewright::model::overrides::apply;
use treewright::model::phrase::PhraseRecord;
use treewright::model::project::{Project, parse_skos_tree};
use treewright::model::{PhraseId, PhraseTable, Tree};

const PREFIX: &str = "@prefix skos: <http://www.w3.org/2004/02/skos/core#> .\n@prefix ex: <http://example.org/t/> .\n";

fn table() -> PhraseTable {
    let recs: Vec<PhraseRecord> = [
        ("plants", "Plants"),
        ("succulent", "succulent"),
        ("shade-loving", "shade loving"),
        ("compost", "Peat free compost"),
    ]
    .iter()
    .map(|(i, l)| PhraseRecord {
        id: Some(i.to_string()),
        label: l.to_string(),
    })
    .collect();
    PhraseTable::from_records(&recs).unwrap()
}

#[test]
fn matches_by_notation_then_pref_then_alt_label_ignoring_case_and_space() {
    let ttl = format!(
        "{PREFIX}
ex:a a skos:Concept ; skos:notation \"plants\" ; skos:prefLabel \"Something else\"@en .
ex:b a skos:Concept ; skos:prefLabel \"  SUCCULENT \"@en ; skos:broader ex:a .
ex:c a skos:Concept ; skos:prefLabel \"Shady corner\"@en ; skos:altLabel \"Shade\tLoving\"@en .
ex:a skos:narrower ex:c .
ex:d a skos:Concept ; skos:prefLabel \"Bulbs\"@en ; skos:broader ex:a .
"
    );
    let t = table();
    let got = parse_skos_tree(ttl.as_bytes(), "tax.ttl", &t).unwrap();
    assert_eq!(got.tree.root, "plants");
    assert_eq!(got.tree.parent.len(), 2);
    assert_eq!(got.tree.parent["succulent"], "plants");
    assert_eq!(got.tree.parent["shade-loving"], "plants");
    assert_eq!(got.report.concepts, 4);
    assert_eq!(got.report.matched, 3);
    assert_eq!(
        got.report.unmatched_concepts,
        vec!["<http://example.org/t/d> (\"Bulbs\")"]
    );
    assert_eq!(got.report.unmatched_phrases, vec!["compost"]);
}

#[test]
fn first_broader_in_document_order_is_kept_and_reported() {
    let ttl = format!(
        "{PREFIX}
ex:a skos:notation \"plants\" .
ex:s skos:notation \"shade-loving\" ; skos:broader ex:a .
ex:b skos:notation \"succulent\" ; skos:broader ex:s , ex:a .
"
    );
    let got = parse_skos_tree(ttl.as_bytes(), "tax.ttl", &table()).unwrap();
    assert_eq!(got.tree.parent["succulent"], "shade-loving");
    assert_eq!(got.report.several_broader.len(), 1);
    assert!(got.report.several_broader[0].contains("kept <http://example.org/t/s>"));
}

#[test]
fn children_of_an_unmatched_concept_hang_from_its_nearest_matched_ancestor() {
    let ttl = format!(
        "{PREFIX}
ex:a skos:notation \"plants\" .
ex:x skos:prefLabel \"Houseplants\" ; skos:broader ex:a .
ex:b skos:notation \"succulent\" ; skos:broader ex:x .
"
    );
    let got = parse_skos_tree(ttl.as_bytes(), "tax.ttl", &table()).unwrap();
    assert_eq!(got.tree.parent["succulent"], "plants");
}

#[test]
fn cycles_several_roots_and_bad_turtle_are_refused_naming_the_file() {
    let t = table();
    let cyc = format!(
        "{PREFIX}
ex:a skos:notation \"plants\" ; skos:broader ex:b .
ex:b skos:notation \"succulent\" ; skos:broader ex:a .
"
    );
    let e = parse_skos_tree(cyc.as_bytes(), "tax.ttl", &t)
        .unwrap_err()
        .to_string();
    assert!(e.starts_with("tax.ttl: skos:broader: cycle"), "{e}");
    let two = format!(
        "{PREFIX}
ex:a a skos:Concept ; skos:notation \"plants\" .
ex:b a skos:Concept ; skos:notation \"succulent\" .
"
    );
    let e = parse_skos_tree(two.as_bytes(), "tax.ttl", &t)
        .unwrap_err()
        .to_string();
    assert!(e.contains("several top concepts"), "{e}");
    let e = parse_skos_tree(b"ex:a ex:b", "tax.ttl", &t)
        .unwrap_err()
        .to_string();
    assert!(e.starts_with("tax.ttl: turtle:"), "{e}");
    let none = format!("{PREFIX}ex:a a skos:Concept ; skos:prefLabel \"Bulbs\" .\n");
    let e = parse_skos_tree(none.as_bytes(), "tax.ttl", &t)
        .unwrap_err()
        .to_string();
    assert!(e.contains("none of the 1 concepts"), "{e}");
}

#[test]
fn a_project_whose_tree_is_a_ttl_file_loads_it() {
    let d = common::project();
    std::fs::write(
        d.path().join("taxonomy.ttl"),
        format!(
            "{PREFIX}
ex:a skos:notation \"plants\" .
ex:a skos:narrower ex:b .
ex:b skos:prefLabel \"Succulent\" .
ex:c skos:prefLabel \"shade loving\" ; skos:broader ex:b .
"
        ),
    )
    .unwrap();
    let m = d.path().join("project.json");
    let s = std::fs::read_to_string(&m)
        .unwrap()
        .replace("\"tree.json\"", "\"taxonomy.ttl\"");
    std::fs::write(&m, s).unwrap();
    let p = Project::load(d.path()).unwrap();
    let tree = p.tree.unwrap();
    let file = tree.to_file(&p.phrases);
    assert_eq!(file.root, "plants");
    assert_eq!(file.parent["shade-loving"], "succulent");
}

fn arb_project() -> impl Strategy<Value = (PhraseTable, Tree, Vec<EditRecord>)> {
    (2usize..25)
        .prop_flat_map(|n| {
            (
                Just(n),
                prop::collection::vec(any::<u32>(), n - 1),
                prop::collection::vec((0u8..4, 0usize..25, 0usize..25), 0..15),
            )
        })
        .prop_map(|(n, picks, raw)| {
            let recs: Vec<PhraseRecord> = (0..n)
                .map(|i| PhraseRecord {
                    id: Some(match i % 3 {
                        0 => format!("p{i}"),
                        1 => format!("ähre/{i}#x"),
                        _ => format!("slug resistant {i}"),
                    }),
                    label: match i % 3 {
                        0 => format!("tag {}", i % 5),
                        1 => format!("\"shade\" loving\n{i}"),
                        _ => format!("Rasen & Moos {i}"),
                    },
                })
                .collect();
            let t = PhraseTable::from_records(&recs).unwrap();
            let edges: Vec<(PhraseId, PhraseId)> = picks
                .iter()
                .enumerate()
                .map(|(i, &r)| ((i + 1) as PhraseId, r % (i as u32 + 1)))
                .collect();
            let tree = Tree::from_edges(&t, 0, &edges).unwrap();
            let id = |i: usize| t.id((i % n) as PhraseId).to_string();
            let edits = raw
                .into_iter()
                .map(|(k, a, b)| EditRecord {
                    edit: match k {
                        0 => Edit::Merge {
                            sources: vec![id(a)],
                            into: id(b),
                        },
                        1 => Edit::Exclude { node: id(a) },
                        2 => Edit::Rename {
                            node: id(a),
                            label: t.label((b % n) as PhraseId).to_string(),
                            language: None,
                        },
                        _ => Edit::Reparent {
                            node: id(a),
                            parent: id(b),
                        },
                    },
                    author: "prop".into(),
                    time: "2026-12-04T00:00:00Z".into(),
                    note: None,
                })
                .collect();
            (t, tree, edits)
        })
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(64))]
    /// Round trip: our SKOS export of the effective tree, read back as a tree, is the
    /// effective tree (merged and excluded phrases come back unplaced, as they are there).
    #[test]
    fn export_read_back_is_the_effective_tree((t, tree, edits) in arb_project()) {
        let (eff, _): (EffectiveTree, _) = apply(&tree, &t, &edits);
        let ttl = export_skos(&eff, &t, "http://example.org/fernhollow/", "Fernhollow").unwrap();
        let back = parse_skos_tree(ttl.as_bytes(), "export.ttl", &t)
            .map_err(|e| TestCaseError::fail(format!("{e}\n{ttl}")))?;
        prop_assert_eq!(back.tree, eff.tree.to_file(&t));
        prop_assert!(back.report.unmatched_concepts.is_empty());
        prop_assert!(back.report.several_broader.is_empty());
    }
}

#[test]
fn cli_diff_against_a_skos_taxonomy_lists_matches_and_moves() {
    let d = common::project();
    let ttl = d.path().join("tax.ttl");
    std::fs::write(
        &ttl,
        format!(
            "{PREFIX}
ex:a skos:notation \"plants\" .
ex:s skos:prefLabel \"Shade Loving\" ; skos:broader ex:a .
ex:b skos:prefLabel \"succulent\" ; skos:broader ex:s , ex:a .
ex:x skos:prefLabel \"Bulbs\" ; skos:broader ex:a .
"
        ),
    )
    .unwrap();
    let o = std::process::Command::new(env!("CARGO_BIN_EXE_treewright"))
        .arg("diff")
        .arg(d.path())
        .arg("--against")
        .arg(&ttl)
        .output()
        .unwrap();
    let out = String::from_utf8_lossy(&o.stdout);
    assert!(
        o.status.success(),
        "{out}{}",
        String::from_utf8_lossy(&o.stderr)
    );
    assert!(out.contains("4 concepts, 3 matched to phrases"), "{out}");
    assert!(
        out.contains("concepts matching no phrase (1):\n  <http://example.org/t/x> (\"Bulbs\")"),
        "{out}"
    );
    assert!(out.contains("phrases matching no concept (0)"), "{out}");
    assert!(
        out.contains("concepts with several broader concepts (1):"),
        "{out}"
    );
    // the project's tree has succulent under plants; the taxonomy under shade-loving
    assert!(
        out.contains(
            "effective tree against the taxonomy (1):\n  moved     succulent: shade-loving → plants"
        ),
        "{out}"
    );
}

#[test]
fn build_never_writes_over_a_skos_taxonomy() {
    let d = common::project();
    let ttl = d.path().join("taxonomy.ttl");
    let text = format!(
        "{PREFIX}ex:a skos:notation \"plants\" .\nex:b skos:notation \"succulent\" ; skos:broader ex:a .\n"
    );
    std::fs::write(&ttl, &text).unwrap();
    let m = d.path().join("project.json");
    let s = std::fs::read_to_string(&m)
        .unwrap()
        .replace("\"tree.json\"", "\"taxonomy.ttl\"");
    std::fs::write(&m, s).unwrap();
    let o = std::process::Command::new(env!("CARGO_BIN_EXE_treewright"))
        .arg("build")
        .arg(d.path())
        .output()
        .unwrap();
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(!o.status.success());
    assert!(err.contains("is a SKOS taxonomy"), "{err}");
    assert_eq!(std::fs::read_to_string(&ttl).unwrap(), text);
}
