//! Loader robustness: arbitrary and mutated bytes never panic and never allocate beyond the
//! input's size. CI runs a short seeded pass; set `TREEWRIGHT_FUZZ_CASES` (e.g. 1000000) for
//! a long local run.

use ndarray::Array2;
use ndarray_npy::WriteNpyExt;
use proptest::prelude::*;
use proptest::test_runner::{Config, RngAlgorithm, TestRng, TestRunner};
use treewright::model::overrides::parse_overrides;
use treewright::model::phrase::PhraseRecord;
use treewright::model::project::{
    EmbeddingsJson, Manifest, UserRecord, parse_json, parse_npy2, parse_npy3, parse_tree_csv,
};
use treewright::model::tree::TreeFile;

fn cases() -> u32 {
    std::env::var("TREEWRIGHT_FUZZ_CASES")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(512)
}

fn runner() -> TestRunner {
    TestRunner::new_with_rng(
        Config {
            cases: cases(),
            failure_persistence: None,
            ..Config::default()
        },
        TestRng::from_seed(RngAlgorithm::ChaCha, &[7; 32]),
    )
}

fn valid_npy() -> Vec<u8> {
    let a = Array2::<f32>::from_shape_fn((4, 3), |(i, j)| (i * 3 + j) as f32 * 0.25);
    let mut buf = Vec::new();
    a.write_npy(&mut buf).unwrap();
    buf
}

const MANIFEST: &str = r#"{"format": "treewright-project", "version": 1, "name": "x",
 "phrases": "phrases.json", "embeddings": {"means": "m.npy", "variances": "v.npy"}}"#;

/// Every byte-level parser the loaders use, on one input.
fn parse_all(bytes: &[u8]) {
    let _ = parse_json::<Manifest>(bytes, "project.json");
    let _ = parse_json::<Vec<PhraseRecord>>(bytes, "phrases.json");
    let _ = parse_json::<EmbeddingsJson>(bytes, "embeddings.json");
    let _ = parse_json::<Vec<UserRecord>>(bytes, "users.json");
    let _ = parse_json::<TreeFile>(bytes, "tree.json");
    let _ = parse_tree_csv(bytes, "tree.csv");
    let _ = parse_npy2(bytes, "means.npy");
    let _ = parse_npy3(bytes, "covariances.npy");
    let _ = parse_overrides(bytes, "overrides.json");
}

#[test]
fn arbitrary_bytes_never_panic() {
    runner()
        .run(&proptest::collection::vec(any::<u8>(), 0..512), |bytes| {
            parse_all(&bytes);
            Ok(())
        })
        .unwrap();
}

#[test]
fn mutated_valid_inputs_never_panic() {
    let seeds: Vec<Vec<u8>> = vec![
        valid_npy(),
        MANIFEST.as_bytes().to_vec(),
        br#"[{"id": "a", "label": "a"}, {"label": "b c"}]"#.to_vec(),
        br#"{"root": "a", "parent": {"b": "a"}}"#.to_vec(),
        b"child,parent\nb,a\nc,a\n".to_vec(),
        br#"{"covariance": "diagonal", "means": [[0,1]], "variances": [[1,1]]}"#.to_vec(),
        br#"{"format": "treewright-overrides", "version": 1, "edits": [
 {"op": "reparent", "node": "b", "parent": "a", "author": "x", "time": "2026-12-03T09:08:37Z"},
 {"op": "review", "node": "b", "status": "approved", "author": "x", "time": "2026-12-03T09:08:37Z"}]}"#
            .to_vec(),
    ];
    // the override seed is a valid file, so its mutations reach past the header check
    assert_eq!(
        parse_overrides(seeds.last().unwrap(), "overrides.json")
            .unwrap()
            .len(),
        2
    );
    let strategy = (
        0..seeds.len(),
        proptest::collection::vec((any::<usize>(), any::<u8>()), 1..6),
        any::<usize>(),
        any::<bool>(),
    );
    runner()
        .run(&strategy, |(which, flips, cut, truncate)| {
            let mut b = seeds[which].clone();
            for (pos, val) in flips {
                let i = pos % b.len();
                b[i] = val;
            }
            if truncate {
                b.truncate(cut % (b.len() + 1));
            }
            parse_all(&b);
            Ok(())
        })
        .unwrap();
}

#[test]
fn npy_headers_claiming_huge_shapes_are_refused() {
    let strategy = (1u64..u64::MAX, 1u64..u64::MAX, 0usize..64);
    runner()
        .run(&strategy, |(a, b, tail)| {
            let header =
                format!("{{'descr': '<f8', 'fortran_order': False, 'shape': ({a}, {b}), }}");
            let mut h = header.into_bytes();
            while (10 + h.len() + 1) % 64 != 0 {
                h.push(b' ');
            }
            h.push(b'\n');
            let mut npy = b"\x93NUMPY\x01\x00".to_vec();
            npy.extend_from_slice(&(h.len() as u16).to_le_bytes());
            npy.extend_from_slice(&h);
            npy.extend(std::iter::repeat_n(0u8, tail));
            let r = parse_npy2(&npy, "means.npy");
            let fits = (a as u128) * (b as u128) * 8 == tail as u128;
            prop_assert_eq!(r.is_ok(), fits);
            Ok(())
        })
        .unwrap();
}
