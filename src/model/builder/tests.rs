//! Tests of the whole builder and of its steps.

use std::collections::BTreeMap;
use std::sync::atomic::{AtomicBool, AtomicUsize, Ordering};

use rand::{Rng, SeedableRng};
use rand_xoshiro::Xoshiro256Plus;

use super::kselect::pick_k;
use super::representative::{SimBlock, mean_scores, screen_scores};
use super::*;
use crate::model::fsutil::to_json_pretty;
use crate::model::gaussian::{Gaussians, Similarity};
use crate::model::gaussian::{bhattacharyya_coefficient, log_expected_likelihood, sym_kl};
use crate::model::phrase::PhraseRecord;
use crate::model::phrase::PhraseTable;
use crate::model::tree::Tree;
use crate::model::tree::TreeFile;
use rand_distr::{Distribution, StandardNormal};

fn table(n: usize) -> PhraseTable {
    let recs: Vec<PhraseRecord> = (0..n)
        .map(|i| PhraseRecord {
            id: Some(format!("tag-{i:05}")),
            label: format!("tag {i}"),
        })
        .collect();
    PhraseTable::from_records(&recs).unwrap()
}

/// A planted hierarchy: one broad root phrase, `b1` groups, each with `b2` sub-groups,
/// each with `leaves` narrow phrases. Returns the Gaussians and, per row, its
/// (level-1 group, level-2 group) or None for the root.
#[allow(clippy::type_complexity)]
fn planted(
    d: usize,
    b1: usize,
    b2: usize,
    leaves: usize,
    seed: u64,
) -> (Gaussians, Vec<Option<(usize, usize)>>) {
    let mut rng = Xoshiro256Plus::seed_from_u64(seed);
    let mut normal = |s: f64| -> f64 {
        let z: f64 = StandardNormal.sample(&mut rng);
        s * z
    };
    let mut means = Vec::new();
    let mut vars = Vec::new();
    let mut truth = Vec::new();
    let mut push = |m: &[f64], v: f64, t: Option<(usize, usize)>, means: &mut Vec<f64>| {
        means.extend_from_slice(m);
        vars.extend(std::iter::repeat_n(v, d));
        truth.push(t);
    };
    push(&vec![0.0; d], 30.0, None, &mut means);
    for a in 0..b1 {
        let ca: Vec<f64> = (0..d).map(|_| normal(10.0)).collect();
        push(&ca, 4.0, Some((a, usize::MAX)), &mut means);
        for b in 0..b2 {
            let cb: Vec<f64> = ca.iter().map(|x| x + normal(2.5)).collect();
            push(&cb, 1.0, Some((a, b)), &mut means);
            for _ in 0..leaves {
                let cl: Vec<f64> = cb.iter().map(|x| x + normal(0.4)).collect();
                push(&cl, 0.1, Some((a, b)), &mut means);
            }
        }
    }
    let n = truth.len();
    (
        Gaussians::from_diagonal(n, d, means, vars, 1e-6).unwrap(),
        truth,
    )
}

fn random_gaussians(n: usize, d: usize, seed: u64) -> Gaussians {
    let mut rng = Xoshiro256Plus::seed_from_u64(seed);
    let means: Vec<f64> = (0..n * d).map(|_| rng.gen_range(-3.0..3.0)).collect();
    let vars: Vec<f64> = (0..n * d).map(|_| rng.gen_range(0.2..2.0)).collect();
    Gaussians::from_diagonal(n, d, means, vars, 1e-6).unwrap()
}

fn quiet() -> impl Fn(BuildProgress) + Sync {
    |_| {}
}

/// The tree must be valid and hold every given row exactly once.
fn assert_covers(t: &TreeFile, phrases: &PhraseTable, rows: &[PhraseId]) -> Tree {
    assert_eq!(t.parent.len() + 1, rows.len(), "node count");
    assert!(!t.parent.contains_key(&t.root), "root has a parent");
    let tree = Tree::from_id_map(phrases, &t.root, &t.parent).expect("valid tree");
    for &r in rows {
        assert!(tree.is_placed(r), "{} is not placed", phrases.id(r));
    }
    assert_eq!(tree.node_count(), rows.len());
    tree
}

#[test]
fn exact_scores_use_each_pair_once_with_the_same_result() {
    let g = random_gaussians(120, 7, 5);
    let rows: Vec<PhraseId> = (0..120).rev().collect();
    let cancel = AtomicBool::new(false);
    for sim in [Similarity::Elk, Similarity::Bhattacharyya, Similarity::Kl] {
        let a = exact_scores(&g, sim, &rows, &cancel).unwrap();
        let b = mean_scores(&g, sim, &rows, &rows, &cancel).unwrap();
        let bits = |v: &[f64]| v.iter().map(|x| x.to_bits()).collect::<Vec<_>>();
        assert_eq!(bits(&a), bits(&b), "{sim:?}");
    }
}

#[test]
fn screening_scores_agree_with_the_f64_scores() {
    let g = random_gaussians(300, 13, 8);
    let rows: Vec<PhraseId> = (0..300).collect();
    let cancel = AtomicBool::new(false);
    for sim in [Similarity::Elk, Similarity::Bhattacharyya, Similarity::Kl] {
        let a = mean_scores(&g, sim, &rows, &rows[..100], &cancel).unwrap();
        let b = screen_scores(&g, sim, &rows, &rows[..100], &cancel).unwrap();
        for (x, y) in a.iter().zip(&b) {
            assert!(
                (x - y).abs() <= 1e-4 * x.abs().max(1e-3),
                "{sim:?}: {x} vs {y}"
            );
        }
    }
}

#[test]
fn block_similarities_match_the_reference_formulas() {
    let g = random_gaussians(6, 5, 3);
    let rows: Vec<PhraseId> = (0..6).collect();
    for sim in [Similarity::Elk, Similarity::Bhattacharyya, Similarity::Kl] {
        let b = SimBlock::new(&g, sim, &rows);
        for i in 0..6 {
            for j in 0..6 {
                let (p, q) = (g.get(i), g.get(j));
                let want = match sim {
                    Similarity::Elk => log_expected_likelihood(&p, &q),
                    Similarity::Bhattacharyya => bhattacharyya_coefficient(&p, &q),
                    Similarity::Kl => -sym_kl(&p, &q),
                };
                let got = b.pair(i, &b, j);
                assert!(
                    (got - want).abs() <= 1e-9 * want.abs().max(1.0),
                    "{sim:?} {i} {j}"
                );
                assert_eq!(got.to_bits(), b.pair(j, &b, i).to_bits(), "symmetry");
            }
        }
    }
}

#[test]
fn planted_hierarchy_is_recovered() {
    let (g, truth) = planted(8, 4, 3, 12, 5);
    let n = g.len();
    let phrases = table(n);
    let params = BuildParams::default();
    let built = build(
        &g,
        &phrases,
        None,
        &params,
        &quiet(),
        &AtomicBool::new(false),
    )
    .unwrap();
    let all: Vec<PhraseId> = (0..n as PhraseId).collect();
    let tree = assert_covers(&built.tree_file, &phrases, &all);
    // the root cluster splits into the 4 planted groups
    let root_report = built.report.node(&built.tree_file.root).unwrap();
    assert_eq!(root_report.chosen_k, 4, "{root_report:?}");
    // Each phrase's ancestor at depth `level` defines its built cluster; a cluster is
    // matched with the planted group most of its phrases belong to.
    let depths = tree.depths();
    for level in [1usize, 2] {
        let key = |r: usize| -> Option<(usize, usize)> {
            truth[r].map(|(a, b)| if level == 1 { (a, 0) } else { (a, b) })
        };
        let mut clusters: BTreeMap<PhraseId, BTreeMap<(usize, usize), usize>> = BTreeMap::new();
        let mut counted = 0;
        for r in 0..n {
            let Some(k) = key(r) else { continue };
            if level == 2 && k.1 == usize::MAX {
                continue; // level-1 phrases have no level-2 group
            }
            if (depths[r] as usize) < level {
                continue;
            }
            let mut anc = r as PhraseId;
            while depths[anc as usize] as usize > level {
                anc = tree.parent(anc).unwrap();
            }
            *clusters.entry(anc).or_default().entry(k).or_default() += 1;
            counted += 1;
        }
        let right: usize = clusters
            .values()
            .map(|m| m.values().copied().max().unwrap_or(0))
            .sum();
        let share = right as f64 / counted as f64;
        assert!(
            share >= 0.95,
            "level {level}: {right}/{counted} under the right cluster"
        );
        assert!(
            counted as f64 >= 0.9 * (n - 1 - 4) as f64,
            "level {level}: only {counted} counted"
        );
    }
}

#[test]
fn same_seed_gives_byte_identical_output() {
    let (g, _) = planted(6, 3, 3, 15, 9);
    let phrases = table(g.len());
    let params = BuildParams {
        seed: 42,
        exact_limit: 40,
        sample_size: 30,
        elbow_sample: 50,
        with_variance: 0.5,
        ..BuildParams::default()
    };
    let run = || {
        build(
            &g,
            &phrases,
            None,
            &params,
            &quiet(),
            &AtomicBool::new(false),
        )
        .unwrap()
    };
    let (a, b) = (run(), run());
    assert_eq!(to_json_pretty(&a.tree_file), to_json_pretty(&b.tree_file));
    assert_eq!(to_json_pretty(&a.report), to_json_pretty(&b.report));
    // a single thread gives the same bytes as the shared pool
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(1)
        .build()
        .unwrap();
    let c = pool.install(run);
    assert_eq!(to_json_pretty(&a.report), to_json_pretty(&c.report));
    assert_eq!(to_json_pretty(&a.tree_file), to_json_pretty(&c.tree_file));
}

#[test]
fn cancellation_stops_the_build() {
    let (g, _) = planted(6, 3, 3, 15, 9);
    let phrases = table(g.len());
    let params = BuildParams::default();
    let set = AtomicBool::new(true);
    assert_eq!(
        build(&g, &phrases, None, &params, &quiet(), &set),
        Err(BuildError::Cancelled)
    );
    // cancelled from the progress callback after the first placement
    let flag = AtomicBool::new(false);
    let calls = AtomicUsize::new(0);
    let progress = |_: BuildProgress| {
        calls.fetch_add(1, Ordering::Relaxed);
        flag.store(true, Ordering::Relaxed);
    };
    assert_eq!(
        build(&g, &phrases, None, &params, &progress, &flag),
        Err(BuildError::Cancelled)
    );
    assert!(calls.load(Ordering::Relaxed) < 10, "stopped promptly");
}

#[test]
fn progress_reaches_the_total() {
    let (g, _) = planted(4, 2, 2, 6, 1);
    let phrases = table(g.len());
    let last = AtomicUsize::new(0);
    let progress = |p: BuildProgress| {
        assert_eq!(p.total, g.len());
        last.fetch_max(p.placed, Ordering::Relaxed);
    };
    build(
        &g,
        &phrases,
        None,
        &BuildParams::default(),
        &progress,
        &AtomicBool::new(false),
    )
    .unwrap();
    assert_eq!(last.load(Ordering::Relaxed), g.len());
}

#[test]
fn identical_phrases_become_one_flat_node() {
    let (n, d) = (20, 3);
    let g = Gaussians::from_diagonal(n, d, vec![0.5; n * d], vec![1.0; n * d], 1e-6).unwrap();
    let phrases = table(n);
    let built = build(
        &g,
        &phrases,
        None,
        &BuildParams::default(),
        &quiet(),
        &AtomicBool::new(false),
    )
    .unwrap();
    let all: Vec<PhraseId> = (0..n as PhraseId).collect();
    let tree = assert_covers(&built.tree_file, &phrases, &all);
    // all scores tie, so the lowest row is the representative
    assert_eq!(built.tree_file.root, "tag-00000");
    assert_eq!(tree.max_depth(), 1);
    let r = built.report.node("tag-00000").unwrap();
    assert_eq!(r.chosen_k, 0);
    assert!(r.reason.contains("identical"), "{}", r.reason);
}

#[test]
fn one_dimension_works() {
    let mut means = Vec::new();
    for c in [-10.0, 0.0, 10.0] {
        for i in 0..10 {
            means.push(c + 0.1 * i as f64);
        }
    }
    let n = means.len();
    let g = Gaussians::from_diagonal(n, 1, means, vec![0.5; n], 1e-6).unwrap();
    let phrases = table(n);
    let built = build(
        &g,
        &phrases,
        None,
        &BuildParams::default(),
        &quiet(),
        &AtomicBool::new(false),
    )
    .unwrap();
    let all: Vec<PhraseId> = (0..n as PhraseId).collect();
    assert_covers(&built.tree_file, &phrases, &all);
    let root = built.report.node(&built.tree_file.root).unwrap();
    assert!(root.chosen_k >= 2);
}

#[test]
fn full_covariance_builds_with_the_reference_similarities() {
    // 2-D full covariances: two groups of 12, correlated within each phrase
    let mut means = Vec::new();
    let mut covs = Vec::new();
    for i in 0..24 {
        let c = if i < 12 { -4.0 } else { 4.0 };
        means.extend([c + 0.1 * (i % 12) as f64, 0.05 * i as f64]);
        covs.extend([1.0, 0.3, 0.3, 0.5]);
    }
    let g = Gaussians::from_full(24, 2, means, covs, 1e-6).unwrap();
    let phrases = table(24);
    let params = BuildParams {
        exact_limit: 10,
        sample_size: 8,
        ..BuildParams::default()
    };
    let b = build(
        &g,
        &phrases,
        None,
        &params,
        &quiet(),
        &AtomicBool::new(false),
    )
    .unwrap();
    let all: Vec<PhraseId> = (0..24).collect();
    assert_covers(&b.tree_file, &phrases, &all);
    let root = b.report.node(&b.tree_file.root).unwrap();
    assert_eq!(root.score_sample, 8);
    // the reported score is the exact mean similarity (gaussian.rs formulas)
    let r = phrases.get(&b.tree_file.root).unwrap() as usize;
    let want: f64 = (0..24)
        .filter(|&j| j != r)
        .map(|j| log_expected_likelihood(&g.get(r), &g.get(j)))
        .sum::<f64>()
        / 23.0;
    assert!((root.representative_score - want).abs() < 1e-9);
}

#[test]
fn one_and_two_phrases() {
    let g = Gaussians::from_diagonal(1, 2, vec![1.0, 2.0], vec![1.0, 1.0], 1e-6).unwrap();
    let phrases = table(1);
    let b = build(
        &g,
        &phrases,
        None,
        &BuildParams::default(),
        &quiet(),
        &AtomicBool::new(false),
    )
    .unwrap();
    assert_eq!(b.tree_file.root, "tag-00000");
    assert!(b.tree_file.parent.is_empty());
    assert!(b.report.nodes.is_empty());
    assert_eq!(b.report.depth, 0);

    // two phrases: equal summed similarity, so the broader one is the root
    let g = Gaussians::from_diagonal(
        2,
        2,
        vec![0.0, 0.0, 1.0, 1.0],
        vec![1.0, 1.0, 3.0, 3.0],
        1e-6,
    )
    .unwrap();
    let phrases = table(2);
    for sim in [Similarity::Elk, Similarity::Bhattacharyya, Similarity::Kl] {
        let params = BuildParams {
            similarity: sim,
            ..BuildParams::default()
        };
        let b = build(
            &g,
            &phrases,
            None,
            &params,
            &quiet(),
            &AtomicBool::new(false),
        )
        .unwrap();
        assert_eq!(b.tree_file.root, "tag-00001", "{sim:?}");
        assert_eq!(
            b.tree_file.parent.get("tag-00000").map(String::as_str),
            Some("tag-00001")
        );
        assert_eq!(b.report.depth, 1);
    }
}

#[test]
fn a_subset_of_rows_is_built_alone() {
    let (g, _) = planted(4, 2, 2, 6, 2);
    let phrases = table(g.len());
    let rows: Vec<PhraseId> = (0..g.len() as PhraseId).filter(|r| r % 3 != 0).collect();
    let b = build(
        &g,
        &phrases,
        Some(&rows),
        &BuildParams::default(),
        &quiet(),
        &AtomicBool::new(false),
    )
    .unwrap();
    assert_eq!(b.tree_file.parent.len() + 1, rows.len());
    let tree = Tree::from_id_map(&phrases, &b.tree_file.root, &b.tree_file.parent).unwrap();
    for r in 0..g.len() as PhraseId {
        assert_eq!(tree.is_placed(r), r % 3 != 0);
    }
    let dup = [1, 2, 1];
    assert_eq!(
        build(
            &g,
            &phrases,
            Some(&dup),
            &BuildParams::default(),
            &quiet(),
            &AtomicBool::new(false)
        ),
        Err(BuildError::DuplicateRow("tag-00001".into()))
    );
    assert_eq!(
        build(
            &g,
            &phrases,
            Some(&[]),
            &BuildParams::default(),
            &quiet(),
            &AtomicBool::new(false)
        ),
        Err(BuildError::Empty)
    );
    assert!(matches!(
        build(
            &g,
            &phrases,
            Some(&[9999]),
            &BuildParams::default(),
            &quiet(),
            &AtomicBool::new(false)
        ),
        Err(BuildError::UnknownRow { row: 9999, .. })
    ));
}

#[test]
fn bad_parameters_name_the_field() {
    let g = random_gaussians(5, 2, 1);
    let phrases = table(5);
    let params = BuildParams {
        k_max: 1,
        ..BuildParams::default()
    };
    let e = build(
        &g,
        &phrases,
        None,
        &params,
        &quiet(),
        &AtomicBool::new(false),
    )
    .unwrap_err();
    assert_eq!(e.to_string(), "parameter k_max is 1: it must be ≥ 2");
    let deep = BuildParams {
        max_depth: 65,
        ..BuildParams::default()
    };
    assert_eq!(
        deep.validate().unwrap_err().to_string(),
        "parameter max_depth is 65: it must be between 1 and 64"
    );
    let params = BuildParams {
        fallback_share: 0.0,
        ..BuildParams::default()
    };
    assert!(matches!(
        params.check(),
        Err(ParamError::NotAShare {
            field: "fallback_share",
            ..
        })
    ));
}

#[test]
fn fallback_share_picks_the_smallest_sufficient_k() {
    let p = BuildParams {
        fallback_share: 0.8,
        ..BuildParams::default()
    };
    // a straight line has no knee: drop from k = 1 to 5 is 4; 80 % is reached at k = 5 − …
    let ks = [1, 2, 3, 4, 5];
    let inertia = [10.0, 9.0, 8.0, 7.0, 6.0];
    let (k, why) = pick_k(&ks, &inertia, &p).unwrap();
    // (10 − 7) / 4 = 0.75 < 0.8, (10 − 6) / 4 = 1 ≥ 0.8
    assert_eq!(k, 5, "{why}");
    assert!(why.starts_with("no knee"));
    let (k, why) = pick_k(&[1, 2], &[10.0, 1.0], &p).unwrap();
    assert_eq!((k, why.as_str()), (2, "only k = 2 possible"));
    let (k, why) = pick_k(&ks, &[100.0, 60.0, 10.0, 9.0, 8.5], &p).unwrap();
    assert_eq!(k, 3, "{why}");
    assert!(why.starts_with("knee"));
}

#[test]
fn sampled_representative_is_close_to_the_exact_one() {
    // mid-size data: 1 531 phrases of a planted hierarchy in 16 dimensions, with the
    // default sample size and number of finalists
    let d = BuildParams::default();
    let (g, _) = planted(16, 5, 5, 60, 77);
    let members: Vec<PhraseId> = (0..g.len() as PhraseId).collect();
    let cancel = AtomicBool::new(false);
    for sim in [Similarity::Elk, Similarity::Bhattacharyya, Similarity::Kl] {
        let exact = exact_scores(&g, sim, &members, &cancel).unwrap();
        let best = exact.iter().copied().fold(f64::NEG_INFINITY, f64::max);
        let mut worst_rank = 0;
        let mut worst_gap: f64 = 0.0;
        for seed in 0..5 {
            let rep = representative(
                &g,
                sim,
                &members,
                d.exact_limit,
                d.sample_size,
                d.refine,
                seed,
                &cancel,
            )
            .unwrap();
            assert_eq!(rep.sample, d.sample_size);
            let got = exact[rep.row as usize];
            let rank = exact.iter().filter(|&&s| s > got).count();
            worst_rank = worst_rank.max(rank);
            // shortfall of the chosen phrase's exact score, relative to the best one
            worst_gap = worst_gap.max((best - got) / best.abs());
        }
        eprintln!(
            "{sim:?}: worst rank {worst_rank} of {}, worst relative shortfall {worst_gap:.2e}",
            members.len()
        );
        assert!(worst_rank < 15, "{sim:?}: rank {worst_rank}");
        // BC saturates (≈ 1 inside a tight group, ≈ 0 across groups), so its mean is
        // dominated by a few close neighbours and a 256-member screen is noisier for it
        let limit = if sim == Similarity::Bhattacharyya {
            0.1
        } else {
            0.01
        };
        assert!(worst_gap < limit, "{sim:?}: gap {worst_gap}");
    }
    // within the exact limit the choice is the exact argmax
    let g = random_gaussians(200, 16, 77);
    let rep = representative(
        &g,
        Similarity::Elk,
        &members[..200],
        256,
        64,
        32,
        0,
        &cancel,
    )
    .unwrap();
    let ex = exact_scores(&g, Similarity::Elk, &members[..200], &cancel).unwrap();
    let arg = (0..200).max_by(|&a, &b| ex[a].total_cmp(&ex[b])).unwrap();
    assert_eq!(rep.row as usize, arg);
    assert_eq!(rep.sample, 0);
}
