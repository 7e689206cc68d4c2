//! Helpers shared by the integration tests.
#![allow(dead_code)]

use std::fs;
use std::path::Path;

use ndarray::Array2;
use ndarray_npy::WriteNpyExt;

/// A valid 3-phrase, 2-dimensional diagonal project.
pub fn write_valid(dir: &Path) {
    fs::write(
        dir.join("project.json"),
        r#"{
  "format": "treewright-project",
  "version": 1,
  "name": "Fernhollow test",
  "phrases": "phrases.json",
  "embeddings": { "means": "means.npy", "variances": "variances.npy" },
  "users": "users.json",
  "tree": "tree.json",
  "overrides": "overrides.json"
}"#,
    )
    .unwrap();
    fs::write(
        dir.join("phrases.json"),
        r#"[{"id": "plants", "label": "plants"},
            {"label": "succulent"},
            {"id": "shade-loving", "label": "shade loving"}]"#,
    )
    .unwrap();
    write_npy2(
        &dir.join("means.npy"),
        &[[0.0, 0.0], [1.0, 0.5], [-1.0, 0.2]],
    );
    write_npy2(
        &dir.join("variances.npy"),
        &[[4.0, 4.0], [0.5, 0.4], [0.6, 0.3]],
    );
    fs::write(
        dir.join("users.json"),
        r#"[{"id": "u-balcony-grower", "label": "balcony grower", "mean": [0.5, 0.5], "variance": [1.0, 1.0]}]"#,
    )
    .unwrap();
    fs::write(
        dir.join("tree.json"),
        r#"{"root": "plants", "parent": {"succulent": "plants", "shade-loving": "plants"}}"#,
    )
    .unwrap();
}

pub fn write_npy2(path: &Path, rows: &[[f64; 2]]) {
    let flat: Vec<f64> = rows.iter().flatten().copied().collect();
    let a = Array2::from_shape_vec((rows.len(), 2), flat).unwrap();
    let mut buf = Vec::new();
    a.write_npy(&mut buf).unwrap();
    fs::write(path, buf).unwrap();
}

/// A temporary folder holding the valid project.
pub fn project() -> tempfile::TempDir {
    let d = tempfile::tempdir().unwrap();
    write_valid(d.path());
    d
}
pub mod workbench;
