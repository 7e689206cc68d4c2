//! CPU time of one workbench frame (layout + tessellation, no GPU): the Fernhollow demo, and
//! a generated 100 000-node tree fully expanded with a node selected in the middle.
//!
//! `FRAME_PROJECT=DIR cargo bench --bench frame` benches that project instead (e.g. the
//! 1 000 000-phrase project of `SCALE_MILLION=1 bash benches/scale.sh`), fully expanded
//! with a node selected in the middle, and prints the time to open and audit it.

use std::hint::black_box;
use std::path::Path;
use std::time::Instant;

use criterion::{Criterion, criterion_group, criterion_main};
use egui::{Pos2, RawInput, Rect, Vec2};
use treewright::gui::{Action, App, Doc, Settings};
use treewright::model::sample::{SyntheticSpec, write_demo, write_synthetic};

fn app_for(dir: &Path) -> App {
    let t = Instant::now();
    let mut doc = Doc::open(dir).expect("project opens");
    doc.wait_for_audit();
    eprintln!(
        "opened and audited {} phrases in {:.1} s",
        doc.project.phrases.len(),
        t.elapsed().as_secs_f64()
    );
    App::new(doc, Settings::default())
}

fn input() -> RawInput {
    RawInput {
        screen_rect: Some(Rect::from_min_size(Pos2::ZERO, Vec2::new(1280.0, 800.0))),
        ..RawInput::default()
    }
}

fn frame(ctx: &egui::Context, app: &mut App) -> usize {
    let out = ctx.run_ui(input(), |ui| app.ui(ui));
    ctx.tessellate(out.shapes, out.pixels_per_point).len()
}

fn frames(c: &mut Criterion) {
    let tmp = tempfile::tempdir().expect("temporary folder");
    let mut group = c.benchmark_group("frame");
    group.sample_size(60);
    if let Some(dir) = std::env::var_os("FRAME_PROJECT") {
        let mut app = app_for(Path::new(&dir));
        let t = Instant::now();
        app.tree_panel.expand_all();
        let eff = app.doc.eff.as_ref().expect("the project has a tree");
        let order = eff.tree.preorder();
        let (nodes, middle) = (eff.tree.node_count(), order[order.len() / 2]);
        app.apply(Action::Reveal(middle));
        let ctx = egui::Context::default();
        for _ in 0..3 {
            frame(&ctx, &mut app);
        }
        eprintln!(
            "expanded {nodes} nodes and drew 3 frames in {:.2} s",
            t.elapsed().as_secs_f64()
        );
        group.bench_function(format!("{nodes} nodes fully expanded, one selected"), |b| {
            b.iter(|| black_box(frame(&ctx, &mut app)))
        });
        group.finish();
        return;
    }

    let demo = tmp.path().join("demo");
    write_demo(&demo).expect("demo written");
    let mut app = app_for(&demo);
    let p = app
        .doc
        .project
        .phrases
        .get("peat-free-compost")
        .expect("demo phrase");
    app.apply(Action::Reveal(p));
    let ctx = egui::Context::default();
    for _ in 0..3 {
        frame(&ctx, &mut app);
    }
    group.bench_function("demo, one node selected", |b| {
        b.iter(|| black_box(frame(&ctx, &mut app)))
    });

    let big = tmp.path().join("big");
    let spec = SyntheticSpec {
        phrases: 100_000,
        dim: 16,
        branching: 10,
        depth: 4,
        full_covariance: false,
        seed: 7,
    };
    write_synthetic(&big, &spec).expect("synthetic project written");
    let mut app = app_for(&big);
    app.tree_panel.expand_all();
    let eff = app.doc.eff.as_ref().expect("synthetic project has a tree");
    let order = eff.tree.preorder();
    let middle = order[order.len() / 2];
    assert_eq!(eff.tree.node_count(), 100_000);
    app.apply(Action::Reveal(middle));
    let ctx = egui::Context::default();
    for _ in 0..3 {
        frame(&ctx, &mut app);
    }
    group.bench_function("100000 nodes fully expanded, one selected", |b| {
        b.iter(|| black_box(frame(&ctx, &mut app)))
    });
    group.finish();
}

criterion_group!(benches, frames);
criterion_main!(benches);
