//! The incremental confidence (`confidence_inc.rs`): after random edits the auditor's
//! report equals one assembled from scratch with [`Confidences::of`]
//! (`confidence::Confidences::of`) over the same statistics and searches, to the bit.

use rand::{Rng, SeedableRng};
use rand_xoshiro::Xoshiro256PlusPlus;

use super::tests::*;
use super::*;
use crate::model::edit::ReviewStatus;
use crate::model::tree::NO_PARENT;

/// The first difference between two reports (floats compared as bits), if any.
fn difference(got: &AuditReport, want: &AuditReport) -> Option<String> {
    if got.findings.len() != want.findings.len() {
        return Some(format!(
            "{} findings vs {}",
            got.findings.len(),
            want.findings.len()
        ));
    }
    for (i, (a, b)) in got.findings.iter().zip(&want.findings).enumerate() {
        let key = |f: &Finding| {
            (
                f.confidence.to_bits(),
                f.evidence.to_bits(),
                f.score.to_bits(),
                f.threshold.to_bits(),
                f.severity,
            )
        };
        if a != b || key(a) != key(b) {
            return Some(format!("finding {i}: {a:?} vs {b:?}"));
        }
    }
    (got != want).then(|| "statistics differ".to_string())
}

/// Run `steps` random edits (moves, moves back, approvals, pins, renames; fixed seed) on a
/// misplaced nested tree, comparing the auditor after each with a from-scratch assemble;
/// returns the first difference. `broken` turns on the twin that leaves old scores in the
/// sorted arrays.
fn run(steps: usize, broken: bool) -> Option<String> {
    let nest = Nested::new(4, 4, 8, 23);
    let g = nest.gaussians();
    let (mut parent, _) = misplace(&nest.parent, 0.05, 4);
    let cfg = AuditConfig {
        exhaustive_limit: 0,
        ..AuditConfig::default()
    };
    let mut eff = nest.eff(&parent);
    let mut auditor = Auditor::new(&g, &nest.phrases, &eff, &[], cfg.clone());
    auditor.conf.broken_keeps_old_scores = broken;
    let mut rng = Xoshiro256PlusPlus::seed_from_u64(1515);
    let n = nest.len();
    let mut moves: Vec<(PhraseId, PhraseId)> = Vec::new();
    for step in 0..steps {
        let (review, pinned, labels) = (eff.review.clone(), eff.pinned.clone(), eff.labels.clone());
        match rng.gen_range(0..10) {
            // move a node back where it was
            0 | 1 if !moves.is_empty() => {
                let (c, old) = moves.swap_remove(rng.gen_range(0..moves.len()));
                if !is_desc(&parent, c, old) {
                    parent[c as usize] = old;
                }
            }
            // move a node under a random other one
            0..=5 => loop {
                let c = rng.gen_range(1..n) as PhraseId;
                let t = rng.gen_range(0..n) as PhraseId;
                if t != parent[c as usize] && !is_desc(&parent, c, t) {
                    moves.push((c, parent[c as usize]));
                    parent[c as usize] = t;
                    break;
                }
            },
            _ => {}
        }
        assert!(parent[0] == NO_PARENT);
        eff = nest.eff(&parent);
        eff.review = review;
        eff.pinned = pinned;
        eff.labels = labels;
        let x = rng.gen_range(0..n);
        match rng.gen_range(0..6) {
            0 => eff.review[x] = ReviewStatus::Approved,
            1 => eff.pinned[x] = !eff.pinned[x],
            2 => eff.labels[x] = format!("renamed {x} at {step}"),
            _ => {}
        }
        let got = auditor.update(&g, &nest.phrases, &eff, &[]).clone();
        let stats = auditor.engine.compute(&g, &eff);
        let want = assemble(
            &g,
            &nest.phrases,
            &eff,
            &[],
            &cfg,
            stats,
            &auditor.placement,
        );
        if let Some(d) = difference(&got, &want) {
            return Some(format!("step {step}: {d}"));
        }
    }
    None
}

#[test]
fn incremental_confidence_equals_a_full_audit() {
    // 60 random edits; the tree (341 nodes) has placement findings of every strength, so
    // both the partial Benjamini–Hochberg pass and its widening are exercised
    assert_eq!(run(60, false), None);
}

#[test]
fn a_twin_that_keeps_old_scores_is_caught() {
    // the broken twin (`IncConfidence::broken_keeps_old_scores`: an edit inserts the new
    // scores without removing the old ones, so medians, MADs and ranks drift) must be
    // told apart from the full computation by the same comparison
    let d = run(60, true);
    assert!(d.is_some(), "the broken twin went unnoticed");
}
