//! `.npy` files written by NumPy itself (tests/data/npy/make.py, NumPy version in
//! tests/data/npy/versions.txt): C and Fortran order, little- and big-endian float32 and
//! float64, format versions 1, 2 and 3. Every one loads with the same numbers, row-major,
//! through the loader's parsers and through a whole project load.

use std::path::{Path, PathBuf};

use treewright::model::project::{NpyValues, Project, parse_npy2, parse_npy2_raw, parse_npy3};

mod common;

fn data() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/data/npy")
}

/// A[i, j] = (4 i + j) / 4 − 1.125, as make.py writes it (exact in float32).
fn expected_means() -> Vec<f64> {
    (0..12).map(|k| k as f64 / 4.0 - 1.125).collect()
}

fn means_files() -> Vec<PathBuf> {
    let mut v: Vec<PathBuf> = std::fs::read_dir(data())
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| {
            let n = p.file_name().unwrap().to_string_lossy();
            n.starts_with("means-") && n.ends_with(".npy")
        })
        .collect();
    v.sort();
    v
}

#[test]
fn every_numpy_layout_loads_with_the_same_numbers() {
    let files = means_files();
    // 2 orders × 4 dtypes (<f4, >f4, <f8, >f8) × 3 format versions
    assert_eq!(files.len(), 24, "{files:?}");
    for f in &files {
        let name = f.file_name().unwrap().to_string_lossy().into_owned();
        let bytes = std::fs::read(f).unwrap();
        let (n, d, v) =
            parse_npy2(&bytes, &name).unwrap_or_else(|e| panic!("{name} does not load: {e}"));
        assert_eq!((n, d), (3, 4), "{name}");
        assert_eq!(v, expected_means(), "{name}");
        // the raw reader keeps float32 files as float32
        let (_, _, raw) = parse_npy2_raw(&bytes, &name).unwrap();
        match raw {
            NpyValues::F32(x) => {
                assert!(name.contains("4-v"), "{name} read as float32");
                let w: Vec<f64> = x.into_iter().map(f64::from).collect();
                assert_eq!(w, expected_means(), "{name}");
            }
            NpyValues::F64(x) => {
                assert!(name.contains("8-v"), "{name} read as float64");
                assert_eq!(x, expected_means(), "{name}");
            }
        }
    }
}

#[test]
fn numpy_covariance_stacks_load_in_both_orders() {
    let want = [2.0, 0.5, 0.5, 1.0, 1.5, -0.25, -0.25, 0.75];
    for name in [
        "cov-C-le8-v1.npy",
        "cov-F-le8-v1.npy",
        "cov-C-be4-v2.npy",
        "cov-F-be4-v2.npy",
    ] {
        let bytes = std::fs::read(data().join(name)).unwrap();
        let (n, a, b, v) =
            parse_npy3(&bytes, name).unwrap_or_else(|e| panic!("{name} does not load: {e}"));
        assert_eq!((n, a, b), (2, 2, 2), "{name}");
        assert_eq!(v, want, "{name}");
    }
}

/// A whole project whose means and variances are NumPy's Fortran-ordered big-endian and
/// version-3 files loads the same Gaussians as one with little-endian C-ordered files.
#[test]
fn a_project_with_fortran_big_endian_files_loads_the_same_gaussians() {
    let load = |means: &str| {
        let dir = tempfile::tempdir().unwrap();
        common::write_valid(dir.path());
        // 3 phrases × 4 dimensions; variances = means² + 0.5 (written by the test, in C order)
        std::fs::copy(data().join(means), dir.path().join("means.npy")).unwrap();
        std::fs::write(
            dir.path().join("users.json"),
            r#"[{"id": "u-a", "label": "a", "mean": [0, 0, 0, 0], "variance": [1, 1, 1, 1]}]"#,
        )
        .unwrap();
        let var: Vec<[f64; 4]> = expected_means()
            .chunks(4)
            .map(|r| [0, 1, 2, 3].map(|j| r[j] * r[j] + 0.5))
            .collect();
        let flat: Vec<f64> = var.iter().flatten().copied().collect();
        let a = ndarray::Array2::from_shape_vec((3, 4), flat).unwrap();
        let mut buf = Vec::new();
        ndarray_npy::WriteNpyExt::write_npy(&a, &mut buf).unwrap();
        std::fs::write(dir.path().join("variances.npy"), buf).unwrap();
        let p = Project::load(dir.path()).unwrap_or_else(|e| panic!("{means}: {e}"));
        (0..3)
            .map(|i| p.gaussians.mean(i).to_vec())
            .collect::<Vec<_>>()
    };
    let reference = load("means-C-le8-v1.npy");
    for other in [
        "means-F-be4-v3.npy",
        "means-F-be8-v2.npy",
        "means-C-be4-v1.npy",
    ] {
        assert_eq!(load(other), reference, "{other}");
    }
}
