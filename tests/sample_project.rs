//! The committed Fernhollow demo equals the generator's output, loads, and carries exactly
//! the planted flaws; synthetic projects load with their true tree.

use std::collections::HashMap;
use std::fs;
use std::path::Path;

use treewright::model::gaussian::{
    bhattacharyya_coefficient, chi2_quantile, containment, coverage,
};
use treewright::model::sample::{
    DEMO_DIM, SyntheticSpec, planted_flaws, synthetic_gaussians, write_demo, write_synthetic,
};
use treewright::model::{CovarianceKind, Project};

const ALPHA: f64 = 0.95;
const SAMPLES: usize = 4000;
const SEED: u64 = 7;

fn committed() -> std::path::PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("sample-projects/fernhollow")
}

fn demo() -> (tempfile::TempDir, Project) {
    let dir = tempfile::tempdir().unwrap();
    write_demo(dir.path()).unwrap();
    let p = Project::load(dir.path()).unwrap();
    (dir, p)
}

#[test]
fn committed_demo_is_byte_identical_to_the_generator() {
    let dir = tempfile::tempdir().unwrap();
    write_demo(dir.path()).unwrap();
    let mut generated: Vec<String> = fs::read_dir(dir.path())
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    generated.sort();
    assert_eq!(
        generated,
        [
            "means.npy",
            "phrases.json",
            "project.json",
            "tree.json",
            "users.json",
            "variances.npy"
        ]
    );
    for name in &generated {
        let want = fs::read(dir.path().join(name)).unwrap();
        let have = fs::read(committed().join(name))
            .unwrap_or_else(|e| panic!("sample-projects/fernhollow/{name}: {e}"));
        assert!(
            want == have,
            "sample-projects/fernhollow/{name} differs from the generator"
        );
    }
    assert!(!committed().join("overrides.json").exists());
    assert!(committed().join("README.md").is_file());
    Project::load(&committed()).unwrap();
}

#[test]
fn demo_shape_matches_the_brief() {
    let (_d, p) = demo();
    let n = p.phrases.len();
    assert!((200..=400).contains(&n), "{n} phrases");
    assert_eq!(p.gaussians.dim(), DEMO_DIM);
    assert_eq!(p.gaussians.kind(), CovarianceKind::Diagonal);
    assert_eq!(p.users.len(), 5);
    let tree = p.tree.as_ref().unwrap();
    assert_eq!(tree.max_depth(), 3);
    assert_eq!(p.manifest.overrides.as_deref(), Some("overrides.json"));
    let unplaced: Vec<&str> = tree.unplaced().iter().map(|&u| p.phrases.id(u)).collect();
    let mut want: Vec<&str> = planted_flaws()
        .iter()
        .filter(|f| f.kind == "unplaced")
        .map(|f| f.node)
        .collect();
    want.sort();
    let mut have = unplaced.clone();
    have.sort();
    assert_eq!(have, want);
    // every flaw names phrases that exist
    for f in planted_flaws() {
        assert!(p.phrases.get(f.node).is_some(), "{}", f.node);
        if let Some(o) = f.other {
            assert!(p.phrases.get(o).is_some(), "{o}");
        }
    }
}

#[test]
fn generator_is_deterministic() {
    let a = tempfile::tempdir().unwrap();
    let b = tempfile::tempdir().unwrap();
    let spec = SyntheticSpec {
        phrases: 300,
        dim: 8,
        full_covariance: true,
        seed: 3,
        ..SyntheticSpec::default()
    };
    write_synthetic(a.path(), &spec).unwrap();
    write_synthetic(b.path(), &spec).unwrap();
    for name in [
        "project.json",
        "phrases.json",
        "means.npy",
        "covariances.npy",
        "tree.json",
    ] {
        assert_eq!(
            fs::read(a.path().join(name)).unwrap(),
            fs::read(b.path().join(name)).unwrap(),
            "{name}"
        );
    }
}

#[test]
fn planted_flaws_are_numerically_unambiguous() {
    let (_d, p) = demo();
    let g = &p.gaussians;
    let tree = p.tree.as_ref().unwrap();
    let id = |s: &str| p.phrases.get(s).unwrap();
    let flaws = planted_flaws();
    let flaw = |kind: &str| *flaws.iter().find(|f| f.kind == kind).unwrap();

    // near-duplicate: the only pair with a Bhattacharyya coefficient above 0.9
    let dup = flaw("near-duplicate");
    let (a, b) = (id(dup.node), id(dup.other.unwrap()));
    let bc_dup = bhattacharyya_coefficient(&g.get(a as usize), &g.get(b as usize));
    let mut best_other = (0.0f64, 0, 0);
    for i in 0..g.len() {
        for j in i + 1..g.len() {
            if (i, j) == (a.min(b) as usize, a.max(b) as usize) {
                continue;
            }
            let bc = bhattacharyya_coefficient(&g.get(i), &g.get(j));
            if bc > best_other.0 {
                best_other = (bc, i, j);
            }
        }
    }
    println!(
        "near-duplicate BC {bc_dup:.4}; highest other pair {:.4} ({} / {})",
        best_other.0,
        p.phrases.id(best_other.1 as u32),
        p.phrases.id(best_other.2 as u32)
    );
    assert!(bc_dup > 0.9);
    assert!(best_other.0 < 0.9);
    assert_ne!(tree.parent(a), tree.parent(b));

    // wrong parent: contained in its true parent, not in its placed one
    let wp = flaw("wrong-parent");
    let (node, truep) = (id(wp.node), id(wp.other.unwrap()));
    let placed = tree.parent(node).unwrap();
    assert_ne!(placed, truep);
    let c_true = containment(
        &g.get(node as usize),
        &g.get(truep as usize),
        ALPHA,
        SAMPLES,
        SEED,
    );
    let c_placed = containment(
        &g.get(node as usize),
        &g.get(placed as usize),
        ALPHA,
        SAMPLES,
        SEED,
    );
    println!(
        "wrong-parent containment in true parent {:.3}, in placed parent {} {:.3}",
        c_true.value,
        p.phrases.id(placed),
        c_placed.value
    );
    assert!(c_true.value > 0.8);
    assert!(c_placed.value < 0.1);

    // inverted generality
    let inv = flaw("inverted-generality");
    let (node, par) = (id(inv.node), id(inv.other.unwrap()));
    assert_eq!(tree.parent(node), Some(par));
    let gap = g.log_det(node as usize) - g.log_det(par as usize);
    println!("inverted-generality: ln det child - parent = {gap:.2} nats");
    assert!(gap > 1.0);

    // every other child: narrower than its parent and well contained in it
    let skip: Vec<u32> = vec![id(dup.node), id(wp.node), id(inv.node)];
    let mut worst = (1.0f64, 0u32);
    let mut min_drop = f64::INFINITY;
    for c in tree.preorder() {
        let Some(par) = tree.parent(c) else { continue };
        if skip.contains(&c) {
            continue;
        }
        let s = containment(&g.get(c as usize), &g.get(par as usize), ALPHA, 1000, SEED);
        if s.value < worst.0 {
            worst = (s.value, c);
        }
        min_drop = min_drop.min(g.log_det(par as usize) - g.log_det(c as usize));
    }
    println!(
        "clean children: lowest containment {:.3} ({}), smallest ln det drop {min_drop:.2}",
        worst.0,
        p.phrases.id(worst.1)
    );
    assert!(worst.0 > 0.8);
    assert!(min_drop > 1.0);

    // coverage gap: the gap parent is covered far worse than every other parent
    let gp = id(flaw("coverage-gap").node);
    let mut covs: HashMap<u32, f64> = HashMap::new();
    for par in tree.preorder() {
        let kids: Vec<_> = tree
            .children(par)
            .iter()
            .map(|&k| g.get(k as usize))
            .collect();
        if kids.is_empty() {
            continue;
        }
        covs.insert(
            par,
            coverage(&g.get(par as usize), &kids, ALPHA, 2000, SEED).value,
        );
    }
    let gap_cov = covs[&gp];
    let mut others: Vec<f64> = covs
        .iter()
        .filter(|(k, _)| **k != gp)
        .map(|(_, v)| *v)
        .collect();
    others.sort_by(f64::total_cmp);
    println!(
        "coverage-gap parent {gap_cov:.3}; other parents min {:.3} median {:.3} ({} parents)",
        others[0],
        others[others.len() / 2],
        others.len()
    );
    assert!(gap_cov < 0.5);
    assert!(others[0] > gap_cov + 0.2);
}

#[test]
fn synthetic_project_loads_with_its_true_tree() {
    let spec = SyntheticSpec {
        phrases: 2000,
        dim: 16,
        branching: 3,
        depth: 2,
        full_covariance: false,
        seed: 11,
    };
    let dir = tempfile::tempdir().unwrap();
    write_synthetic(dir.path(), &spec).unwrap();
    let p = Project::load(dir.path()).unwrap();
    assert_eq!(p.phrases.len(), 2000);
    assert_eq!(p.gaussians.dim(), 16);
    let tree = p.tree.as_ref().unwrap();
    assert_eq!(tree.node_count(), 2000);
    assert_eq!(tree.max_depth(), 3);
    let root = tree.root();
    assert_eq!(p.phrases.id(root), "n");
    assert_eq!(tree.children(root).len(), 3);
    for &c in tree.children(root) {
        assert_eq!(tree.children(c).len(), 3);
    }
    // 1 + 3 + 9 clusters; the 1987 leaves are dealt evenly to the 9 deepest clusters
    let leaves: Vec<_> = (0..2000u32)
        .filter(|&i| tree.children(i).is_empty())
        .collect();
    assert_eq!(leaves.len(), 1987);
    let (_, g, tf) = synthetic_gaussians(&spec);
    assert_eq!(tf, tree.to_file(&p.phrases));
    assert_eq!(g.means_flat(), p.gaussians.means_flat());
    // clusters sit inside their parents: the offset of 3 sd over 16 dims plus a quarter of
    // the variance stays well below the 95 % radius (chi-square table)
    let r2 = chi2_quantile(16, 0.95);
    // NIST/SEMATECH e-Handbook of Statistical Methods §1.3.6.7.4, table of chi-square
    // critical values: upper 5 % point for 16 degrees of freedom is 26.296 (recomputed with
    // SciPy in docs/maths.md §8: 26.296228)
    assert!((r2 - 26.296).abs() < 1e-3);
    for &c in tree.children(root) {
        let s = containment(&g.get(c as usize), &g.get(root as usize), 0.95, 2000, 1);
        assert!(s.value > 0.9, "{}", s.value);
    }
}

#[test]
fn full_covariance_synthetic_matches_diagonal_geometry() {
    let spec = SyntheticSpec {
        phrases: 200,
        dim: 6,
        branching: 2,
        depth: 2,
        full_covariance: true,
        seed: 5,
    };
    let dir = tempfile::tempdir().unwrap();
    write_synthetic(dir.path(), &spec).unwrap();
    let p = Project::load(dir.path()).unwrap();
    assert_eq!(p.gaussians.kind(), CovarianceKind::Full);
    let (_, diag, _) = synthetic_gaussians(&SyntheticSpec {
        full_covariance: false,
        ..spec.clone()
    });
    // a rotation keeps ln det and every divergence
    for i in 0..200 {
        assert!((p.gaussians.log_det(i) - diag.log_det(i)).abs() < 1e-4);
    }
    let bc_full = bhattacharyya_coefficient(&p.gaussians.get(1), &p.gaussians.get(2));
    let bc_diag = bhattacharyya_coefficient(&diag.get(1), &diag.get(2));
    assert!((bc_full - bc_diag).abs() < 1e-4, "{bc_full} vs {bc_diag}");
}

#[test]
fn sample_subcommand_writes_projects_and_refuses_bad_arguments() {
    let exe = env!("CARGO_BIN_EXE_treewright");
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("syn");
    let st = std::process::Command::new(exe)
        .args([
            "sample",
            "--synthetic",
            "120",
            "--dim",
            "5",
            "--branching",
            "2",
        ])
        .args(["--depth", "2", "--full", "--seed", "4", "--out"])
        .arg(&out)
        .output()
        .unwrap();
    assert!(
        st.status.success(),
        "{}",
        String::from_utf8_lossy(&st.stderr)
    );
    let p = Project::load(&out).unwrap();
    assert_eq!(p.gaussians.kind(), CovarianceKind::Full);
    assert_eq!((p.phrases.len(), p.gaussians.dim()), (120, 5));
    assert_eq!(p.tree.as_ref().unwrap().max_depth(), 3);

    let demo = dir.path().join("demo");
    let st = std::process::Command::new(exe)
        .args(["sample", "--out"])
        .arg(&demo)
        .output()
        .unwrap();
    assert!(st.status.success());
    assert_eq!(
        fs::read(demo.join("tree.json")).unwrap(),
        fs::read(committed().join("tree.json")).unwrap()
    );

    let st = std::process::Command::new(exe)
        .args(["sample", "--synthetic", "0", "--out"])
        .arg(dir.path().join("zero"))
        .output()
        .unwrap();
    assert_eq!(st.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&st.stderr).contains("at least 1"));
}
