//! Build benchmark: 20 000 diagonal Gaussians in 64 dimensions, nested three levels deep
//! (8 × 8 × 8 groups, each group with a broad phrase of its own), built with max depth 6 and
//! k_max 8. The data is generated here with a fixed seed.

use std::hint::black_box;
use std::sync::atomic::AtomicBool;

use criterion::{Criterion, criterion_group, criterion_main};
use rand::SeedableRng;
use rand_distr::{Distribution, StandardNormal};
use rand_xoshiro::Xoshiro256PlusPlus;
use treewright::model::builder::{BuildParams, build};
use treewright::model::phrase::{PhraseRecord, PhraseTable};
use treewright::model::{Gaussians, PhraseId};

/// Nested synthetic Gaussians: every group of the 3-level hierarchy gets a centre offset
/// from its parent's (spread 8, 3, 1 per level) and one broad phrase at that centre; the
/// remaining phrases are narrow leaves spread round-robin over the 512 bottom groups.
fn nested(n: usize, d: usize, branching: usize, seed: u64) -> (PhraseTable, Gaussians) {
    let mut rng = Xoshiro256PlusPlus::seed_from_u64(seed);
    let mut z = move || -> f64 { StandardNormal.sample(&mut rng) };
    let spreads = [8.0, 3.0, 1.0];
    let node_var = [16.0, 4.0, 1.0, 0.25];
    let mut means: Vec<f64> = Vec::with_capacity(n * d);
    let mut vars: Vec<f64> = Vec::with_capacity(n * d);
    // group centres level by level, root first
    let mut levels: Vec<Vec<Vec<f64>>> = vec![vec![vec![0.0; d]]];
    for spread in spreads {
        let prev = levels.last().cloned().unwrap_or_default();
        let next: Vec<Vec<f64>> = prev
            .iter()
            .flat_map(|c| {
                (0..branching)
                    .map(|_| c.iter().map(|x| x + spread * z()).collect::<Vec<f64>>())
                    .collect::<Vec<_>>()
            })
            .collect();
        levels.push(next);
    }
    for (level, centres) in levels.iter().enumerate() {
        for c in centres {
            means.extend_from_slice(c);
            vars.extend((0..d).map(|_| node_var[level] * (1.0 + 0.1 * z().abs())));
        }
    }
    let bottom = levels.last().cloned().unwrap_or_default();
    let mut i = 0;
    while means.len() < n * d {
        let c = &bottom[i % bottom.len()];
        means.extend(c.iter().map(|x| x + 0.3 * z()));
        vars.extend((0..d).map(|_| 0.05 * (1.0 + 0.2 * z().abs())));
        i += 1;
    }
    means.truncate(n * d);
    vars.truncate(n * d);
    let recs: Vec<PhraseRecord> = (0..n)
        .map(|i| PhraseRecord {
            id: Some(format!("p{i}")),
            label: format!("phrase {i}"),
        })
        .collect();
    let phrases = PhraseTable::from_records(&recs).expect("unique ids");
    let g = Gaussians::from_diagonal(n, d, means, vars, 1e-6).expect("valid Gaussians");
    (phrases, g)
}

fn bench_build(c: &mut Criterion) {
    let (phrases, g) = nested(20_000, 64, 8, 2026);
    let params = BuildParams {
        max_depth: 6,
        k_max: 8,
        ..BuildParams::default()
    };
    let cancel = AtomicBool::new(false);
    let mut group = c.benchmark_group("build");
    group.sample_size(10);
    group.bench_function("20000x64_diagonal_depth6_k8", |b| {
        b.iter(|| {
            let t = build(&g, &phrases, None, &params, &|_| {}, &cancel).expect("build succeeds");
            black_box(t.tree_file.parent.len() as PhraseId)
        })
    });
    group.finish();
}

criterion_group!(benches, bench_build);
criterion_main!(benches);
