//! Cost of applying the override layer on a large tree (undo re-applies a prefix, so this
//! is also the cost of one undo) and of one `check_edit` (the GUI calls it per drop).

use std::hint::black_box;

use criterion::{Criterion, criterion_group, criterion_main};
use rand::{Rng, SeedableRng};
use rand_xoshiro::Xoshiro256PlusPlus;
use treewright::model::edit::{Edit, EditRecord};
use treewright::model::overrides::{apply, check_edit};
use treewright::model::phrase::PhraseRecord;
use treewright::model::{PhraseId, PhraseTable, Tree};

fn setup(n: usize, edits: usize) -> (PhraseTable, Tree, Vec<EditRecord>) {
    let mut rng = Xoshiro256PlusPlus::seed_from_u64(7);
    let recs: Vec<PhraseRecord> = (0..n)
        .map(|i| PhraseRecord {
            id: Some(format!("t{i}")),
            label: format!("tag {i}"),
        })
        .collect();
    let t = PhraseTable::from_records(&recs).unwrap();
    // branching about 8: parent drawn among the previous nodes' first eighth
    let edges: Vec<(PhraseId, PhraseId)> = (1..n)
        .map(|i| (i as PhraseId, rng.gen_range(0..i.div_ceil(8)) as PhraseId))
        .collect();
    let tree = Tree::from_edges(&t, 0, &edges).unwrap();
    let id = |r: &mut Xoshiro256PlusPlus| format!("t{}", r.gen_range(1..n));
    let ev = (0..edits)
        .map(|k| EditRecord {
            edit: match k % 5 {
                0 | 1 => Edit::Reparent {
                    node: id(&mut rng),
                    parent: id(&mut rng),
                },
                2 => Edit::Merge {
                    sources: vec![id(&mut rng)],
                    into: id(&mut rng),
                },
                3 => Edit::Exclude { node: id(&mut rng) },
                _ => Edit::Rename {
                    node: id(&mut rng),
                    label: format!("renamed {k}"),
                    language: None,
                },
            },
            author: "bench".into(),
            time: "2026-12-02T00:00:00Z".into(),
            note: None,
        })
        .collect();
    (t, tree, ev)
}

fn bench(c: &mut Criterion) {
    let mut g = c.benchmark_group("overrides");
    g.sample_size(10);
    for (n, e) in [(10_000usize, 1_000usize), (100_000, 1_000)] {
        let (t, tree, edits) = setup(n, e);
        g.bench_function(format!("apply {n} nodes {e} edits"), |b| {
            b.iter(|| black_box(apply(&tree, &t, &edits)))
        });
        let (eff, _) = apply(&tree, &t, &edits);
        let probe = Edit::Reparent {
            node: format!("t{}", n - 1),
            parent: "t1".into(),
        };
        g.bench_function(format!("check_edit {n} nodes"), |b| {
            b.iter(|| black_box(check_edit(&eff, &t, &probe)))
        });
    }
    g.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
