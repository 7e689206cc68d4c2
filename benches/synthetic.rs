//! Speed of the synthetic project generator (used by other benchmarks and tests).

use criterion::{Criterion, criterion_group, criterion_main};
use treewright::model::sample::{SyntheticSpec, synthetic_gaussians};

fn generate(c: &mut Criterion) {
    let mut group = c.benchmark_group("synthetic_gaussians");
    group.sample_size(10);
    let diag = SyntheticSpec {
        phrases: 100_000,
        dim: 64,
        branching: 8,
        depth: 3,
        full_covariance: false,
        seed: 1,
    };
    group.bench_function("diagonal 100000 x 64", |b| {
        b.iter(|| synthetic_gaussians(&diag))
    });
    let full = SyntheticSpec {
        phrases: 5_000,
        dim: 32,
        full_covariance: true,
        ..diag
    };
    group.bench_function("full 5000 x 32", |b| b.iter(|| synthetic_gaussians(&full)));
    group.finish();
}

criterion_group!(benches, generate);
criterion_main!(benches);
