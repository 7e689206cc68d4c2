//! `fit` streams its input: the result does not depend on how the rows are cut into row
//! groups, pages and batches, and equals the in-memory fit of the same rows (which tests/fit.rs
//! checks against NumPy and scikit-learn). Fixtures written by pyarrow 26.0.1 with
//! benches/interop/make.py (`codecs`).

use std::fs;
use std::path::Path;

use ndarray::{Array2, ShapeBuilder};
use ndarray_npy::WriteNpyExt;
use treewright::model::fit::{Fit, FitOptions, fit};
use treewright::model::project::{BATCH_ROWS, fit_npy, fit_parquet, fit_parquet_bytes};

const DIR: &str = "tests/data/interop";

fn options() -> [FitOptions; 2] {
    [
        FitOptions::default(),
        FitOptions {
            full: true,
            ..FitOptions::default()
        },
    ]
}

fn parquet(name: &str, opt: &FitOptions, batch: usize) -> Fit {
    let bytes = fs::read(Path::new(DIR).join(name)).unwrap();
    fit_parquet_bytes(bytes, name, "phrase_id", "vector", opt, batch)
        .unwrap()
        .finish()
        .unwrap()
}

#[test]
fn row_groups_pages_and_batches_do_not_change_the_fit() {
    for opt in options() {
        // one row group (pandas' default) read in one batch: the reference
        let one = parquet("occurrences.parquet", &opt, BATCH_ROWS);
        assert_eq!(one.ids.len(), 4);
        // six row groups of 16 rows and 128-byte pages, read 1, 5 and 8192 rows at a time
        for batch in [1, 5, 16, 17, BATCH_ROWS] {
            assert_eq!(
                parquet("occurrences_row_groups.parquet", &opt, batch),
                one,
                "batch {batch}, full {}",
                opt.full
            );
        }
        // the file path (fit_parquet) reads the same
        let from_file = fit_parquet(
            &Path::new(DIR).join("occurrences_row_groups.parquet"),
            "phrase_id",
            "vector",
            &opt,
        )
        .unwrap()
        .finish()
        .unwrap();
        assert_eq!(from_file, one);
    }
}

/// Deterministic rows: 3 columns, `rows` rows over 7 phrases (a linear congruential
/// generator, common practice, no source).
fn synthetic(rows: usize) -> (Vec<String>, Vec<f64>) {
    let mut s: u64 = 16;
    let mut next = || {
        s = s
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407);
        (s >> 11) as f64 / (1u64 << 53) as f64
    };
    let mut ids = Vec::with_capacity(rows);
    let mut data = Vec::with_capacity(rows * 3);
    for _ in 0..rows {
        let p = (next() * 7.0) as usize;
        ids.push(format!("phrase-{p}"));
        for j in 0..3 {
            data.push(10.0 * p as f64 + j as f64 + next() * (1.0 + p as f64));
        }
    }
    (ids, data)
}

fn write_npy(dir: &Path, ids: &[String], data: &[f64], f32_values: bool) -> (String, String) {
    let n = ids.len();
    let mut buf = Vec::new();
    if f32_values {
        let a = Array2::from_shape_vec((n, 3), data.iter().map(|&v| v as f32).collect()).unwrap();
        a.write_npy(&mut buf).unwrap();
    } else {
        let a = Array2::from_shape_vec((n, 3), data.to_vec()).unwrap();
        a.write_npy(&mut buf).unwrap();
    }
    let npy = dir.join("occ.npy");
    let idp = dir.join("occ_ids.json");
    fs::write(&npy, buf).unwrap();
    fs::write(&idp, serde_json::to_vec(ids).unwrap()).unwrap();
    (npy.display().to_string(), idp.display().to_string())
}

#[test]
fn streamed_npy_equals_the_in_memory_fit_across_chunk_boundaries() {
    let tmp = tempfile::tempdir().unwrap();
    // 2.5 chunks of rows
    let rows = BATCH_ROWS * 5 / 2;
    let (ids, data) = synthetic(rows);
    let (npy, idp) = write_npy(tmp.path(), &ids, &data, false);
    for opt in options() {
        let streamed = fit_npy(Path::new(&npy), Path::new(&idp), &opt)
            .unwrap()
            .finish()
            .unwrap();
        assert_eq!(streamed, fit(&ids, &data, 3, &opt).unwrap());
        assert_eq!(streamed.counts.iter().sum::<usize>(), rows);
    }
    // float32 files are widened value by value
    let (npy, idp) = write_npy(tmp.path(), &ids, &data, true);
    let narrowed: Vec<f64> = data.iter().map(|&v| f64::from(v as f32)).collect();
    let streamed = fit_npy(Path::new(&npy), Path::new(&idp), &FitOptions::default())
        .unwrap()
        .finish()
        .unwrap();
    assert_eq!(
        streamed,
        fit(&ids, &narrowed, 3, &FitOptions::default()).unwrap()
    );
}

#[test]
fn the_interop_npy_streams_to_the_in_memory_fit() {
    let npy = Path::new(DIR).join("occurrences.npy");
    let idp = Path::new(DIR).join("occurrences_ids.json");
    let bytes = fs::read(&npy).unwrap();
    let (_, d, data) = treewright::model::project::parse_npy2(&bytes, "occurrences.npy").unwrap();
    let ids: Vec<String> = serde_json::from_slice(&fs::read(&idp).unwrap()).unwrap();
    for opt in options() {
        let streamed = fit_npy(&npy, &idp, &opt).unwrap().finish().unwrap();
        assert_eq!(streamed, fit(&ids, &data, d, &opt).unwrap());
    }
}

#[test]
fn npy_id_lists_of_the_wrong_length_and_fortran_arrays_are_refused_by_name() {
    let tmp = tempfile::tempdir().unwrap();
    let (ids, data) = synthetic(10);
    let (npy, idp) = write_npy(tmp.path(), &ids, &data, false);
    let opt = FitOptions::default();
    // more ids than rows: refused while streaming the list, naming the ids file
    let mut more = ids.clone();
    more.push("phrase-1".into());
    fs::write(&idp, serde_json::to_vec(&more).unwrap()).unwrap();
    let e = fit_npy(Path::new(&npy), Path::new(&idp), &opt)
        .unwrap_err()
        .to_string();
    assert!(
        e.contains("occ_ids.json") && e.contains("more ids than the 10 matrix rows"),
        "{e}"
    );
    // fewer
    fs::write(&idp, serde_json::to_vec(&ids[..9]).unwrap()).unwrap();
    let e = fit_npy(Path::new(&npy), Path::new(&idp), &opt)
        .unwrap_err()
        .to_string();
    assert!(
        e.contains("occ_ids.json") && e.contains("9 ids for the 10 rows"),
        "{e}"
    );
    // not a list of strings
    fs::write(&idp, b"[\"a\", 3]").unwrap();
    let e = fit_npy(Path::new(&npy), Path::new(&idp), &opt)
        .unwrap_err()
        .to_string();
    assert!(e.contains("occ_ids.json:1:"), "{e}");
    // a Fortran-order matrix cannot be streamed by rows
    let f = Array2::from_shape_vec((10, 3).f(), data.clone()).unwrap();
    assert!(!f.is_standard_layout());
    let mut buf = Vec::new();
    f.write_npy(&mut buf).unwrap();
    fs::write(&npy, buf).unwrap();
    fs::write(&idp, serde_json::to_vec(&ids).unwrap()).unwrap();
    let e = fit_npy(Path::new(&npy), Path::new(&idp), &opt)
        .unwrap_err()
        .to_string();
    assert!(e.contains("occ.npy") && e.contains("Fortran-order"), "{e}");
}

#[test]
fn parquet_errors_name_file_row_and_column() {
    let bytes = fs::read(Path::new(DIR).join("occurrences.parquet")).unwrap();
    let e = fit_parquet_bytes(
        bytes.clone(),
        "occ.parquet",
        "phrase_id",
        "vectors",
        &FitOptions::default(),
        BATCH_ROWS,
    )
    .unwrap_err()
    .to_string();
    assert!(
        e.contains("occ.parquet") && e.contains("column \"vectors\": no such column"),
        "{e}"
    );
    let e = fit_parquet_bytes(
        bytes,
        "occ.parquet",
        "vector",
        "phrase_id",
        &FitOptions::default(),
        BATCH_ROWS,
    )
    .unwrap_err()
    .to_string();
    assert!(
        e.contains("column \"vector\": expected a string or integer column"),
        "{e}"
    );
}

#[test]
fn zstd_lz4_and_gzip_tables_written_by_pyarrow_fit_like_the_snappy_one() {
    // pandas 3.1.1 / pyarrow 26.0.1 `to_parquet(compression=...)`: same rows, other codecs
    for opt in options() {
        let snappy = parquet("occurrences.parquet", &opt, BATCH_ROWS);
        for codec in ["zstd", "lz4", "gzip"] {
            assert_eq!(
                parquet(&format!("occurrences_{codec}.parquet"), &opt, BATCH_ROWS),
                snappy,
                "{codec}"
            );
        }
    }
    // and the row reader the project loader uses reads them too
    for codec in ["zstd", "lz4", "gzip"] {
        let c = treewright::model::project::read_parquet_columns(
            &Path::new(DIR).join(format!("occurrences_{codec}.parquet")),
            &["phrase_id"],
            &["vector"],
            &treewright::model::project::Limits::default(),
            None,
        )
        .unwrap();
        assert_eq!((c.rows, c.lists[0].0), (81, 4), "{codec}");
    }
}
