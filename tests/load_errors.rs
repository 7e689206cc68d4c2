//! Every class of malformed project input gets a clear error naming the file and the
//! phrase / row / field, and nothing is half-loaded.

use std::fs;
use std::path::Path;

use ndarray::{Array2, Array3};
use ndarray_npy::WriteNpyExt;
use treewright::model::{CovarianceKind, Project};

mod common;
use common::{project, write_npy2};

/// Load and return the error message (panics if it loads).
fn error_of(dir: &Path) -> String {
    match Project::load(dir) {
        Ok(_) => panic!("expected an error"),
        Err(e) => e.to_string(),
    }
}

fn assert_mentions(msg: &str, parts: &[&str]) {
    for p in parts {
        assert!(msg.contains(p), "message {msg:?} should mention {p:?}");
    }
}

#[test]
fn valid_project_loads() {
    let d = project();
    let p = Project::load(d.path()).unwrap();
    assert_eq!(p.phrases.len(), 3);
    assert_eq!(p.phrases.id(1), "succulent"); // derived from the label
    assert_eq!(p.gaussians.dim(), 2);
    assert_eq!(p.gaussians.kind(), CovarianceKind::Diagonal);
    assert_eq!(p.users.len(), 1);
    assert_eq!(p.tree.as_ref().unwrap().node_count(), 3);
    // loading through the manifest path works too
    assert!(Project::load(&d.path().join("project.json")).is_ok());
}

#[test]
fn nan_and_infinite_values() {
    let d = project();
    write_npy2(
        &d.path().join("means.npy"),
        &[[0.0, 0.0], [f64::NAN, 0.5], [-1.0, 0.2]],
    );
    assert_mentions(
        &error_of(d.path()),
        &["means.npy", "succulent", "row 1", "NaN"],
    );
    write_npy2(
        &d.path().join("means.npy"),
        &[[0.0, 0.0], [1.0, 0.5], [-1.0, 0.2]],
    );
    write_npy2(
        &d.path().join("variances.npy"),
        &[[4.0, 4.0], [0.5, 0.4], [0.6, f64::INFINITY]],
    );
    assert_mentions(
        &error_of(d.path()),
        &["variances.npy", "shade-loving", "inf"],
    );
}

#[test]
fn zero_and_negative_variances() {
    let d = project();
    write_npy2(
        &d.path().join("variances.npy"),
        &[[4.0, 4.0], [0.0, 0.4], [0.6, 0.3]],
    );
    assert_mentions(
        &error_of(d.path()),
        &["variances.npy", "succulent", "must be > 0"],
    );
    write_npy2(
        &d.path().join("variances.npy"),
        &[[4.0, -1.0], [0.5, 0.4], [0.6, 0.3]],
    );
    assert_mentions(
        &error_of(d.path()),
        &["variances.npy", "plants", "variance[1] is -1"],
    );
}

#[test]
fn non_positive_definite_covariance() {
    let d = project();
    fs::remove_file(d.path().join("variances.npy")).unwrap();
    let manifest = fs::read_to_string(d.path().join("project.json"))
        .unwrap()
        .replace(
            "\"variances\": \"variances.npy\"",
            "\"covariances\": \"cov.npy\"",
        );
    fs::write(d.path().join("project.json"), manifest).unwrap();
    // row 2 has eigenvalues 3 and −1
    let covs = [
        [[2.0, 0.5], [0.5, 1.0]],
        [[1.0, 0.0], [0.0, 1.0]],
        [[1.0, 2.0], [2.0, 1.0]],
    ];
    let flat: Vec<f64> = covs.iter().flatten().flatten().copied().collect();
    let a = Array3::from_shape_vec((3, 2, 2), flat).unwrap();
    let mut buf = Vec::new();
    a.write_npy(&mut buf).unwrap();
    fs::write(d.path().join("cov.npy"), &buf).unwrap();
    assert_mentions(
        &error_of(d.path()),
        &["cov.npy", "shade-loving", "not symmetric positive definite"],
    );
    // a valid full-covariance project loads, with log det from the Cholesky factor
    let mut good = covs;
    good[2] = [[1.0, 0.2], [0.2, 1.0]];
    let flat: Vec<f64> = good.iter().flatten().flatten().copied().collect();
    let a = Array3::from_shape_vec((3, 2, 2), flat).unwrap();
    let mut buf = Vec::new();
    a.write_npy(&mut buf).unwrap();
    fs::write(d.path().join("cov.npy"), &buf).unwrap();
    let p = Project::load(d.path()).unwrap();
    assert_eq!(p.gaussians.kind(), CovarianceKind::Full);
    assert!((p.gaussians.log_det(0) - (2.0f64 - 0.25).ln()).abs() < 1e-9);
}

#[test]
fn row_count_differs_from_phrase_count() {
    let d = project();
    write_npy2(&d.path().join("means.npy"), &[[0.0, 0.0], [1.0, 0.5]]);
    assert_mentions(&error_of(d.path()), &["means.npy", "2 rows", "3 phrases"]);
}

#[test]
fn dimension_mismatch_between_files() {
    let d = project();
    let a = Array2::<f64>::ones((3, 3));
    let mut buf = Vec::new();
    a.write_npy(&mut buf).unwrap();
    fs::write(d.path().join("variances.npy"), buf).unwrap();
    assert_mentions(
        &error_of(d.path()),
        &["variances.npy", "dimension 3", "dimension 2"],
    );
    // users in another dimension
    let d = project();
    fs::write(
        d.path().join("users.json"),
        r#"[{"id": "u-x", "label": "x", "mean": [0.5], "variance": [1.0]}]"#,
    )
    .unwrap();
    assert_mentions(&error_of(d.path()), &["users.json", "u-x", "dimension 2"]);
}

#[test]
fn duplicate_ids() {
    let d = project();
    fs::write(
        d.path().join("phrases.json"),
        r#"[{"id": "plants", "label": "plants"}, {"label": "succulent"}, {"id": "succulent", "label": "another"}]"#,
    )
    .unwrap();
    assert_mentions(
        &error_of(d.path()),
        &["phrases.json", "duplicate id \"succulent\"", "rows 1 and 2"],
    );
}

#[test]
fn unknown_ids_in_tree() {
    let d = project();
    fs::write(
        d.path().join("tree.json"),
        r#"{"root": "plants", "parent": {"succulent": "cacti"}}"#,
    )
    .unwrap();
    assert_mentions(
        &error_of(d.path()),
        &["tree.json", "unknown phrase id \"cacti\"", "succulent"],
    );
}

#[test]
fn cycles_in_tree() {
    let d = project();
    fs::write(
        d.path().join("tree.json"),
        r#"{"root": "plants", "parent": {"succulent": "shade-loving", "shade-loving": "succulent"}}"#,
    )
    .unwrap();
    assert_mentions(
        &error_of(d.path()),
        &["tree.json", "cycle", "succulent", "shade-loving"],
    );
}

#[test]
fn several_roots() {
    let d = project();
    fs::write(
        d.path().join("tree.json"),
        r#"{"root": "plants", "parent": {"succulent": "shade-loving"}}"#,
    )
    .unwrap();
    assert_mentions(
        &error_of(d.path()),
        &["tree.json", "several roots", "shade-loving"],
    );
    // in CSV form: two rows without a parent
    let d = project();
    let m = fs::read_to_string(d.path().join("project.json"))
        .unwrap()
        .replace("tree.json", "tree.csv");
    fs::write(d.path().join("project.json"), m).unwrap();
    fs::write(
        d.path().join("tree.csv"),
        "child,parent\nplants,\nsucculent,plants\nshade-loving,\n",
    )
    .unwrap();
    assert_mentions(&error_of(d.path()), &["tree.csv", "several roots"]);
    // a valid CSV edge list loads
    fs::write(
        d.path().join("tree.csv"),
        "child,parent\nsucculent,plants\nshade-loving,plants\n",
    )
    .unwrap();
    let p = Project::load(d.path()).unwrap();
    assert_eq!(p.tree.unwrap().node_count(), 3);
}

#[test]
fn missing_root() {
    let d = project();
    fs::write(
        d.path().join("tree.json"),
        r#"{"parent": {"succulent": "plants"}}"#,
    )
    .unwrap();
    assert_mentions(&error_of(d.path()), &["tree.json", "missing field `root`"]);
    fs::write(d.path().join("tree.json"), r#"{"root": "", "parent": {}}"#).unwrap();
    assert_mentions(&error_of(d.path()), &["tree.json", "no root"]);
}

#[test]
fn truncated_npy() {
    let d = project();
    let p = d.path().join("means.npy");
    let bytes = fs::read(&p).unwrap();
    fs::write(&p, &bytes[..bytes.len() - 8]).unwrap();
    assert_mentions(
        &error_of(d.path()),
        &["means.npy", "not a usable .npy array"],
    );
}

#[test]
fn non_numpy_file() {
    let d = project();
    fs::write(d.path().join("means.npy"), "id,x,y\nplants,0,0\n").unwrap();
    assert_mentions(
        &error_of(d.path()),
        &["means.npy", "not a usable .npy array"],
    );
    // integer arrays are refused with the element-type message
    let a = Array2::<i32>::zeros((3, 2));
    let mut buf = Vec::new();
    a.write_npy(&mut buf).unwrap();
    fs::write(d.path().join("means.npy"), buf).unwrap();
    assert_mentions(&error_of(d.path()), &["means.npy", "float32 or float64"]);
}

#[test]
fn json_syntax_error_has_line_and_column() {
    let d = project();
    fs::write(
        d.path().join("phrases.json"),
        "[\n  {\"label\": \"plants\"},\n  {\"label\" \"oops\"}\n]",
    )
    .unwrap();
    let msg = error_of(d.path());
    assert_mentions(&msg, &["phrases.json:3:12: expected `:`"]);
}

#[test]
fn paths_outside_the_project_are_refused() {
    let d = project();
    let m = fs::read_to_string(d.path().join("project.json")).unwrap();
    fs::write(
        d.path().join("project.json"),
        m.replace("\"phrases.json\"", "\"../phrases.json\""),
    )
    .unwrap();
    assert_mentions(
        &error_of(d.path()),
        &["project.json", "phrases", "leaves the project folder"],
    );
    fs::write(
        d.path().join("project.json"),
        m.replace("\"phrases.json\"", "\"/etc/passwd\""),
    )
    .unwrap();
    assert_mentions(&error_of(d.path()), &["project.json", "absolute path"]);
    // sub/../x stays inside and is fine
    fs::write(
        d.path().join("project.json"),
        m.replace("\"phrases.json\"", "\"sub/../phrases.json\""),
    )
    .unwrap();
    fs::create_dir(d.path().join("sub")).unwrap();
    assert!(Project::load(d.path()).is_ok());
}

#[test]
fn manifest_fields_are_checked() {
    let d = project();
    let m = fs::read_to_string(d.path().join("project.json")).unwrap();
    fs::write(
        d.path().join("project.json"),
        m.replace("\"version\": 1", "\"version\": 7"),
    )
    .unwrap();
    assert_mentions(&error_of(d.path()), &["project.json", "version", "7"]);
    fs::write(
        d.path().join("project.json"),
        m.replace("\"name\"", "\"nmae\""),
    )
    .unwrap();
    assert_mentions(
        &error_of(d.path()),
        &["project.json", "unknown field `nmae`"],
    );
}

#[test]
fn scales_convert_to_variance() {
    let d = project();
    let m = fs::read_to_string(d.path().join("project.json")).unwrap();
    fs::write(
        d.path().join("project.json"),
        m.replace("\"users\"", "\"scale\": \"std\",\n  \"users\""),
    )
    .unwrap();
    let p = Project::load(d.path()).unwrap();
    assert!((p.gaussians.variances(0)[0] - 16.0).abs() < 1e-6); // σ = 4 → σ² = 16
    fs::write(
        d.path().join("project.json"),
        m.replace("\"users\"", "\"scale\": \"log_variance\",\n  \"users\""),
    )
    .unwrap();
    let p = Project::load(d.path()).unwrap();
    assert!((p.gaussians.variances(0)[0] as f64 - 4f64.exp()).abs() < 1e-3);
    assert!((p.gaussians.log_det(0) - 8.0).abs() < 1e-5); // ln det = Σ ln σ² = 4 + 4
}

#[test]
fn json_embeddings_load_and_are_checked() {
    let d = project();
    let m = fs::read_to_string(d.path().join("project.json")).unwrap();
    let m = m.replace(
        "{ \"means\": \"means.npy\", \"variances\": \"variances.npy\" }",
        "\"embeddings.json\"",
    );
    fs::write(d.path().join("project.json"), m).unwrap();
    fs::write(
        d.path().join("embeddings.json"),
        r#"{"covariance": "diagonal", "means": [[0,0],[1,0.5],[-1,0.2]], "variances": [[4,4],[0.5,0.4],[0.6,0.3]]}"#,
    )
    .unwrap();
    let p = Project::load(d.path()).unwrap();
    assert_eq!(p.gaussians.dim(), 2);
    fs::write(
        d.path().join("embeddings.json"),
        r#"{"covariance": "diagonal", "means": [[0,0],[1],[-1,0.2]], "variances": [[4,4],[0.5,0.4],[0.6,0.3]]}"#,
    )
    .unwrap();
    assert_mentions(
        &error_of(d.path()),
        &["embeddings.json", "means[1]", "succulent", "expected 2"],
    );
    fs::write(
        d.path().join("embeddings.json"),
        r#"{"covariance": "full", "means": [[0,0],[1,0.5],[-1,0.2]], "covariances": [[[1,0],[0,1]],[[1,0],[0,1]],[[1,3],[3,1]]]}"#,
    )
    .unwrap();
    assert_mentions(
        &error_of(d.path()),
        &["embeddings.json", "shade-loving", "positive definite"],
    );
}

#[test]
fn size_limits_are_configurable_and_reported() {
    let d = project();
    let m = fs::read_to_string(d.path().join("project.json")).unwrap();
    let with =
        |limits: &str| m.replace("\"users\"", &format!("\"limits\": {limits},\n  \"users\""));
    fs::write(d.path().join("project.json"), with(r#"{"max_phrases": 2}"#)).unwrap();
    assert_mentions(
        &error_of(d.path()),
        &[
            "phrases.json",
            "3 phrases exceed the limit of 2",
            "limits.max_phrases",
        ],
    );
    fs::write(d.path().join("project.json"), with(r#"{"max_dim": 1}"#)).unwrap();
    assert_mentions(
        &error_of(d.path()),
        &["means.npy", "dimension 2 exceeds the limit of 1"],
    );
    fs::write(d.path().join("project.json"), with(r#"{"max_file_mb": 0}"#)).unwrap();
    assert_mentions(
        &error_of(d.path()),
        &["phrases.json", "exceeds the limit of 0 MiB"],
    );
    fs::write(
        d.path().join("project.json"),
        with(r#"{"max_phrases": 3, "max_dim": 2}"#),
    )
    .unwrap();
    assert!(Project::load(d.path()).is_ok());
    fs::write(d.path().join("project.json"), with(r#"{"max_rows": 3}"#)).unwrap();
    assert_mentions(
        &error_of(d.path()),
        &["project.json", "unknown field `max_rows`"],
    );
}

#[test]
fn a_project_without_a_tree_entry_records_one() {
    let d = project();
    let m = fs::read_to_string(d.path().join("project.json")).unwrap();
    fs::write(
        d.path().join("project.json"),
        m.replace("\"tree\": \"tree.json\",", ""),
    )
    .unwrap();
    let mut p = Project::load(d.path()).unwrap();
    assert!(p.tree.is_none());
    assert!(p.record_tree_in_manifest().unwrap());
    assert!(!p.record_tree_in_manifest().unwrap()); // only once
    assert!(d.path().join("project.json.bak").exists());
    // tree.json is still on disk from the fixture: the manifest now finds it
    assert!(Project::load(d.path()).unwrap().tree.is_some());
}
