//! Embeddings from a NumPy `.npz` archive (plain `np.savez` and compressed
//! `np.savez_compressed` layouts, written here with ndarray-npy's NpzWriter): the same
//! Gaussians as the equivalent `.npy` pair, and errors naming the archive member.

mod common;

use std::fs;
use std::path::Path;

use ndarray::{Array2, Array3};
use ndarray_npy::NpzWriter;
use treewright::model::project::Project;

const MEANS: [[f64; 2]; 3] = [[0.0, 0.0], [1.0, 0.5], [-1.0, 0.2]];
const VARS: [[f64; 2]; 3] = [[4.0, 4.0], [0.5, 0.4], [0.6, 0.3]];

fn arr(rows: &[[f64; 2]]) -> Array2<f32> {
    Array2::from_shape_fn((rows.len(), 2), |(i, j)| rows[i][j] as f32)
}

fn write_npz(path: &Path, compressed: bool, arrays: &[(&str, Array2<f32>)]) {
    let f = fs::File::create(path).unwrap();
    let mut w = if compressed {
        NpzWriter::new_compressed(f)
    } else {
        NpzWriter::new(f)
    };
    for (name, a) in arrays {
        w.add_array(*name, a).unwrap();
    }
    w.finish().unwrap();
}

fn use_npz(dir: &Path, embeddings: &str) {
    let m = dir.join("project.json");
    let s = fs::read_to_string(&m).unwrap().replace(
        r#"{ "means": "means.npy", "variances": "variances.npy" }"#,
        embeddings,
    );
    fs::write(&m, s).unwrap();
}

#[test]
fn plain_and_compressed_npz_load_like_the_npy_pair() {
    let reference = Project::load(common::project().path()).unwrap();
    for compressed in [false, true] {
        let d = common::project();
        write_npz(
            &d.path().join("emb.npz"),
            compressed,
            &[("mu", arr(&MEANS)), ("var", arr(&VARS))],
        );
        use_npz(
            d.path(),
            r#"{"npz": "emb.npz", "means": "mu", "variances": "var"}"#,
        );
        let p = Project::load(d.path()).unwrap();
        assert_eq!(p.gaussians.len(), 3);
        for i in 0..3 {
            assert_eq!(p.gaussians.mean(i), reference.gaussians.mean(i));
            assert_eq!(p.gaussians.variances(i), reference.gaussians.variances(i));
        }
        // the manifest round-trips in the npz form
        let again = serde_json::to_string(&p.manifest.embeddings).unwrap();
        assert!(again.contains("\"npz\":\"emb.npz\""), "{again}");
    }
}

#[test]
fn full_covariances_from_npz() {
    let d = common::project();
    let f = fs::File::create(d.path().join("emb.npz")).unwrap();
    let mut w = NpzWriter::new_compressed(f);
    w.add_array("mu", &arr(&MEANS)).unwrap();
    let cov = Array3::from_shape_fn((3, 2, 2), |(i, a, b)| if a == b { VARS[i][a] } else { 0.1 });
    w.add_array("cov", &cov).unwrap();
    w.finish().unwrap();
    use_npz(
        d.path(),
        r#"{"npz": "emb.npz", "means": "mu", "covariances": "cov"}"#,
    );
    let p = Project::load(d.path()).unwrap();
    assert_eq!(p.gaussians.len(), 3);
}

#[test]
fn errors_name_the_archive_and_the_array() {
    let d = common::project();
    write_npz(&d.path().join("emb.npz"), true, &[("mu", arr(&MEANS))]);
    use_npz(
        d.path(),
        r#"{"npz": "emb.npz", "means": "mu", "variances": "sigma2"}"#,
    );
    let e = Project::load(d.path()).unwrap_err().to_string();
    assert!(
        e.contains("emb.npz: array \"sigma2\": no such array in the archive (it holds: mu)"),
        "{e}"
    );
    // wrong row count names the member
    write_npz(
        &d.path().join("emb.npz"),
        false,
        &[("mu", arr(&MEANS[..2])), ("sigma2", arr(&VARS[..2]))],
    );
    let e = Project::load(d.path()).unwrap_err().to_string();
    assert!(e.contains("emb.npz[mu]: rows: has 2 rows"), "{e}");
    // a non-finite variance names the member and the phrase
    let mut bad = VARS;
    bad[1][0] = f64::NAN;
    write_npz(
        &d.path().join("emb.npz"),
        false,
        &[("mu", arr(&MEANS)), ("sigma2", arr(&bad))],
    );
    let e = Project::load(d.path()).unwrap_err().to_string();
    assert!(
        e.contains("emb.npz[sigma2]: phrase \"succulent\" (row 1)"),
        "{e}"
    );
    // not a zip at all
    fs::write(d.path().join("emb.npz"), b"not a zip").unwrap();
    let e = Project::load(d.path()).unwrap_err().to_string();
    assert!(e.contains("not a usable .npz (zip) archive"), "{e}");
}
