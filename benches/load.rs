//! Loading a 100 000 × 64 diagonal `.npy` project (phrases, means, variances, tree).
//!
//! Run: `cargo bench --bench load -- --sample-size 10`.

use std::collections::BTreeMap;

use criterion::{Criterion, criterion_group, criterion_main};
use rand::{Rng, SeedableRng};
use rand_xoshiro::Xoshiro256PlusPlus;
use treewright::model::phrase::{PhraseRecord, PhraseTable};
use treewright::model::project::{Project, ProjectWriter};
use treewright::model::tree::TreeFile;

fn write_project(dir: &std::path::Path, n: usize, d: usize) {
    let mut rng = Xoshiro256PlusPlus::seed_from_u64(42);
    let records: Vec<PhraseRecord> = (0..n)
        .map(|i| PhraseRecord {
            id: Some(format!("tag-{i:06}")),
            label: format!("tag {i}"),
        })
        .collect();
    let phrases = PhraseTable::from_records(&records).unwrap();
    let means: Vec<f32> = (0..n * d).map(|_| rng.gen_range(-3.0..3.0)).collect();
    let variances: Vec<f32> = (0..n * d).map(|_| rng.gen_range(0.05..2.0)).collect();
    // an 8-ary tree in row order
    let parent: BTreeMap<String, String> = (1..n)
        .map(|i| {
            (
                phrases.id(i as u32).to_string(),
                phrases.id(((i - 1) / 8) as u32).to_string(),
            )
        })
        .collect();
    let tree = TreeFile {
        root: phrases.id(0).to_string(),
        parent,
    };
    ProjectWriter {
        name: "load bench",
        phrases: &phrases,
        dim: d,
        means: &means,
        variances: &variances,
        users: &[],
        tree: Some(&tree),
    }
    .write(dir)
    .unwrap();
}

fn bench_load(c: &mut Criterion) {
    let dir = tempfile::tempdir().unwrap();
    write_project(dir.path(), 100_000, 64);
    let mut group = c.benchmark_group("load");
    group.sample_size(10);
    group.bench_function("npy_100k_x_64", |b| {
        b.iter(|| {
            let p = Project::load(dir.path()).unwrap();
            assert_eq!(p.phrases.len(), 100_000);
            p
        })
    });
    group.finish();
}

criterion_group!(benches, bench_load);
criterion_main!(benches);
