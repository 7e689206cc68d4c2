//! Impact preview of one edit (`model::impact::preview`) on a synthetic nested tree of
//! 100 000 nodes in 64 dimensions (the same tree as `benches/audit.rs`: diagonal covariance,
//! 10 children per cluster, 4 cluster levels, 5 % of the leaves moved to other clusters).
//! The edit moves a leaf under another cluster; the preview applies the override layer,
//! copies the auditor and re-audits incrementally, and compares the top broader offers.
//! Target: ≤ 50 ms median (fast enough for the hover of "Apply fix").
//! Run with `cargo bench --bench impact -- --sample-size 10`.

mod common;

use std::hint::black_box;

use criterion::{Criterion, criterion_group, criterion_main};
use treewright::model::audit::{AuditConfig, Auditor};
use treewright::model::edit::Edit;
use treewright::model::effective::EffectiveTree;
use treewright::model::impact::{PreviewInput, preview};
use treewright::model::suggest::SuggestParams;

fn bench(c: &mut Criterion) {
    let common::Misplaced {
        phrases,
        g,
        tree,
        clusters,
        leaves,
        ..
    } = common::misplaced_100k();
    let eff = EffectiveTree::from_base(&tree, &phrases);
    let auditor = Auditor::new(&g, &phrases, &eff, &[], AuditConfig::default());
    let leaf = leaves.last().expect("a leaf").clone();
    let edit = Edit::Reparent {
        node: leaf,
        parent: clusters[0].clone(),
    };
    let params = SuggestParams::default();
    let input = PreviewInput {
        g: &g,
        phrases: &phrases,
        base: &tree,
        edits: &[],
        eff: &eff,
        auditor: &auditor,
        signed_hash: Some("0000"),
        params: &params,
    };
    let mut group = c.benchmark_group("impact 100k x 64d");
    group.bench_function("preview one reparent", |b| {
        b.iter(|| black_box(preview(&input, &edit).expect("applies").0.resolved.len()))
    });
    // the parts, for the report
    let edits = vec![treewright::model::overrides::record(
        edit.clone(),
        "bench",
        None,
    )];
    group.bench_function("part: apply the layer", |b| {
        b.iter(|| {
            black_box(
                treewright::model::overrides::apply(&tree, &phrases, &edits)
                    .1
                    .len(),
            )
        })
    });
    group.bench_function("part: copy the auditor", |b| {
        b.iter(|| black_box(auditor.clone().report().findings.len()))
    });
    group.bench_function("part: re-audit a copy", |b| {
        let (after, _) = treewright::model::overrides::apply(&tree, &phrases, &edits);
        b.iter(|| {
            let mut a = auditor.clone();
            black_box(a.update(&g, &phrases, &after, &[]).findings.len())
        })
    });
    eprintln!(
        "findings in the report: {}, open: {}",
        auditor.report().findings.len(),
        auditor
            .report()
            .open_count(treewright::model::audit::Severity::Info)
    );
    group.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
