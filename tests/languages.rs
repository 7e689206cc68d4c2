//! Labels in several languages, on the three-shop sample (`sample-projects/fernhollow-intl`,
//! invented data: English, German and Japanese labels).
//!
//! The expected labels come from the sample's `phrases.json` read here with `serde_json`
//! directly (not through the project loader), and the SKOS export is read back with oxttl's
//! Turtle parser, which shares no code with the export's serialiser path in this crate. The
//! integrity condition checked is S14 of the W3C SKOS Reference (W3C Recommendation,
//! 18 August 2009): at most one skos:prefLabel per language tag per resource.

use std::collections::{BTreeMap, BTreeSet};
use std::path::{Path, PathBuf};

use oxrdf::{Term, Triple};
use oxttl::TurtleParser;
use treewright::model::edit::Edit;
use treewright::model::export::{DEFAULT_BASE_IRI, Format, SKOS_NS};
use treewright::model::project::parse_skos_tree;
use treewright::model::workspace::Workspace;

fn sample() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("sample-projects/fernhollow-intl")
}

/// id → language → label, from the sample's phrases.json as written.
fn expected_labels() -> BTreeMap<String, BTreeMap<String, String>> {
    let text = std::fs::read_to_string(sample().join("phrases.json")).unwrap();
    let v: serde_json::Value = serde_json::from_str(&text).unwrap();
    v.as_array()
        .unwrap()
        .iter()
        .map(|r| {
            let labels = r["labels"]
                .as_object()
                .unwrap()
                .iter()
                .map(|(k, v)| (k.clone(), v.as_str().unwrap().to_string()))
                .collect();
            (r["id"].as_str().unwrap().to_string(), labels)
        })
        .collect()
}

/// concept IRI → (predicate local name → [(value, language)]).
type Labels = BTreeMap<String, BTreeMap<String, Vec<(String, String)>>>;

fn read_back(ttl: &str) -> Labels {
    let triples: Vec<Triple> = TurtleParser::new()
        .for_slice(ttl.as_bytes())
        .collect::<Result<_, _>>()
        .expect("the export is valid Turtle");
    let mut out: Labels = BTreeMap::new();
    for t in triples {
        let p = t.predicate.as_str();
        let Some(local) = p.strip_prefix(SKOS_NS) else {
            continue;
        };
        if let Term::Literal(l) = &t.object
            && let Some(lang) = l.language()
        {
            out.entry(t.subject.to_string())
                .or_default()
                .entry(local.to_string())
                .or_default()
                .push((l.value().to_string(), lang.to_string()));
        }
    }
    out
}

fn concept(id: &str) -> String {
    format!("<{DEFAULT_BASE_IRI}{id}>")
}

#[test]
fn the_sample_loads_with_three_languages() {
    let ws = Workspace::open(&sample()).unwrap();
    let t = &ws.project.phrases;
    let l = t.languages().expect("the sample names its languages");
    assert_eq!(l.default, "en");
    assert_eq!(l.languages(), vec!["en", "de", "ja"]);
    let eff = ws.effective().unwrap();
    for (id, labels) in expected_labels() {
        let p = t.get(&id).unwrap();
        for (lang, label) in &labels {
            assert_eq!(eff.label_in(p, lang), label, "{id}@{lang}");
        }
        // no Japanese label: the default language's shows
        if !labels.contains_key("ja") {
            assert_eq!(eff.label_in(p, "ja"), labels["en"]);
        }
    }
    // resolve (CLI and GUI look-up) finds a phrase by a label in any language
    assert_eq!(ws.resolve("多肉植物").unwrap(), "succulents");
    assert_eq!(ws.resolve("gießkanne").unwrap(), "watering-can");
}

#[test]
fn skos_export_has_one_pref_label_per_language_read_back_by_an_independent_parser() {
    let ws = Workspace::open(&sample()).unwrap();
    let ttl = ws
        .export(Format::Skos, DEFAULT_BASE_IRI, "Fernhollow three shops")
        .unwrap();
    let got = read_back(&ttl);
    for (id, labels) in expected_labels() {
        let c = &got[&concept(&id)];
        let pref = &c["prefLabel"];
        // S14: at most one prefLabel per language tag
        let tags: BTreeSet<&str> = pref.iter().map(|(_, l)| l.as_str()).collect();
        assert_eq!(tags.len(), pref.len(), "{id}: {pref:?}");
        let as_map: BTreeMap<String, String> =
            pref.iter().map(|(v, l)| (l.clone(), v.clone())).collect();
        assert_eq!(as_map, labels, "{id}");
    }
}

#[test]
fn renames_in_a_language_reach_every_export_and_merges_give_alt_labels_per_language() {
    let dir = tempfile::tempdir().unwrap();
    for f in [
        "project.json",
        "phrases.json",
        "embeddings.json",
        "tree.json",
    ] {
        std::fs::copy(sample().join(f), dir.path().join(f)).unwrap();
    }
    let mut ws = Workspace::open(dir.path()).unwrap();
    ws.edit(
        Edit::Rename {
            node: "fern".into(),
            label: "Echter Farn".into(),
            language: Some("DE".into()),
        },
        "ines",
        None,
    )
    .unwrap();
    // the same label again in that language is refused; a bad tag is refused naming it
    let same = ws.check_edit(&Edit::Rename {
        node: "fern".into(),
        label: "Echter Farn".into(),
        language: Some("de".into()),
    });
    assert!(same.is_err());
    let bad = ws
        .check_edit(&Edit::Rename {
            node: "fern".into(),
            label: "x".into(),
            language: Some("de_DE".into()),
        })
        .unwrap_err()
        .to_string();
    assert!(bad.contains("de_DE") && bad.contains("BCP 47"), "{bad}");
    ws.edit(
        Edit::Merge {
            sources: vec!["aloe".into()],
            into: "cactus".into(),
        },
        "ines",
        None,
    )
    .unwrap();
    // the stored edit carries the canonical tag
    let stored = serde_json::to_string(&ws.edits()[0]).unwrap();
    assert!(stored.contains(r#""language":"de""#), "{stored}");

    let got = read_back(&ws.export(Format::Skos, DEFAULT_BASE_IRI, "x").unwrap());
    let fern = &got[&concept("fern")]["prefLabel"];
    assert!(fern.contains(&("Echter Farn".into(), "de".into())));
    assert!(fern.contains(&("fern".into(), "en".into())));
    assert!(!fern.iter().any(|(v, _)| v == "Farn"));
    let alt: BTreeSet<(String, String)> = got[&concept("cactus")]["altLabel"]
        .iter()
        .cloned()
        .collect();
    let want: BTreeSet<(String, String)> = [("aloe", "en"), ("Aloe", "de"), ("アロエ", "ja")]
        .iter()
        .map(|(a, b)| (a.to_string(), b.to_string()))
        .collect();
    assert_eq!(alt, want);

    let csv = ws.export(Format::Csv, DEFAULT_BASE_IRI, "x").unwrap();
    let mut r = csv::Reader::from_reader(csv.as_bytes());
    let header: Vec<String> = r.headers().unwrap().iter().map(String::from).collect();
    assert_eq!(
        header,
        [
            "id", "label", "parent", "depth", "aliases", "status", "label@de", "label@ja"
        ]
    );
    let fern_row = r
        .records()
        .map(Result::unwrap)
        .find(|row| &row[0] == "fern")
        .unwrap();
    assert_eq!((&fern_row[6], &fern_row[7]), ("Echter Farn", "シダ"));

    let json: serde_json::Value =
        serde_json::from_str(&ws.export(Format::Json, DEFAULT_BASE_IRI, "x").unwrap()).unwrap();
    assert_eq!(json["default_language"], "en");
    assert_eq!(json["labels"]["fern"]["de"], "Echter Farn");
    assert_eq!(json["labels"]["fern"]["ja"], "シダ");

    // saved and re-opened: the language of the rename survives
    ws.save().unwrap();
    let ws2 = Workspace::open(dir.path()).unwrap();
    let p = ws2.project.phrases.get("fern").unwrap();
    assert_eq!(ws2.effective().unwrap().label_in(p, "de"), "Echter Farn");
}

#[test]
fn skos_input_matches_concepts_by_labels_in_any_language() {
    let ws = Workspace::open(&sample()).unwrap();
    // a taxonomy written elsewhere: no notations, German and Japanese labels only
    let mut ttl = format!("@prefix skos: <{SKOS_NS}> .\n");
    let labels = expected_labels();
    let tree = std::fs::read_to_string(sample().join("tree.json")).unwrap();
    let tree: serde_json::Value = serde_json::from_str(&tree).unwrap();
    for (i, (id, l)) in labels.iter().enumerate() {
        let lab = if i % 2 == 0 {
            format!("\"{}\"@de", l["de"].to_uppercase())
        } else {
            format!("\"{}\"@ja", l.get("ja").unwrap_or(&l["de"]))
        };
        ttl.push_str(&format!(
            "<urn:x:{id}> a skos:Concept ; skos:prefLabel {lab} .\n"
        ));
        if let Some(parent) = tree["parent"][id].as_str() {
            ttl.push_str(&format!("<urn:x:{id}> skos:broader <urn:x:{parent}> .\n"));
        }
    }
    let got = parse_skos_tree(ttl.as_bytes(), "other.ttl", &ws.project.phrases).unwrap();
    assert_eq!(got.report.matched, labels.len(), "{:?}", got.report);
    assert_eq!(got.tree.root, "garden-supplies");
    assert_eq!(got.tree.parent["cactus"], "succulents");
}

#[test]
fn a_label_equal_to_another_phrases_label_in_another_language_is_reported_not_merged() {
    // "gift"@en (gifts) and "Gift"@de (slug pellets: poison) fold to one key
    let ws = Workspace::open(&sample()).unwrap();
    let info = treewright::model::info::ProjectInfo::of(&ws.project);
    assert_eq!(info.label_clashes.len(), 1, "{:?}", info.label_clashes);
    let c = &info.label_clashes[0];
    assert!(c.cross_language);
    let ids: BTreeSet<&str> = [c.a.id.as_str(), c.b.id.as_str()].into();
    assert_eq!(ids, BTreeSet::from(["gifts", "slug-pellets"]));
    // nothing was merged
    let eff = ws.effective().unwrap();
    assert!(eff.aliases.iter().all(Vec::is_empty));
}

#[test]
fn the_cli_renames_in_a_language_and_refuses_a_malformed_tag() {
    let dir = tempfile::tempdir().unwrap();
    for f in [
        "project.json",
        "phrases.json",
        "embeddings.json",
        "tree.json",
    ] {
        std::fs::copy(sample().join(f), dir.path().join(f)).unwrap();
    }
    let run = |lang: &str| {
        std::process::Command::new(env!("CARGO_BIN_EXE_treewright"))
            .arg("edit")
            .arg(dir.path())
            .args(["rename", "fern", "Echter Farn", "--language", lang])
            .args(["--author", "ines"])
            .output()
            .unwrap()
    };
    let bad = run("de_DE");
    assert_eq!(bad.status.code(), Some(2));
    let err = String::from_utf8_lossy(&bad.stderr);
    assert!(err.contains("de_DE") && err.contains("BCP 47"), "{err}");
    let ok = run("de");
    assert!(
        ok.status.success(),
        "{}",
        String::from_utf8_lossy(&ok.stderr)
    );
    let ws = Workspace::open(dir.path()).unwrap();
    let p = ws.project.phrases.get("fern").unwrap();
    let eff = ws.effective().unwrap();
    assert_eq!(eff.label_in(p, "de"), "Echter Farn");
    assert_eq!(eff.label(p), "fern");
}

#[test]
fn two_renames_of_one_label_in_another_language_conflict_in_a_merge() {
    // broken twin: comparing only the default-language label (as before languages; tried by
    // editing merge.rs) reports an "order" conflict only, not that the labels disagree
    use treewright::model::edit::EditRecord;
    use treewright::model::merge::merge;
    let ws = Workspace::open(&sample()).unwrap();
    let rec = |label: &str, who: &str| EditRecord {
        edit: Edit::Rename {
            node: "fern".into(),
            label: label.into(),
            language: Some("de".into()),
        },
        author: who.into(),
        time: "2026-12-04T10:00:00Z".into(),
        note: None,
    };
    let base_tree = ws.base().unwrap();
    let phrases = &ws.project.phrases;
    let m = merge(
        base_tree,
        phrases,
        &[],
        &[rec("Echter Farn", "ana")],
        &[rec("Wurmfarn", "ben")],
    );
    assert_eq!(m.conflicts.len(), 1, "{:?}", m.conflicts);
    assert_eq!(m.conflicts[0].kinds, vec!["label".to_string()]);
}

/// The tree and picker search (`EffectiveTree::any_label_contains`) matches a label in any
/// language and nothing else; the labels are those of the sample's phrases.json (read by
/// eye: "Gießkanne", "じょうろ", "多肉植物"). Added for two mutants cargo-mutants reported
/// missed (the function replaced by `true` and by `false`).
#[test]
fn search_matches_a_label_in_any_language_and_nothing_else() {
    use treewright::model::lang::fold;
    let ws = Workspace::open(&sample()).unwrap();
    let eff = ws.effective().unwrap();
    let t = &ws.project.phrases;
    let can = t.get("watering-can").unwrap();
    let succulents = t.get("succulents").unwrap();
    assert!(
        eff.any_label_contains(can, &fold("KANNE", None)),
        "German label, any case"
    );
    assert!(
        eff.any_label_contains(can, &fold("じょう", None)),
        "Japanese label"
    );
    assert!(eff.any_label_contains(succulents, &fold("植物", None)));
    assert!(
        !eff.any_label_contains(can, &fold("植物", None)),
        "another phrase's label"
    );
    assert!(!eff.any_label_contains(succulents, &fold("no such label", None)));
}
