//! Full audit and re-audit after one edit on a synthetic nested tree of 100 000 nodes in
//! 64 dimensions (diagonal covariance). Run with
//! `cargo bench --bench audit -- --sample-size 10`.

use std::hint::black_box;

use criterion::{Criterion, criterion_group, criterion_main};
use rand::{Rng, SeedableRng};
use rand_distr::{Distribution, StandardNormal};
use rand_xoshiro::Xoshiro256PlusPlus;
use treewright::model::audit::{AuditConfig, Auditor};
use treewright::model::effective::EffectiveTree;
use treewright::model::phrase::{PhraseRecord, PhraseTable};
use treewright::model::{Gaussians, PhraseId, Tree};

const NODES: usize = 100_000;
const DIM: usize = 64;
const BRANCHING: usize = 10;

/// Breadth-first nested Gaussians: each child's variances are its parent's times ~0.3, its
/// mean half the parent's spread away; 5 % of the nodes are then moved to random parents.
fn synthetic() -> (PhraseTable, Gaussians, Vec<(PhraseId, PhraseId)>) {
    let mut rng = Xoshiro256PlusPlus::seed_from_u64(2026);
    let mut means = vec![0.0; DIM];
    let mut vars: Vec<f64> = (0..DIM).map(|_| rng.gen_range(0.8..1.25)).collect();
    let mut parent: Vec<usize> = vec![usize::MAX];
    let mut next = 0usize;
    while parent.len() < NODES {
        let p = next;
        next += 1;
        for _ in 0..BRANCHING {
            if parent.len() == NODES {
                break;
            }
            for k in 0..DIM {
                let vp = vars[p * DIM + k];
                let z: f64 = StandardNormal.sample(&mut rng);
                means.push(means[p * DIM + k] + 0.5 * vp.sqrt() * z);
                vars.push(vp * 0.3 * rng.gen_range(0.8..1.25));
            }
            parent.push(p);
        }
    }
    // misplace 5 % of the leaves (nodes without children keep the tree valid)
    let first_leaf = next;
    for _ in 0..NODES / 20 {
        let c = rng.gen_range(first_leaf..NODES);
        parent[c] = rng.gen_range(0..first_leaf);
    }
    let recs: Vec<PhraseRecord> = (0..NODES)
        .map(|i| PhraseRecord {
            id: Some(format!("n{i}")),
            label: format!("node {i}"),
        })
        .collect();
    let phrases = PhraseTable::from_records(&recs).expect("unique ids");
    let g = Gaussians::from_diagonal(NODES, DIM, means, vars, 0.0).expect("valid Gaussians");
    let edges = (1..NODES)
        .map(|c| (c as PhraseId, parent[c] as PhraseId))
        .collect();
    (phrases, g, edges)
}

fn bench(c: &mut Criterion) {
    let (phrases, g, edges) = synthetic();
    let tree = Tree::from_edges(&phrases, 0, &edges).expect("valid tree");
    let eff_a = EffectiveTree::from_base(&tree, &phrases);
    // one edit: move a leaf under another node
    let mut moved = edges.clone();
    let last = moved.len() - 1;
    moved[last].1 = 3;
    let tree_b = Tree::from_edges(&phrases, 0, &moved).expect("valid tree");
    let eff_b = EffectiveTree::from_base(&tree_b, &phrases);
    let cfg = AuditConfig::default();

    let mut group = c.benchmark_group("audit 100k x 64d");
    group.bench_function("full audit", |b| {
        b.iter(|| {
            black_box(Auditor::new(&g, &phrases, &eff_a, &[], cfg.clone()));
        })
    });
    let mut auditor = Auditor::new(&g, &phrases, &eff_a, &[], cfg.clone());
    let mut flip = false;
    group.bench_function("re-audit after one edit", |b| {
        b.iter(|| {
            flip = !flip;
            let eff = if flip { &eff_b } else { &eff_a };
            black_box(auditor.update(&g, &phrases, eff, &[]).findings.len());
        })
    });
    group.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
