//! Build benchmark of both methods (issue 14): synthetic nested Gaussians from
//! `model::sample::synthetic_gaussians` (branching 8, 3 cluster levels, the rest leaves),
//! 64 dimensions, default parameters, at 20 000 phrases and — with `INCL_BENCH_100K=1` —
//! 100 000 phrases (the index is used above `exact_limit` = 8192 phrases); the divisive
//! build (`model::builder::build`, default parameters) on the same data in the group
//! `divisive`. A filter that matches no benchmark (`cargo bench --bench inclusion -- none`)
//! prints only the one-build figures.
//!
//! Before timing, each size is built once and the bench prints the ancestor-pair F1 and
//! exact-parent share against the generator's true tree, and the peak resident memory of
//! that build alone (VmHWM after resetting it through /proc/self/clear_refs on Linux)
//! beside the raw embedding bytes (means + variances, f32).

use std::collections::HashSet;
use std::hint::black_box;
use std::sync::atomic::AtomicBool;
use std::time::Instant;

use criterion::{Criterion, criterion_group, criterion_main};
use treewright::model::builder::{BuildParams, build};
use treewright::model::inclusion::{InclusionParams, build_inclusion};
use treewright::model::sample::{SyntheticSpec, synthetic_gaussians};
use treewright::model::tree::TreeFile;

fn spec(n: usize) -> SyntheticSpec {
    SyntheticSpec {
        phrases: n,
        dim: 64,
        branching: 8,
        depth: 3,
        full_covariance: false,
        seed: 2026,
    }
}

fn pairs(t: &TreeFile) -> HashSet<(&str, &str)> {
    let mut out = HashSet::new();
    for n in t.parent.keys() {
        let mut p = t.parent.get(n);
        while let Some(q) = p {
            out.insert((n.as_str(), q.as_str()));
            p = t.parent.get(q);
        }
    }
    out
}

/// Peak resident set (kB) since the last reset, Linux only.
fn vm_hwm_kb() -> Option<u64> {
    let s = std::fs::read_to_string("/proc/self/status").ok()?;
    let line = s.lines().find(|l| l.starts_with("VmHWM:"))?;
    line.split_whitespace().nth(1)?.parse().ok()
}

fn reset_hwm() {
    let _ = std::fs::write("/proc/self/clear_refs", "5");
}

fn bench_size(c: &mut Criterion, n: usize) {
    let (phrases, g, truth) = synthetic_gaussians(&spec(n));
    let params = InclusionParams::default()
        .check()
        .expect("defaults are valid");
    let cancel = AtomicBool::new(false);
    reset_hwm();
    let before = vm_hwm_kb();
    let start = Instant::now();
    let t = build_inclusion(&g, &phrases, None, &[], &params, &|_| {}, &cancel)
        .expect("build succeeds");
    let secs = start.elapsed().as_secs_f64();
    let after = vm_hwm_kb();
    let (pp, tp) = (pairs(&t.tree_file), pairs(&truth));
    let inter = pp.intersection(&tp).count() as f64;
    let f1 = 2.0 * inter / (pp.len() + tp.len()) as f64;
    let exact = truth
        .parent
        .iter()
        .filter(|(k, v)| t.tree_file.parent.get(*k) == Some(*v))
        .count() as f64
        / truth.parent.len().max(1) as f64;
    let raw = (2 * n * 64 * 4) as f64 / 1024.0;
    println!(
        "inclusion {n}x64: one build {secs:.2} s, F1 {f1:.3}, exact parent {exact:.3}, depth {}, \
         index cells {}, peak RSS of the build {} kB (resident before it {} kB), raw embedding {raw:.0} kB",
        t.depth,
        t.stats.cells,
        after.map_or("?".into(), |x| x.to_string()),
        before.map_or("?".into(), |x| x.to_string()),
    );
    let mut group = c.benchmark_group("inclusion");
    group.sample_size(10);
    group.bench_function(format!("{n}x64_diagonal_defaults"), |b| {
        b.iter(|| {
            let t = build_inclusion(&g, &phrases, None, &[], &params, &|_| {}, &cancel)
                .expect("build succeeds");
            black_box(t.tree_file.parent.len())
        })
    });
    group.finish();

    // the divisive build on the same data
    let dparams = BuildParams::default();
    reset_hwm();
    let start = Instant::now();
    let d = build(&g, &phrases, None, &dparams, &|_| {}, &cancel).expect("build succeeds");
    let secs = start.elapsed().as_secs_f64();
    let after = vm_hwm_kb();
    let pp = pairs(&d.tree_file);
    let inter = pp.intersection(&tp).count() as f64;
    let f1 = 2.0 * inter / (pp.len() + tp.len()) as f64;
    let exact = truth
        .parent
        .iter()
        .filter(|(k, v)| d.tree_file.parent.get(*k) == Some(*v))
        .count() as f64
        / truth.parent.len().max(1) as f64;
    println!(
        "divisive {n}x64: one build {secs:.2} s, F1 {f1:.3}, exact parent {exact:.3}, depth {}, \
         peak RSS {} kB",
        d.report.depth,
        after.map_or("?".into(), |x| x.to_string()),
    );
    let mut group = c.benchmark_group("divisive");
    group.sample_size(10);
    group.bench_function(format!("{n}x64_diagonal_defaults"), |b| {
        b.iter(|| {
            let t = build(&g, &phrases, None, &dparams, &|_| {}, &cancel).expect("build succeeds");
            black_box(t.tree_file.parent.len())
        })
    });
    group.finish();
}

fn bench_inclusion(c: &mut Criterion) {
    bench_size(c, 20_000);
    if std::env::var("INCL_BENCH_100K").is_ok_and(|v| v == "1") {
        bench_size(c, 100_000);
    }
}

criterion_group!(benches, bench_inclusion);
criterion_main!(benches);
