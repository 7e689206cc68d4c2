//! The recursion over clusters (step 4) and [`build`], the entry point.

use std::collections::BTreeMap;
use std::sync::atomic::{AtomicBool, AtomicUsize, Ordering};

use rayon::prelude::*;

use super::params::{BuildParams, CheckedBuildParams};
use super::partition::{choose_split, flat};
use super::report::{BuildReport, BuiltTree, NodeReport, REPORT_FORMAT, REPORT_VERSION};
use super::representative::representative;
use super::{BuildError, BuildProgress, SALT_CHILD, SALT_REPRESENTATIVE, mix};
use crate::model::gaussian::{Gaussians, PhraseId};
use crate::model::phrase::PhraseTable;
use crate::model::tree::TreeFile;

struct Ctx<'a> {
    g: &'a Gaussians,
    phrases: &'a PhraseTable,
    params: &'a CheckedBuildParams,
    progress: &'a (dyn Fn(BuildProgress) + Sync),
    cancel: &'a AtomicBool,
    placed: AtomicUsize,
    total: usize,
}

impl Ctx<'_> {
    fn check(&self) -> Result<(), BuildError> {
        if self.cancel.load(Ordering::Relaxed) {
            Err(BuildError::Cancelled)
        } else {
            Ok(())
        }
    }

    fn place(&self, count: usize, depth: usize) {
        let placed = self.placed.fetch_add(count, Ordering::Relaxed) + count;
        (self.progress)(BuildProgress {
            placed,
            total: self.total,
            depth,
        });
    }
}

/// The result of building one cluster: its root, its edges and its reports (pre-order).
struct Sub {
    root: PhraseId,
    edges: Vec<(PhraseId, PhraseId)>,
    reports: Vec<NodeReport>,
    depth: usize,
}

fn build_cluster(
    ctx: &Ctx,
    members: Vec<PhraseId>,
    depth: usize,
    seed: u64,
) -> Result<Sub, BuildError> {
    ctx.check()?;
    let p = ctx.params;
    if members.len() == 1 {
        ctx.place(1, depth);
        return Ok(Sub {
            root: members[0],
            edges: Vec::new(),
            reports: Vec::new(),
            depth,
        });
    }
    let rep = representative(
        ctx.g,
        p.similarity,
        &members,
        p.exact_limit,
        p.sample_size,
        p.refine,
        mix(seed, SALT_REPRESENTATIVE),
        ctx.cancel,
    )?;
    ctx.place(1, depth);
    let rest: Vec<PhraseId> = members.iter().copied().filter(|&r| r != rep.row).collect();
    let split = if depth + 1 >= p.max_depth {
        flat(
            &rest,
            "max depth reached: the other members become children",
        )
    } else if rest.len() < p.min_cluster.max(3) {
        flat(
            &rest,
            "fewer members than min_cluster: they become children",
        )
    } else {
        choose_split(ctx.g, p, &rest, seed, ctx.cancel)?
    };
    let mut report = NodeReport {
        node: ctx.phrases.id(rep.row).to_string(),
        depth,
        size: members.len(),
        representative_score: rep.score,
        score_sample: rep.sample,
        k_tried: split.k_tried,
        inertia: split.inertia,
        elbow_rows: split.elbow_rows,
        chosen_k: split.chosen_k,
        reason: split.reason,
        cluster_sizes: split.clusters.iter().map(Vec::len).collect(),
    };
    drop(members);
    if split.chosen_k == 0 {
        ctx.place(rest.len(), depth + 1);
        report.cluster_sizes = vec![1; rest.len()];
        return Ok(Sub {
            root: rep.row,
            edges: rest.iter().map(|&c| (c, rep.row)).collect(),
            reports: vec![report],
            depth: depth + usize::from(!rest.is_empty()),
        });
    }
    let subs: Vec<Result<Sub, BuildError>> = split
        .clusters
        .into_par_iter()
        .enumerate()
        .map(|(i, c)| build_cluster(ctx, c, depth + 1, mix(seed, SALT_CHILD + i as u64)))
        .collect();
    let mut edges = Vec::with_capacity(rest.len());
    let mut reports = vec![report];
    let mut max_depth = depth;
    for s in subs {
        let s = s?;
        edges.push((s.root, rep.row));
        edges.extend(s.edges);
        reports.extend(s.reports);
        max_depth = max_depth.max(s.depth);
    }
    Ok(Sub {
        root: rep.row,
        edges,
        reports,
        depth: max_depth,
    })
}

/// Build a tree over `rows` (all phrases when None) of `g` with `params`.
///
/// `progress` is called (from worker threads) whenever phrases are placed; setting `cancel`
/// stops the build promptly with [`BuildError::Cancelled`]. The tree covers every given
/// phrase exactly once; same input, parameters and seed give identical output.
pub fn build(
    g: &Gaussians,
    phrases: &PhraseTable,
    rows: Option<&[PhraseId]>,
    params: &BuildParams,
    progress: &(dyn Fn(BuildProgress) + Sync),
    cancel: &AtomicBool,
) -> Result<BuiltTree, BuildError> {
    let params = params.clone().check()?;
    if phrases.len() != g.len() {
        return Err(BuildError::Mismatch {
            phrases: phrases.len(),
            gaussians: g.len(),
        });
    }
    let members: Vec<PhraseId> = match rows {
        None => (0..g.len() as PhraseId).collect(),
        Some(r) => {
            let mut seen = vec![false; g.len()];
            for &x in r {
                let xi = x as usize;
                if xi >= g.len() {
                    return Err(BuildError::UnknownRow {
                        row: x,
                        len: g.len(),
                    });
                }
                if seen[xi] {
                    return Err(BuildError::DuplicateRow(phrases.id(x).to_string()));
                }
                seen[xi] = true;
            }
            let mut v = r.to_vec();
            v.sort_unstable();
            v
        }
    };
    if members.is_empty() {
        return Err(BuildError::Empty);
    }
    let ctx = Ctx {
        g,
        phrases,
        params: &params,
        progress,
        cancel,
        placed: AtomicUsize::new(0),
        total: members.len(),
    };
    let total = members.len();
    // what the caller freed before (the project's old tree, loading) goes back first
    // (memtrim.rs)
    crate::model::memtrim::release_free_memory();
    let sub = build_cluster(&ctx, members, 0, mix(params.seed, 0))?;
    let mut parent = BTreeMap::new();
    for (c, p) in &sub.edges {
        parent.insert(phrases.id(*c).to_string(), phrases.id(*p).to_string());
    }
    let tree_file = TreeFile {
        root: phrases.id(sub.root).to_string(),
        parent,
    };
    Ok(BuiltTree {
        tree_file,
        report: BuildReport {
            format: REPORT_FORMAT.to_string(),
            version: REPORT_VERSION,
            method: super::report::BuildMethod::Divisive,
            params: params.clone().into_inner(),
            phrases: total,
            dim: g.dim(),
            root: phrases.id(sub.root).to_string(),
            depth: sub.depth,
            nodes: sub.reports,
            inclusion: None,
        },
    })
}
