//! The `parquet` crate panics on some malformed files (two cases found by the loader fuzzing
//! of tests/fuzz_loaders.rs, mutations of tests/data/interop/emb.parquet, kept in
//! tests/data/fuzz/): the panic becomes a load error naming the file and where the read was,
//! and the crate's panic text never reaches the terminal.
//!
//! Broken twin: the same bytes read with the crate directly, without our guard, panic (checked
//! below); and with `quiet_panic`'s hook removed (the default hook left in place) the CLI
//! check fails, because stderr then holds "thread 'main' panicked at …".

use std::path::Path;
use std::process::Command;

use parquet::file::reader::{FileReader, SerializedFileReader};
use treewright::model::fit::FitOptions;
use treewright::model::project::{BATCH_ROWS, Limits, fit_parquet_bytes, parse_parquet_columns};

const CASES: [&str; 2] = [
    "tests/data/fuzz/parquet_panic_column_start.parquet",
    "tests/data/fuzz/parquet_panic_dictionary.parquet",
];

/// Read every row with the crate alone (no guard).
fn read_raw(bytes: Vec<u8>) -> Result<usize, String> {
    let r = SerializedFileReader::new(bytes::Bytes::from(bytes)).map_err(|e| e.to_string())?;
    let rows = r.get_row_iter(None).map_err(|e| e.to_string())?;
    let mut n = 0;
    for row in rows {
        row.map_err(|e| e.to_string())?;
        n += 1;
    }
    Ok(n)
}

#[test]
fn fuzz_cases_panic_in_the_crate_but_load_as_errors_naming_file_and_field() {
    for case in CASES {
        let bytes = std::fs::read(case).unwrap();
        // the twin: the crate on its own panics on these bytes (its message, printed by the
        // test harness's hook here, is what a user would have seen)
        let raw = std::panic::catch_unwind(|| read_raw(bytes.clone()));
        assert!(raw.is_err(), "{case}: the crate no longer panics: {raw:?}");

        let e = parse_parquet_columns(
            bytes.clone(),
            "emb.parquet",
            &["phrase_id", "label"],
            &["mean", "var"],
            &Limits::default(),
        )
        .unwrap_err()
        .to_string();
        assert!(
            e.starts_with("emb.parquet: metadata: not a usable Parquet file")
                || e.starts_with("emb.parquet: row 0: not a usable Parquet file"),
            "{case}: {e}"
        );
        // the streaming reader of `fit` either refuses the file cleanly or is guarded too
        let r = fit_parquet_bytes(
            bytes,
            "occ.parquet",
            "phrase_id",
            "mean",
            &FitOptions::default(),
            BATCH_ROWS,
        );
        if let Err(e) = r {
            assert!(e.to_string().starts_with("occ.parquet: "), "{e}");
        }
    }
}

#[test]
fn the_cli_reports_the_file_and_prints_no_panic() {
    let tmp = tempfile::tempdir().unwrap();
    for case in CASES {
        // a project whose phrases and embeddings come from the broken table
        let dir = tmp.path().join(Path::new(case).file_stem().unwrap());
        std::fs::create_dir_all(&dir).unwrap();
        std::fs::copy(case, dir.join("emb.parquet")).unwrap();
        std::fs::write(
            dir.join("project.json"),
            r#"{"format": "treewright-project", "version": 1, "name": "broken",
 "phrases": "emb.parquet",
 "embeddings": {"parquet": "emb.parquet", "means": "mean", "variances": "var"}}"#,
        )
        .unwrap();
        let o = Command::new(env!("CARGO_BIN_EXE_treewright"))
            .arg("info")
            .arg(&dir)
            .output()
            .unwrap();
        let err = String::from_utf8_lossy(&o.stderr);
        assert!(!o.status.success(), "{case}");
        assert!(!err.contains("panicked"), "{case}: {err}");
        assert!(
            err.contains("emb.parquet: ") && err.contains("not a usable Parquet file"),
            "{case}: {err}"
        );
        assert_eq!(err.lines().count(), 1, "{case}: {err}");

        let o = Command::new(env!("CARGO_BIN_EXE_treewright"))
            .args(["fit", case, "--vector", "mean", "--out"])
            .arg(tmp.path().join("out"))
            .output()
            .unwrap();
        let err = String::from_utf8_lossy(&o.stderr);
        assert!(!o.status.success(), "{case}");
        assert!(!err.contains("panicked"), "{case}: {err}");
        assert!(err.contains(case), "{case}: {err}");
    }
}
