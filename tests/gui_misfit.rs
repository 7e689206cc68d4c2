//! The workbench's banner for a tree that does not fit its embeddings (issue 17, part 6),
//! found by its label with egui_kittest; the demo (a tree that fits) has none.

mod common;

use std::path::Path;

use egui_kittest::Harness;
use egui_kittest::kittest::Queryable;
use rand::SeedableRng;
use rand_distr::{Distribution, StandardNormal};
use rand_xoshiro::Xoshiro256PlusPlus;
use treewright::gui::App;
use treewright::model::phrase::{PhraseRecord, PhraseTable};
use treewright::model::project::ProjectWriter;
use treewright::model::sample::write_demo;
use treewright::model::tree::TreeFile;

const BANNER: &str = "The tree as a whole does not fit the embeddings";

/// `n` rows under an 8-ary tree, means iid N(0, 1), unit variances.
fn random_project(dir: &Path, n: usize, d: usize) {
    let mut rng = Xoshiro256PlusPlus::seed_from_u64(3);
    let means: Vec<f32> = (0..n * d)
        .map(|_| {
            let z: f64 = StandardNormal.sample(&mut rng);
            z as f32
        })
        .collect();
    let ids: Vec<String> = (0..n).map(|i| format!("r{i}")).collect();
    let recs: Vec<PhraseRecord> = ids
        .iter()
        .map(|id| PhraseRecord {
            id: Some(id.clone()),
            label: format!("row {id}"),
        })
        .collect();
    let tree = TreeFile {
        root: ids[0].clone(),
        parent: (1..n)
            .map(|i| (ids[i].clone(), ids[(i - 1) / 8].clone()))
            .collect(),
    };
    ProjectWriter {
        name: "random means",
        phrases: &PhraseTable::from_records(&recs).unwrap(),
        dim: d,
        means: &means,
        variances: &vec![1.0f32; n * d],
        users: &[],
        tree: Some(&tree),
    }
    .write(dir)
    .unwrap();
}

fn open(dir: &std::path::Path) -> Harness<'static, App> {
    common::workbench::open_workbench(dir, [1280.0, 800.0])
}

#[test]
fn a_misfit_tree_shows_the_banner_and_the_demo_does_not() {
    let t = tempfile::tempdir().unwrap();
    let bad = t.path().join("random");
    random_project(&bad, 600, 8);
    let h = open(&bad);
    h.get_by_label(BANNER);
    let good = t.path().join("demo");
    write_demo(&good).unwrap();
    let h = open(&good);
    assert!(h.query_by_label(BANNER).is_none());
}
