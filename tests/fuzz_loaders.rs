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
    EmbeddingsJson, Limits, Manifest, UserRecord, parse_json, parse_npy2, parse_npy3, parse_npz2,
    parse_parquet_columns, parse_skos_tree, parse_tree_csv,
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

fn valid_npz(compressed: bool) -> Vec<u8> {
    let a = Array2::<f32>::from_shape_fn((3, 2), |(i, j)| (i * 2 + j) as f32 * 0.5);
    let mut cur = std::io::Cursor::new(Vec::new());
    let mut w = if compressed {
        ndarray_npy::NpzWriter::new_compressed(&mut cur)
    } else {
        ndarray_npy::NpzWriter::new(&mut cur)
    };
    w.add_array("mu", &a).unwrap();
    w.finish().unwrap();
    cur.into_inner()
}

const VALID_TTL: &str = "@prefix skos: <http://www.w3.org/2004/02/skos/core#> .
<http://x/a> a skos:Concept ; skos:notation \"a\" ; skos:narrower <http://x/b> .
<http://x/b> skos:prefLabel \"B\"@en ; skos:broader <http://x/a> .
<http://x/c> skos:altLabel \"c\" ; skos:broader <http://x/b> .
";

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
    let _ = parse_npz2(bytes, "mu", "emb.npz", &Limits::default());
    let table = treewright::model::PhraseTable::from_ids(&["a", "b", "c"]).unwrap();
    let _ = parse_skos_tree(bytes, "taxonomy.ttl", &table);
    let _ = parse_skos_tree(bytes, "taxonomy.rdf", &table);
    let _ = parse_parquet_columns(
        bytes.to_vec(),
        "emb.parquet",
        &["phrase_id", "label"],
        &["mean", "var"],
        &Limits::default(),
    );
    // the streaming occurrence reader of `fit`
    let _ = treewright::model::project::fit_parquet_bytes(
        bytes.to_vec(),
        "occurrences.parquet",
        "phrase_id",
        "vector",
        &treewright::model::fit::FitOptions::default(),
        treewright::model::project::BATCH_ROWS,
    );
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
        valid_npz(false),
        valid_npz(true),
        VALID_TTL.as_bytes().to_vec(),
        std::fs::read("tests/data/interop/emb.parquet").unwrap(),
        std::fs::read("tests/data/interop/taxonomy.rdf").unwrap(),
        std::fs::read("tests/data/interop/occurrences_row_groups.parquet").unwrap(),
        std::fs::read("tests/data/interop/occurrences_zstd.parquet").unwrap(),
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

/// Headers claiming a shape: half the cases draw small shapes whose data fits exactly (or
/// is a few bytes short or long), so the accepting branch runs as often as the refusing one;
/// the other half claim huge shapes (a, b up to u64::MAX). The largest single allocation
/// is measured in every case and must stay within the input's size plus a fixed 64 KiB
/// (the header and the reader's buffers): a header never makes the loader allocate what it
/// claims. `npy_allocation_bound_is_reported` prints the largest figure seen.
#[test]
fn npy_headers_claiming_huge_shapes_are_refused() {
    let small = (1u64..24, 1u64..24, prop_oneof![Just(0i64), -9i64..9]);
    let huge = (1u64..u64::MAX, 1u64..u64::MAX, 0i64..64);
    let strategy = prop_oneof![
        small.prop_map(|(a, b, off)| (a, b, (a * b * 8) as i64 + off, true)),
        huge.prop_map(|(a, b, tail)| (a, b, tail, false)),
    ];
    let accepted = std::cell::Cell::new(0usize);
    let refused = std::cell::Cell::new(0usize);
    let worst = std::cell::Cell::new(0.0f64);
    let largest = std::cell::Cell::new((0usize, 0usize));
    runner()
        .run(&strategy, |(a, b, tail, _small)| {
            let tail = tail.max(0) as usize;
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
            npy.extend((0..tail).map(|i| (i % 7) as u8));
            let mut r = None;
            let big = largest_request(|| r = Some(parse_npy2(&npy, "means.npy")));
            let r = r.unwrap();
            let fits = (a as u128) * (b as u128) * 8 == tail as u128;
            prop_assert_eq!(r.is_ok(), fits);
            if let Ok((n, d, v)) = &r {
                prop_assert_eq!((*n as u64, *d as u64, v.len() as u64), (a, b, a * b));
                accepted.set(accepted.get() + 1);
            } else {
                refused.set(refused.get() + 1);
            }
            prop_assert!(
                big <= npy.len() + (64 << 10),
                "largest allocation {} bytes for a {}-byte input",
                big,
                npy.len()
            );
            worst.set(worst.get().max(big as f64 / npy.len() as f64));
            if big > largest.get().0 {
                largest.set((big, npy.len()));
            }
            Ok(())
        })
        .unwrap();
    eprintln!(
        "npy headers: {} accepted, {} refused; largest allocation {} bytes (for a {}-byte \
         input); at most {:.2}× the input size",
        accepted.get(),
        refused.get(),
        largest.get().0,
        largest.get().1,
        worst.get()
    );
    // the accepting branch really ran (about a quarter of the cases draw an exact fit)
    assert!(
        accepted.get() * 10 >= cases() as usize,
        "only {} accepted",
        accepted.get()
    );
    assert!(refused.get() * 10 >= cases() as usize);
}

// ---- allocation bound for the .npz reader ----
//
// A global allocator that remembers, per thread, the largest single allocation request:
// a header that makes a reader reserve memory for values the input does not hold shows up
// as one huge request.

use std::alloc::{GlobalAlloc, Layout, System};
use std::cell::Cell;

struct LargestRequest;

thread_local! {
    static LARGEST: Cell<usize> = const { Cell::new(0) };
}

fn note(size: usize) {
    let _ = LARGEST.try_with(|c| {
        if size > c.get() {
            c.set(size)
        }
    });
}

// SAFETY: every call is forwarded unchanged to the system allocator; `note` only records a
// number in a const-initialised thread-local (no allocation, no panic).
unsafe impl GlobalAlloc for LargestRequest {
    unsafe fn alloc(&self, l: Layout) -> *mut u8 {
        note(l.size());
        unsafe { System.alloc(l) }
    }
    unsafe fn alloc_zeroed(&self, l: Layout) -> *mut u8 {
        note(l.size());
        unsafe { System.alloc_zeroed(l) }
    }
    unsafe fn dealloc(&self, p: *mut u8, l: Layout) {
        unsafe { System.dealloc(p, l) }
    }
    unsafe fn realloc(&self, p: *mut u8, l: Layout, new: usize) -> *mut u8 {
        note(new);
        unsafe { System.realloc(p, l, new) }
    }
}

#[global_allocator]
static ALLOC: LargestRequest = LargestRequest;

/// The largest single allocation `f` makes on this thread.
fn largest_request(f: impl FnOnce()) -> usize {
    LARGEST.with(|c| c.set(0));
    f();
    LARGEST.with(Cell::get)
}

/// An `.npz` (stored, not compressed) whose member `mu.npy` has a header claiming
/// `rows × 4` float64 values but holds only 16 bytes of data.
fn npz_claiming_rows(rows: u64) -> Vec<u8> {
    let header = format!("{{'descr': '<f8', 'fortran_order': False, 'shape': ({rows}, 4), }}");
    let mut h = header.into_bytes();
    while (10 + h.len() + 1) % 64 != 0 {
        h.push(b' ');
    }
    h.push(b'\n');
    let mut npy = b"\x93NUMPY\x01\x00".to_vec();
    npy.extend_from_slice(&(h.len() as u16).to_le_bytes());
    npy.extend_from_slice(&h);
    npy.extend(std::iter::repeat_n(0u8, 16));
    let mut cur = std::io::Cursor::new(Vec::new());
    let mut z = zip::ZipWriter::new(&mut cur);
    z.start_file(
        "mu.npy",
        zip::write::SimpleFileOptions::default().compression_method(zip::CompressionMethod::Stored),
    )
    .unwrap();
    std::io::Write::write_all(&mut z, &npy).unwrap();
    z.finish().unwrap();
    cur.into_inner()
}

/// Bound on any single allocation while refusing a hostile archive (the member copy is
/// capped at 16 MiB of reserve; the rest are small buffers).
const BOUND: usize = 32 << 20;

#[test]
fn npz_member_headers_claiming_huge_shapes_are_refused_without_allocating() {
    let strategy = 1u64 << 22..1u64 << 40;
    runner()
        .run(&strategy, |rows| {
            let bytes = npz_claiming_rows(rows);
            let mut r = None;
            let big = largest_request(|| {
                r = Some(parse_npz2(&bytes, "mu", "emb.npz", &Limits::default()));
            });
            let e = r.unwrap().unwrap_err().to_string();
            prop_assert!(
                e.contains("emb.npz[mu]") && e.contains("truncated"),
                "{}",
                e
            );
            prop_assert!(big < BOUND, "largest allocation {} bytes", big);
            Ok(())
        })
        .unwrap();
}

/// The broken twin: ndarray-npy's own `NpzReader::by_name` sizes its buffer from the
/// member's header, so the same archive makes it request ~1 GiB — the measure above does
/// see over-allocation when it happens.
#[test]
fn broken_twin_naive_npz_reader_over_allocates() {
    let bytes = npz_claiming_rows(1 << 25); // 2^25 × 4 × 8 bytes = 1 GiB claimed
    let big = largest_request(|| {
        let mut z = ndarray_npy::NpzReader::new(std::io::Cursor::new(&bytes)).unwrap();
        let r = z.by_name::<ndarray::OwnedRepr<f64>, ndarray::Ix2>("mu");
        assert!(r.is_err());
    });
    assert!(big >= 1 << 30, "largest allocation {big} bytes");
}

#[test]
fn npz_entries_claiming_a_huge_unpacked_size_are_refused() {
    let mut bytes = valid_npz(false);
    // patch the uncompressed size in the central directory header (PK\x01\x02, offset 24)
    let cd = bytes.windows(4).position(|w| w == b"PK\x01\x02").unwrap();
    bytes[cd + 24..cd + 28].copy_from_slice(&u32::MAX.to_le_bytes());
    let limits = Limits {
        max_file_mb: 1,
        ..Limits::default()
    };
    let mut r = None;
    let big = largest_request(|| r = Some(parse_npz2(&bytes, "mu", "emb.npz", &limits)));
    let e = r.unwrap().unwrap_err().to_string();
    assert!(e.contains("emb.npz[mu]"), "{e}");
    assert!(big < BOUND, "largest allocation {big} bytes");
}

#[test]
fn mutated_parquet_tables_never_over_allocate() {
    let seed = std::fs::read("tests/data/interop/emb.parquet").unwrap();
    let strategy = (
        proptest::collection::vec((any::<usize>(), any::<u8>()), 1..6),
        any::<usize>(),
        any::<bool>(),
    );
    runner()
        .run(&strategy, |(flips, cut, truncate)| {
            let mut b = seed.clone();
            for (pos, val) in flips {
                let i = pos % b.len();
                b[i] = val;
            }
            if truncate {
                b.truncate(cut % (b.len() + 1));
            }
            let big = largest_request(|| {
                let _ = parse_parquet_columns(
                    b,
                    "emb.parquet",
                    &["phrase_id", "label"],
                    &["mean", "var"],
                    &Limits::default(),
                );
            });
            prop_assert!(big < BOUND, "largest allocation {} bytes", big);
            Ok(())
        })
        .unwrap();
}

#[test]
fn mutated_occurrence_tables_never_over_allocate_in_the_streaming_fit() {
    let seed = std::fs::read("tests/data/interop/occurrences_row_groups.parquet").unwrap();
    let strategy = (
        proptest::collection::vec((any::<usize>(), any::<u8>()), 1..6),
        any::<usize>(),
        any::<bool>(),
    );
    runner()
        .run(&strategy, |(flips, cut, truncate)| {
            let mut b = seed.clone();
            for (pos, val) in flips {
                let i = pos % b.len();
                b[i] = val;
            }
            if truncate {
                b.truncate(cut % (b.len() + 1));
            }
            let big = largest_request(|| {
                let _ = treewright::model::project::fit_parquet_bytes(
                    b,
                    "occurrences.parquet",
                    "phrase_id",
                    "vector",
                    &treewright::model::fit::FitOptions::default(),
                    5,
                );
            });
            prop_assert!(big < BOUND, "largest allocation {} bytes", big);
            Ok(())
        })
        .unwrap();
}
