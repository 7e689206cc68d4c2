//! The inclusion builder on the real check sets of `benches/real/` (expert-made hierarchies
//! with Gaussians computed on the true tree; see its README): ancestor-pair F1 and
//! exact-parent share against `truth-tree.json`, with floors slightly below the measured
//! figures of the default parameters (one configuration for all eight sets).
//!
//! The two figures reimplement `benches/real/measure.py` (`ancestor_pairs`, `tree_scores`),
//! the reference: `measure_matches_the_reference` checks them against the values measure.py
//! wrote into `baseline-before-13-14.json` for the planted trees.
//!
//! `cargo test --release --test inclusion_real -- --ignored --nocapture grid` prints the
//! parameter grid used to choose the defaults (see `grid`).

use std::collections::{BTreeMap, HashSet};
use std::path::{Path, PathBuf};
use std::sync::atomic::AtomicBool;

use treewright::model::Project;
use treewright::model::inclusion::{
    InclusionCost, InclusionParams, InclusionRoot, InclusionTree, SpreadModel, build_inclusion,
};
use treewright::model::tree::TreeFile;

const SETS: [&str; 8] = [
    "icd10cm-circulatory-fitted",
    "icd10cm-circulatory-own-text",
    "wordnet-bird-fitted",
    "wordnet-bird-own-text",
    "wordnet-clothing-fitted",
    "wordnet-clothing-own-text",
    "wordnet-structure-fitted",
    "wordnet-structure-own-text",
];

fn real_dir(set: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("benches/real")
        .join(set)
}

fn read_tree(p: &Path) -> TreeFile {
    serde_json::from_str(&std::fs::read_to_string(p).unwrap()).unwrap()
}

/// (node, ancestor) pairs, as measure.py's `ancestor_pairs`.
fn ancestor_pairs(t: &TreeFile) -> HashSet<(String, String)> {
    let mut out = HashSet::new();
    for n in t.parent.keys() {
        let mut p = t.parent.get(n);
        let mut steps = 0;
        while let Some(q) = p {
            if steps > t.parent.len() {
                break;
            }
            out.insert((n.clone(), q.clone()));
            p = t.parent.get(q);
            steps += 1;
        }
    }
    out
}

/// Ancestor-pair F1, exact-parent share and depth, as measure.py's `tree_scores`.
fn scores(pred: &TreeFile, truth: &TreeFile) -> (f64, f64, usize) {
    let (pp, tp) = (ancestor_pairs(pred), ancestor_pairs(truth));
    let inter = pp.intersection(&tp).count() as f64;
    let (prec, rec) = (inter / pp.len() as f64, inter / tp.len() as f64);
    let f1 = if inter > 0.0 {
        2.0 * prec * rec / (prec + rec)
    } else {
        0.0
    };
    let exact = truth
        .parent
        .iter()
        .filter(|(n, p)| pred.parent.get(*n) == Some(*p))
        .count() as f64
        / truth.parent.len() as f64;
    let depth = pred
        .parent
        .keys()
        .map(|n| {
            let (mut k, mut x) = (0, n);
            while let Some(p) = pred.parent.get(x) {
                x = p;
                k += 1;
            }
            k
        })
        .max()
        .unwrap_or(0);
    (f1, exact, depth)
}

fn build(set: &str, params: InclusionParams) -> InclusionTree {
    let project = Project::load(&real_dir(set)).unwrap();
    let checked = params.check().unwrap();
    build_inclusion(
        &project.gaussians,
        &project.phrases,
        None,
        &[],
        &checked,
        &|_| {},
        &AtomicBool::new(false),
    )
    .unwrap()
}

/// The reference values: measure.py's figures for the planted trees, as written into
/// baseline-before-13-14.json.
#[test]
fn measure_matches_the_reference() {
    let text = std::fs::read_to_string(
        Path::new(env!("CARGO_MANIFEST_DIR")).join("benches/real/baseline-before-13-14.json"),
    )
    .unwrap();
    let base: Vec<serde_json::Value> = serde_json::from_str(&text).unwrap();
    assert_eq!(base.len(), SETS.len());
    for row in base {
        let set = row["project"].as_str().unwrap();
        let d = real_dir(set);
        let (f1, exact, depth) = scores(
            &read_tree(&d.join("tree.json")),
            &read_tree(&d.join("truth-tree.json")),
        );
        let want = &row["planted_tree"];
        assert!((f1 - want["f1"].as_f64().unwrap()).abs() < 1e-12, "{set}");
        assert!(
            (exact - want["exact_parent"].as_f64().unwrap()).abs() < 1e-12,
            "{set}"
        );
        assert_eq!(depth as u64, want["depth"].as_u64().unwrap(), "{set}");
    }
}

/// Floors: the figures measured with the defaults on 2026-12-04 after the coherence pass
/// and the coherent root (F1 0.928/0.903/0.943/0.815/0.967/0.870/0.933/0.856, exact parent
/// 0.919/0.870/0.888/0.700/0.905/0.737/0.848/0.736 in this order), rounded down by 0.01 or
/// more. Before them (cheapest candidate, best-cover root): F1 0.859/0.758/0.902/0.652/
/// 0.939/0.731/0.878/0.641.
/// Raised on 2026-12-04 (build14) after the own-phrase rule of the children spread model
/// (`InclusionParams::own_phrase`), measured F1 0.961/0.903/0.947/0.815/0.982/0.870/0.954/
/// 0.856, exact parent 0.932/0.870/0.887/0.700/0.949/0.737/0.884/0.736 (own-text sets
/// unchanged: the rule applies to the children model only).
const FLOORS: [(&str, f64, f64); 8] = [
    ("icd10cm-circulatory-fitted", 0.95, 0.92),
    ("icd10cm-circulatory-own-text", 0.89, 0.86),
    ("wordnet-bird-fitted", 0.93, 0.87),
    ("wordnet-bird-own-text", 0.80, 0.69),
    ("wordnet-clothing-fitted", 0.97, 0.93),
    ("wordnet-clothing-own-text", 0.86, 0.72),
    ("wordnet-structure-fitted", 0.94, 0.87),
    ("wordnet-structure-own-text", 0.84, 0.72),
];

#[test]
fn defaults_reach_the_floors_on_every_real_set() {
    let mut lines = Vec::new();
    for (set, f1_floor, exact_floor) in FLOORS {
        let t = build(set, InclusionParams::default());
        let truth = read_tree(&real_dir(set).join("truth-tree.json"));
        let (f1, exact, depth) = scores(&t.tree_file, &truth);
        lines.push(format!(
            "{set}: F1 {f1:.3} exact {exact:.3} depth {depth} root {} (cost {:.1})",
            t.tree_file.root, t.total_cost
        ));
        // every phrase exactly once
        let project = Project::load(&real_dir(set)).unwrap();
        assert_eq!(t.tree_file.parent.len() + 1, project.phrases.len());
        assert!(f1 >= f1_floor, "{set}: F1 {f1} below {f1_floor}");
        assert!(
            exact >= exact_floor,
            "{set}: exact {exact} below {exact_floor}"
        );
    }
    println!("{}", lines.join("\n"));
}

/// Depth and fanout limits hold on a real set, every phrase stays placed once, and the
/// refinement pass only lowers the cost.
#[test]
fn limits_hold_on_a_real_set() {
    let set = "icd10cm-circulatory-fitted";
    let truth = read_tree(&real_dir(set).join("truth-tree.json"));
    let free = build(set, InclusionParams::default());
    let t = build(
        set,
        InclusionParams {
            max_depth: Some(5),
            max_fanout: Some(40),
            ..InclusionParams::default()
        },
    );
    let (f1, exact, depth) = scores(&t.tree_file, &truth);
    println!(
        "{set} with max depth 5, max fanout 40: F1 {f1:.3} exact {exact:.3} depth {depth}; {:?}",
        t.stats
    );
    assert!(depth <= 5);
    assert_eq!(t.tree_file.parent.len(), free.tree_file.parent.len());
    assert!(t.total_cost >= free.total_cost - 1e-6 * free.total_cost.abs());
    let mut fanout: BTreeMap<&str, usize> = BTreeMap::new();
    for p in t.tree_file.parent.values() {
        *fanout.entry(p.as_str()).or_default() += 1;
    }
    let over = fanout.values().filter(|&&k| k > 40).count();
    println!("nodes over the fanout limit (the depth limit wins): {over}");
}

/// Prints F1 / exact parent / depth for a grid of parameters on every set (not a check):
/// how the defaults were chosen. Environment: GRID_MARGINS, GRID_BREADTHS (comma lists),
/// GRID_COST (kl, bhattacharyya, both), GRID_ROOT (broadest, best-cover, coherent), GRID_POOL,
/// GRID_SETS, GRID_SHOW_ROOT, GRID_COHERENCE (weight of the coherence pass), GRID_SPREAD (auto, children, points),
/// GRID_SHOW_MODEL.
#[test]
#[ignore]
fn grid() {
    let margins: Vec<f64> = std::env::var("GRID_MARGINS")
        .map(|s| s.split(',').map(|x| x.parse().unwrap()).collect())
        .unwrap_or_else(|_| vec![0.0]);
    let breadths: Vec<f64> = std::env::var("GRID_BREADTHS")
        .map(|s| s.split(',').map(|x| x.parse().unwrap()).collect())
        .unwrap_or_else(|_| vec![0.0]);
    let costs = match std::env::var("GRID_COST").as_deref() {
        Ok("bhattacharyya") => vec![InclusionCost::Bhattacharyya],
        Ok("both") => vec![InclusionCost::Kl, InclusionCost::Bhattacharyya],
        _ => vec![InclusionCost::Kl],
    };
    let root = match std::env::var("GRID_ROOT").as_deref() {
        Ok("best-cover") => InclusionRoot::BestCover,
        Ok("coherent") => InclusionRoot::Coherent,
        _ => InclusionRoot::Broadest,
    };
    let sets: Vec<String> = std::env::var("GRID_SETS")
        .map(|s| s.split(',').map(String::from).collect())
        .unwrap_or_else(|_| SETS.iter().map(|s| s.to_string()).collect());
    let mut truth = BTreeMap::new();
    for s in &sets {
        truth.insert(s.clone(), read_tree(&real_dir(s).join("truth-tree.json")));
    }
    for &cost in &costs {
        for &margin in &margins {
            for &breadth in &breadths {
                let mut row = format!(
                    "{:>13} margin {margin:>5} breadth {breadth:>5}:",
                    cost.as_str()
                );
                for s in &sets {
                    let t = build(
                        s,
                        InclusionParams {
                            cost,
                            generality_margin: margin,
                            breadth_weight: breadth,
                            root,
                            broad_pool: std::env::var("GRID_POOL")
                                .map(|x| x.parse().unwrap())
                                .unwrap_or(InclusionParams::default().broad_pool),
                            coherence_weight: std::env::var("GRID_COHERENCE")
                                .map(|x| x.parse().unwrap())
                                .unwrap_or(InclusionParams::default().coherence_weight),
                            spread_model: match std::env::var("GRID_SPREAD").as_deref() {
                                Ok("children") => SpreadModel::Children,
                                Ok("points") => SpreadModel::Points,
                                _ => SpreadModel::Auto,
                            },
                            ..InclusionParams::default()
                        },
                    );
                    let (f1, exact, depth) = scores(&t.tree_file, &truth[s]);
                    if std::env::var("GRID_SHOW_MODEL").is_ok() {
                        row.push_str(&format!("[{:?}]", t.stats.spread_model));
                    }
                    row.push_str(&format!(" {f1:.3}/{exact:.3}/{depth}"));
                    if std::env::var("GRID_SHOW_ROOT").is_ok() {
                        row.push_str(&format!("({})", t.tree_file.root));
                    }
                }
                println!("{row}");
            }
        }
    }
}
