//! The SKOS export parsed back with oxttl's own Turtle parser gives the same tree, and meets
//! the integrity conditions of the W3C SKOS Reference (W3C Recommendation, 18 August 2009)
//! that apply to it: S13 (skos:prefLabel and skos:altLabel are disjoint) and S14 (at most one
//! skos:prefLabel per language tag per resource); skos:broader has no cycle; one
//! skos:ConceptScheme whose top concept is the root (skos:hasTopConcept / skos:topConceptOf).

use std::collections::{BTreeMap, BTreeSet};

use oxrdf::{Term, Triple};
use oxttl::TurtleParser;
use proptest::prelude::*;
use treewright::model::edit::{Edit, EditRecord};
use treewright::model::effective::EffectiveTree;
use treewright::model::export::{SKOS_NS, export_skos};
use treewright::model::overrides::apply;
use treewright::model::phrase::PhraseRecord;
use treewright::model::{PhraseId, PhraseTable, Tree};

const RDF_TYPE: &str = "http://www.w3.org/1999/02/22-rdf-syntax-ns#type";

fn skos(local: &str) -> String {
    format!("{SKOS_NS}{local}")
}

/// Ids and labels that need escaping in IRIs and in Turtle strings.
fn arb_project() -> impl Strategy<Value = (PhraseTable, Tree, Vec<EditRecord>)> {
    (2usize..20)
        .prop_flat_map(|n| {
            (
                Just(n),
                prop::collection::vec(any::<u32>(), n - 1),
                prop::collection::vec((0u8..4, 0usize..20, 0usize..20), 0..15),
            )
        })
        .prop_map(|(n, picks, raw)| {
            let recs: Vec<PhraseRecord> = (0..n)
                .map(|i| PhraseRecord {
                    id: Some(match i % 4 {
                        0 => format!("p{i}"),
                        1 => format!("peat free {i}"),
                        2 => format!("ähre/{i}#x"),
                        _ => format!("slug-resistant-{i}"),
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
                    time: "2026-12-02T00:00:00Z".into(),
                    note: None,
                })
                .collect();
            (t, tree, edits)
        })
}

fn iri(t: &Term) -> Option<String> {
    match t {
        Term::NamedNode(n) => Some(n.as_str().to_string()),
        _ => None,
    }
}

fn check_round_trip(t: &PhraseTable, eff: &EffectiveTree, ttl: &str) -> Result<(), TestCaseError> {
    let triples: Vec<Triple> = TurtleParser::new()
        .for_slice(ttl)
        .collect::<Result<_, _>>()
        .map_err(|e| TestCaseError::fail(format!("{e}\n{ttl}")))?;
    let mut types: BTreeMap<String, BTreeSet<String>> = BTreeMap::new();
    let mut notation: BTreeMap<String, String> = BTreeMap::new();
    let mut pref: BTreeMap<String, Vec<(String, Option<String>)>> = BTreeMap::new();
    let mut alt: BTreeMap<String, BTreeSet<String>> = BTreeMap::new();
    let mut broader: BTreeMap<String, Vec<String>> = BTreeMap::new();
    let mut narrower: BTreeSet<(String, String)> = BTreeSet::new();
    let mut has_top: Vec<(String, String)> = Vec::new();
    let mut top_of: Vec<(String, String)> = Vec::new();
    for tr in &triples {
        let s = tr.subject.to_string();
        let s = s.trim_start_matches('<').trim_end_matches('>').to_string();
        let p = tr.predicate.as_str();
        match (&tr.object, p) {
            (o, _) if p == RDF_TYPE => {
                types
                    .entry(s)
                    .or_default()
                    .insert(iri(o).unwrap_or_default());
            }
            (Term::Literal(l), _) if p == skos("notation") => {
                notation.insert(s, l.value().to_string());
            }
            (Term::Literal(l), _) if p == skos("prefLabel") => {
                pref.entry(s)
                    .or_default()
                    .push((l.value().to_string(), l.language().map(str::to_string)));
            }
            (Term::Literal(l), _) if p == skos("altLabel") => {
                prop_assert_eq!(l.language(), Some("en"));
                alt.entry(s).or_default().insert(l.value().to_string());
            }
            (o, _) if p == skos("broader") => broader.entry(s).or_default().push(iri(o).unwrap()),
            (o, _) if p == skos("narrower") => {
                narrower.insert((s, iri(o).unwrap()));
            }
            (o, _) if p == skos("hasTopConcept") => has_top.push((s, iri(o).unwrap())),
            (o, _) if p == skos("topConceptOf") => top_of.push((s, iri(o).unwrap())),
            _ => {}
        }
    }
    let schemes: Vec<&String> = types
        .iter()
        .filter(|(_, ts)| ts.contains(&skos("ConceptScheme")))
        .map(|(s, _)| s)
        .collect();
    prop_assert_eq!(schemes.len(), 1, "exactly one skos:ConceptScheme");
    let scheme = schemes[0].clone();
    let concepts: BTreeSet<String> = types
        .iter()
        .filter(|(_, ts)| ts.contains(&skos("Concept")))
        .map(|(s, _)| s.clone())
        .collect();
    // same node set, by the ids carried in skos:notation; excluded phrases are absent
    let id_of = |c: &str| notation.get(c).cloned().unwrap_or_default();
    let got_ids: BTreeSet<String> = concepts.iter().map(|c| id_of(c)).collect();
    let want_ids: BTreeSet<String> = eff
        .tree
        .preorder()
        .into_iter()
        .map(|p| t.id(p).to_string())
        .collect();
    prop_assert_eq!(&got_ids, &want_ids);
    prop_assert_eq!(concepts.len(), want_ids.len());
    let root_iri = concepts
        .iter()
        .find(|c| id_of(c) == t.id(eff.tree.root()))
        .cloned()
        .unwrap();
    prop_assert_eq!(has_top, vec![(scheme.clone(), root_iri.clone())]);
    prop_assert_eq!(top_of, vec![(root_iri.clone(), scheme.clone())]);
    for c in &concepts {
        let p = t.get(&id_of(c)).unwrap();
        // S14: at most one prefLabel per language tag (here: exactly one, tagged "en")
        let labels = pref.get(c).cloned().unwrap_or_default();
        let mut langs: Vec<Option<String>> = labels.iter().map(|(_, l)| l.clone()).collect();
        langs.sort();
        langs.dedup();
        prop_assert_eq!(langs.len(), labels.len(), "S14 violated on {}", c);
        prop_assert_eq!(
            labels,
            vec![(eff.label(p).to_string(), Some("en".to_string()))]
        );
        // S13: prefLabel and altLabel disjoint
        let alts = alt.get(c).cloned().unwrap_or_default();
        prop_assert!(!alts.contains(eff.label(p)), "S13 violated on {}", c);
        // altLabels are exactly the alias labels (other than the prefLabel)
        let want_alts: BTreeSet<String> = eff.aliases[p as usize]
            .iter()
            .map(|&a| eff.label(a).to_string())
            .filter(|l| l != eff.label(p))
            .collect();
        prop_assert_eq!(alts, want_alts);
        // broader: the parent, at most one; narrower is its exact inverse
        let b = broader.get(c).cloned().unwrap_or_default();
        let want_parent = eff.tree.parent(p).map(|x| t.id(x).to_string());
        prop_assert_eq!(
            b.iter().map(|x| id_of(x)).collect::<Vec<_>>(),
            want_parent.into_iter().collect::<Vec<_>>()
        );
        for x in &b {
            prop_assert!(narrower.contains(&(x.clone(), c.clone())));
        }
    }
    prop_assert_eq!(narrower.len(), concepts.len() - 1);
    // no skos:broader cycle
    for c in &concepts {
        let mut cur = c.clone();
        let mut steps = 0;
        while let Some(b) = broader.get(&cur).and_then(|v| v.first()) {
            cur = b.clone();
            steps += 1;
            prop_assert!(steps <= concepts.len(), "broader cycle through {}", c);
        }
        prop_assert_eq!(&cur, &root_iri);
    }
    Ok(())
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 400, ..ProptestConfig::default() })]

    #[test]
    fn skos_round_trip_and_integrity((t, base, edits) in arb_project()) {
        let (eff, _) = apply(&base, &t, &edits);
        for base_iri in ["http://example.org/fernhollow/", "urn:x-fernhollow:tags#"] {
            let ttl = export_skos(&eff, &t, base_iri, "Fernhollow \"spring\" tags")
                .map_err(|e| TestCaseError::fail(e.to_string()))?;
            check_round_trip(&t, &eff, &ttl)?;
        }
    }
}

#[test]
fn alias_with_the_same_label_as_its_target_is_not_an_alt_label() {
    // S13 (W3C SKOS Reference 2009): a label may not be both preferred and alternative
    let recs: Vec<PhraseRecord> = [("root", "garden"), ("a", "succulent"), ("b", "succulent")]
        .iter()
        .map(|(i, l)| PhraseRecord {
            id: Some(i.to_string()),
            label: l.to_string(),
        })
        .collect();
    let t = PhraseTable::from_records(&recs).unwrap();
    let base = Tree::from_edges(&t, 0, &[(1, 0), (2, 0)]).unwrap();
    let merge = EditRecord {
        edit: Edit::Merge {
            sources: vec!["b".into()],
            into: "a".into(),
        },
        author: "ines".into(),
        time: "2026-12-02T00:00:00Z".into(),
        note: None,
    };
    let (eff, p) = apply(&base, &t, &[merge]);
    assert!(p.is_empty());
    let ttl = export_skos(&eff, &t, "http://example.org/t/", "t").unwrap();
    assert!(!ttl.contains("altLabel"), "{ttl}");
}
