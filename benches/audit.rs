//! Full audit and re-audit after one edit on a synthetic nested tree of 100 000 nodes in
//! 64 dimensions (diagonal covariance, `sample::synthetic_gaussians`, 10 children per
//! cluster, 4 cluster levels, 5 % of the leaves moved to other clusters). Run with `cargo bench --bench audit -- --sample-size 10`.

mod common;

use std::hint::black_box;

use criterion::{Criterion, criterion_group, criterion_main};
use treewright::model::Tree;
use treewright::model::audit::{AuditConfig, Auditor};
use treewright::model::effective::EffectiveTree;

fn bench(c: &mut Criterion) {
    let common::Misplaced {
        phrases,
        g,
        tf,
        tree,
        ..
    } = common::misplaced_100k();
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
