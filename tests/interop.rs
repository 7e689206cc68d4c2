//! Files actually written by NumPy 2.4.6, pandas 3.1.1 / pyarrow 26.0.1 and rdflib 7.6.0
//! (made by benches/interop/make.py, committed in tests/data/interop/), loaded as projects.

use std::fs;
use std::path::Path;

use treewright::model::project::{Project, load_skos_tree, parse_npy2};

const DIR: &str = "tests/data/interop";

/// A project folder with the fixture phrases, `embeddings` as given, and optionally a tree.
fn project(embeddings: &str, files: &[&str], tree: Option<&str>) -> tempfile::TempDir {
    let d = tempfile::tempdir().unwrap();
    for f in files.iter().chain(["phrases.json"].iter()) {
        fs::copy(Path::new(DIR).join(f), d.path().join(f)).unwrap();
    }
    let tree = tree.map_or(String::new(), |t| {
        fs::copy(Path::new(DIR).join(t), d.path().join(t)).unwrap();
        format!(", \"tree\": \"{t}\"")
    });
    fs::write(
        d.path().join("project.json"),
        format!(
            r#"{{"format": "treewright-project", "version": 1, "name": "Fernhollow interop",
 "phrases": "phrases.json", "embeddings": {embeddings}{tree}}}"#
        ),
    )
    .unwrap();
    d
}

#[test]
fn numpy_savez_and_savez_compressed_archives_load_alike() {
    let plain = project(
        r#"{"npz": "emb_savez.npz", "means": "mu", "variances": "var"}"#,
        &["emb_savez.npz"],
        None,
    );
    let packed = project(
        r#"{"npz": "emb_savez_compressed.npz", "means": "mu", "variances": "var"}"#,
        &["emb_savez_compressed.npz"],
        None,
    );
    let a = Project::load(plain.path()).unwrap();
    let b = Project::load(packed.path()).unwrap();
    assert_eq!((a.gaussians.len(), a.gaussians.dim()), (5, 3));
    for i in 0..5 {
        // float32 archive vs float64 archive of the same values: equal at f32 precision
        assert_eq!(a.gaussians.mean(i), b.gaussians.mean(i));
        assert_eq!(a.gaussians.variances(i), b.gaussians.variances(i));
    }
}

#[test]
fn rdflib_skos_taxonomy_reads_as_the_tree() {
    let d = project(
        r#"{"npz": "emb_savez.npz", "means": "mu", "variances": "var"}"#,
        &["emb_savez.npz"],
        Some("taxonomy.ttl"),
    );
    let p = Project::load(d.path()).unwrap();
    let t = p.tree.as_ref().unwrap().to_file(&p.phrases);
    assert_eq!(t.root, "plants");
    // altLabel "Succulent" → succulent; prefLabel "Shade Loving" → "shade loving";
    // "Soil and compost" matches nothing, so "Compost" hangs from Plants
    assert_eq!(t.parent["succulent"], "plants");
    assert_eq!(t.parent["shade-loving"], "plants");
    assert_eq!(t.parent["compost"], "plants");
    assert_eq!(t.parent["peat-free-compost"], "compost");
    let s = load_skos_tree(
        &d.path().join("taxonomy.ttl"),
        &p.phrases,
        &Default::default(),
    )
    .unwrap();
    assert_eq!((s.report.concepts, s.report.matched), (6, 5));
    assert_eq!(s.report.unmatched_concepts.len(), 1);
    assert!(s.report.unmatched_concepts[0].contains("Soil and compost"));
    assert!(s.report.unmatched_phrases.is_empty());
}

#[test]
fn numpy_occurrence_matrix_and_ids() {
    let bytes = fs::read(Path::new(DIR).join("occurrences.npy")).unwrap();
    let (n, d, _) = parse_npy2(&bytes, "occurrences.npy").unwrap();
    let ids: Vec<String> =
        serde_json::from_slice(&fs::read(Path::new(DIR).join("occurrences_ids.json")).unwrap())
            .unwrap();
    assert_eq!((n, d), (81, 4));
    assert_eq!(ids.len(), n);
}

#[test]
fn pandas_parquet_embeddings_match_by_id_and_can_supply_the_phrases() {
    let reference = Project::load(
        project(
            r#"{"npz": "emb_savez_compressed.npz", "means": "mu", "variances": "var"}"#,
            &["emb_savez_compressed.npz"],
            None,
        )
        .path(),
    )
    .unwrap();
    // phrases from phrases.json; table rows are in another order than the phrases
    let a = project(
        r#"{"parquet": "emb.parquet", "means": "mean", "variances": "var"}"#,
        &["emb.parquet"],
        None,
    );
    // phrases from the same table's id and label columns
    let b = project(
        r#"{"parquet": "emb.parquet", "id": "phrase_id", "label": "label", "means": "mean", "variances": "var"}"#,
        &["emb.parquet"],
        None,
    );
    let m = b.path().join("project.json");
    let s = fs::read_to_string(&m)
        .unwrap()
        .replace("\"phrases.json\"", "\"emb.parquet\"");
    fs::write(&m, s).unwrap();
    let pa = Project::load(a.path()).unwrap();
    let pb = Project::load(b.path()).unwrap();
    for i in 0..5 {
        assert_eq!(pa.gaussians.mean(i), reference.gaussians.mean(i));
        assert_eq!(pa.gaussians.variances(i), reference.gaussians.variances(i));
        let id = reference.phrases.id(i as u32);
        let j = pb.phrases.get(id).unwrap() as usize;
        assert_eq!(
            pb.phrases.label(j as u32),
            reference.phrases.label(i as u32)
        );
        assert_eq!(pb.gaussians.mean(j), reference.gaussians.mean(i));
    }
}

#[test]
fn parquet_errors_name_the_file_row_and_column() {
    let d = project(
        r#"{"parquet": "emb.parquet", "means": "mu", "variances": "var"}"#,
        &["emb.parquet"],
        None,
    );
    let e = Project::load(d.path()).unwrap_err().to_string();
    assert!(
        e.contains("emb.parquet: column \"mu\": no such column (the table has: phrase_id, label, mean, var)"),
        "{e}"
    );
    let d = project(
        r#"{"parquet": "emb.parquet", "id": "label", "means": "mean", "variances": "var"}"#,
        &["emb.parquet"],
        None,
    );
    let e = Project::load(d.path()).unwrap_err().to_string();
    assert!(
        e.contains("emb.parquet: row 0 column \"label\": \"peat free compost\" is not a phrase id"),
        "{e}"
    );
    let d = project(
        r#"{"parquet": "emb.parquet", "means": "mean", "variances": "label"}"#,
        &["emb.parquet"],
        None,
    );
    let e = Project::load(d.path()).unwrap_err().to_string();
    assert!(
        e.contains("row 0 column \"label\": expected a list of floats"),
        "{e}"
    );
}

#[test]
fn rdflib_rdf_xml_taxonomy_reads_as_the_same_tree() {
    let d = project(
        r#"{"npz": "emb_savez.npz", "means": "mu", "variances": "var"}"#,
        &["emb_savez.npz", "taxonomy.ttl"],
        Some("taxonomy.rdf"),
    );
    let p = Project::load(d.path()).unwrap();
    let from_xml = p.tree.as_ref().unwrap().to_file(&p.phrases);
    let from_ttl = load_skos_tree(
        &d.path().join("taxonomy.ttl"),
        &p.phrases,
        &Default::default(),
    )
    .unwrap();
    assert_eq!(from_xml, from_ttl.tree);
    assert_eq!(from_xml.parent["peat-free-compost"], "compost");
}
