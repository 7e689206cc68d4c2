//! Full audit and re-audit after one edit on a synthetic nested tree of 100 000 nodes in
//! 64 dimensions (diagonal covariance, `sample::synthetic_gaussians`, 10 children per
//! cluster, 4 cluster levels, 5 % of the leaves moved to other clusters). Run with `cargo bench --bench audit -- --sample-size 10`.

use std::hint::black_box;

use criterion::{Criterion, criterion_group, criterion_main};
use treewright::model::Tree;
use treewright::model::audit::{AuditConfig, Auditor};
use treewright::model::effective::EffectiveTree;
use treewright::model::sample::{SyntheticSpec, synthetic_gaussians};

fn bench(c: &mut Criterion) {
    let spec = SyntheticSpec {
        phrases: 100_000,
        dim: 64,
        branching: 10,
        depth: 4,
        full_covariance: false,
        seed: 2026,
    };
    let (phrases, g, mut tf) = synthetic_gaussians(&spec);
    // misplace 5 % of the leaves under clusters picked by a fixed stride, so the audit has
    // findings to rank (moving leaves keeps the tree valid)
    let clusters: Vec<String> = {
        let set: std::collections::BTreeSet<&String> = tf.parent.values().collect();
        set.into_iter().cloned().collect()
    };
    let leaves: Vec<String> = tf
        .parent
        .keys()
        .filter(|c| clusters.binary_search(c).is_err())
        .cloned()
        .collect();
    for (i, leaf) in leaves.iter().step_by(20).enumerate() {
        let to = clusters[(i * 7919) % clusters.len()].clone();
        tf.parent.insert(leaf.clone(), to);
    }
    let tree = Tree::from_id_map(&phrases, &tf.root, &tf.parent).expect("valid tree");
    let eff_a = EffectiveTree::from_base(&tree, &phrases);
    // one edit: move the last leaf under another cluster
    let mut parent = tf.parent.clone();
    let clusters: std::collections::BTreeSet<&String> = tf.parent.values().collect();
    let leaf = tf
        .parent
        .keys()
        .rev()
        .find(|c| !clusters.contains(c))
        .expect("a leaf")
        .clone();
    let other = (*clusters.iter().next().expect("a cluster")).clone();
    parent.insert(leaf, other);
    let tree_b = Tree::from_id_map(&phrases, &tf.root, &parent).expect("valid tree");
    let eff_b = EffectiveTree::from_base(&tree_b, &phrases);
    let cfg = AuditConfig::default();

    let mut group = c.benchmark_group("audit 100k x 64d");
    group.bench_function("full audit", |b| {
        b.iter(|| black_box(Auditor::new(&g, &phrases, &eff_a, &[], cfg.clone())))
    });
    let mut auditor = Auditor::new(&g, &phrases, &eff_a, &[], cfg.clone());
    let mut flip = false;
    group.bench_function("re-audit after one edit", |b| {
        b.iter(|| {
            flip = !flip;
            let eff = if flip { &eff_b } else { &eff_a };
            black_box(auditor.update(&g, &phrases, eff, &[]).findings.len())
        })
    });
    group.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
