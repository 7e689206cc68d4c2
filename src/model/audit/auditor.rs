//! The [`Auditor`]: caches of a full audit and the incremental re-audit after an edit.

use rayon::prelude::*;

use super::calibrate;
use super::confidence_inc::IncConfidence;
use super::rules::Rule;
use super::search::{
    CandidateIndex, NavMemo, Order, Placement, Searcher, needs_search, suspicious,
};
use super::{AuditConfig, AuditReport, Finding, assemble_with, treefit};
use crate::model::edit::{EditRecord, ReviewStatus};
use crate::model::effective::{ApplyProblem, EffectiveTree};
use crate::model::gaussian::{Gaussians, PhraseId};
use crate::model::phrase::PhraseTable;
use crate::model::stats::{Histogram, Stats, StatsEngine};
use crate::model::tree::{NO_PARENT, Tree};

/// What the auditor remembers of the effective tree it saw last.
#[derive(Debug, Clone)]
struct Snapshot {
    parent: Vec<PhraseId>,
    placed: Vec<bool>,
    review: Vec<ReviewStatus>,
    pinned: Vec<bool>,
    /// Shared between copies of the auditor (a copy for a preview costs no 100 000 string
    /// copies); copied on the first rename.
    labels: std::sync::Arc<Vec<String>>,
}

impl Snapshot {
    fn of(eff: &EffectiveTree) -> Self {
        let (parent, placed) = tree_arrays(eff);
        Snapshot {
            parent,
            placed,
            review: eff.review.clone(),
            pinned: eff.pinned.clone(),
            labels: std::sync::Arc::new(eff.labels.clone()),
        }
    }
}

/// Parent (or `NO_PARENT`) and membership of every phrase.
fn tree_arrays(eff: &EffectiveTree) -> (Vec<PhraseId>, Vec<bool>) {
    let n = eff.tree.table_len();
    (
        (0..n as PhraseId)
            .map(|p| eff.tree.parent(p).unwrap_or(NO_PARENT))
            .collect(),
        (0..n as PhraseId).map(|p| eff.tree.is_placed(p)).collect(),
    )
}

/// Holds the statistics, the candidate index and the per-node search results, and updates
/// them incrementally after an edit.
#[derive(Debug, Clone)]
pub struct Auditor {
    pub(super) cfg: AuditConfig,
    /// Never changed after [`Auditor::new`]: shared between copies of the auditor.
    pub(super) engine: std::sync::Arc<StatsEngine>,
    /// Never changed after [`Auditor::new`]: shared between copies of the auditor.
    pub(super) index: std::sync::Arc<CandidateIndex>,
    pub(super) placement: Vec<Placement>,
    snapshot: Snapshot,
    pub(super) report: AuditReport,
    /// The scores behind the placement findings' confidence, kept sorted across edits.
    pub(super) conf: IncConfidence,
    /// The random-parent pairs of the tree-level fit, measured once each.
    fit_cache: treefit::BaselineCache,
    /// The audit of the base tree that the calibration reads its features from (computed
    /// once, the first time there are enough decisions; see [`Auditor::calibrate`]).
    before: Option<Box<AuditReport>>,
}

impl Auditor {
    /// Audit `eff` from scratch and keep the caches. The candidate index is the hierarchy of
    /// this first tree.
    pub fn new(
        g: &Gaussians,
        phrases: &PhraseTable,
        eff: &EffectiveTree,
        problems: &[ApplyProblem],
        cfg: AuditConfig,
    ) -> Self {
        Self::with_nav_min(g, phrases, eff, problems, cfg, super::navindex::WIDE)
    }

    /// [`Auditor::new`] with navigation indexes over the nodes with more than `nav_min`
    /// children (`usize::MAX`: none, every child is scored; for tests).
    pub(super) fn with_nav_min(
        g: &Gaussians,
        phrases: &PhraseTable,
        eff: &EffectiveTree,
        problems: &[ApplyProblem],
        cfg: AuditConfig,
        nav_min: usize,
    ) -> Self {
        Self::with_nav_opts(g, phrases, eff, problems, cfg, nav_min, 0.0, false)
    }

    /// [`Auditor::with_nav_min`] with `nav_bias` nats added to the navigation indexes' KL
    /// bounds (tests only: a positive value is a deliberately broken twin), and with the
    /// broken twin of the first pass's memo when `memo_broken` (`CandidateIndex`).
    #[allow(clippy::too_many_arguments)]
    pub(super) fn with_nav_opts(
        g: &Gaussians,
        phrases: &PhraseTable,
        eff: &EffectiveTree,
        problems: &[ApplyProblem],
        cfg: AuditConfig,
        nav_min: usize,
        nav_bias: f64,
        memo_broken: bool,
    ) -> Self {
        // what was freed before (loading, applying the edits) goes back first (memtrim.rs)
        crate::model::memtrim::release_free_memory();
        let engine = StatsEngine::new(g, &cfg.stats());
        let mut index = CandidateIndex::of(eff);
        index.nav_min = nav_min;
        index.nav_bias = nav_bias;
        index.memo_broken = memo_broken;
        index = index.with_nav();
        let stats = engine.compute(g, eff);
        // the tree-level fit first (treefit.rs)
        let mut fit_cache = treefit::BaselineCache::default();
        let fit = treefit::measure_cached(
            g,
            eff,
            &engine,
            &stats,
            cfg.containment_min,
            cfg.seed,
            &mut fit_cache,
        );
        let order = Order::of(eff);
        let n = g.len();
        let exhaustive = n <= cfg.exhaustive_limit;
        macro_rules! searcher {
            () => {
                Searcher {
                    g,
                    engine: &engine,
                    eff,
                    order: &order,
                    index: &index,
                    cfg: &cfg,
                    exhaustive,
                }
            };
        }
        // every node that needs a search; the results go straight into their slots (no
        // second n-long vector)
        let mut placement = vec![Placement::default(); n];
        // with an index repair to come, every node that clears the better-parent gain is
        // searched again after it, so the wider search waits for that pass
        let repair = !exhaustive && fit.fits;
        // what the first pass found in the navigation indexes, per node, for the pass
        // after the repair (`NavMemo`: the repair leaves those answers as they were)
        let mut memos: std::collections::HashMap<PhraseId, NavMemo> =
            std::collections::HashMap::new();
        {
            let s = searcher!();
            // siblings one after the other: their searches read mostly the same rows, which
            // then stay in the processor's caches (in row order, the siblings of a large
            // synthetic tree lie far apart); each search is independent of the others, so
            // the order changes no answer
            let order = sibling_order(eff);
            for chunk in order.chunks(SEARCH_CHUNK) {
                let fresh: Vec<(Placement, NavMemo)> = chunk
                    .par_iter()
                    .map(|&p| match repair {
                        true => s.place_recording(p),
                        false => (s.place_with(p, true), NavMemo::default()),
                    })
                    .collect();
                for (&p, (pl, m)) in chunk.iter().zip(fresh) {
                    placement[p as usize] = pl;
                    if !m.is_empty() {
                        memos.insert(p, m);
                    }
                }
            }
        }
        if repair {
            // repair the index (skipped when the tree as a whole does not fit: nearly
            // every node would be suspicious and the repaired links would make the
            // search quadratic, for a hierarchy that means nothing; treefit.rs): a suspicious node is also reachable under its best candidate,
            // then the suspicious nodes are searched again
            let suspects: Vec<PhraseId> = (0..n as PhraseId)
                .filter(|&p| suspicious(g, eff, &cfg, &stats, &placement, p))
                .collect();
            for &p in &suspects {
                if let Some((b, _)) = placement[p as usize].best {
                    index.children[b as usize].push(p);
                }
            }
            index = index.with_nav();
            let s = searcher!();
            let fresh: Vec<Placement> = suspects
                .par_iter()
                .map(|&p| s.place_remembered(p, memos.get(&p)))
                .collect();
            for (&p, pl) in suspects.iter().zip(fresh) {
                placement[p as usize] = pl;
            }
        }
        drop(memos);
        // the searches' scratch vectors, freed on two threads, sit in the allocator's
        // per-thread pools: give those pages back before the report is assembled
        crate::model::memtrim::release_free_memory();
        let mut conf = IncConfidence::new(eff, &stats, &placement);
        let mut report = assemble_with(
            g,
            phrases,
            eff,
            problems,
            &cfg,
            stats,
            &placement,
            None,
            Some(&mut conf),
        );
        report.fit = fit;
        // and the assembly's (the sort keys of the findings) before the snapshot is taken
        crate::model::memtrim::release_free_memory();
        Auditor {
            snapshot: Snapshot::of(eff),
            cfg,
            engine: std::sync::Arc::new(engine),
            index: std::sync::Arc::new(index),
            placement,
            report,
            conf,
            fit_cache,
            before: None,
        }
    }

    /// Recalibrate the current report from the reviewer's decisions in `edits`
    /// ([`calibrate`](super::calibrate)): with fewer than
    /// [`MIN_DECISIONS`](super::calibrate::MIN_DECISIONS) decided nodes, or decisions of
    /// one kind only, nothing changes (and the base tree is not audited);
    /// else the `base` tree is audited once (kept for later calls) and the fit is applied.
    /// Call it after [`Auditor::new`] or [`Auditor::update`] (each rebuilds the report
    /// uncalibrated). Never removes a finding.
    pub fn calibrate(
        &mut self,
        g: &Gaussians,
        phrases: &PhraseTable,
        base: &Tree,
        edits: &[EditRecord],
    ) {
        if !calibrate::can_fit(&calibrate::judged(phrases, edits)) {
            return;
        }
        let before = self.before.get_or_insert_with(|| {
            let eff = EffectiveTree::from_base(base, phrases);
            Box::new(super::audit(g, phrases, &eff, &[], &self.cfg))
        });
        if let Some(c) = calibrate::Calibration::fit(&calibrate::decisions(before, phrases, edits))
        {
            let cfg = &self.cfg;
            c.apply(&mut self.report, |r| cfg.severity.contains_key(r));
        }
    }

    /// The current report.
    pub fn report(&self) -> &AuditReport {
        &self.report
    }

    /// The configuration in use.
    pub fn config(&self) -> &AuditConfig {
        &self.cfg
    }

    /// Re-audit after the effective tree changed (same phrase table and Gaussians),
    /// recomputing only what the change can affect (see the module documentation).
    pub fn update(
        &mut self,
        g: &Gaussians,
        phrases: &PhraseTable,
        eff: &EffectiveTree,
        problems: &[ApplyProblem],
    ) -> &AuditReport {
        let n = g.len();
        if n != self.placement.len() || eff.tree.table_len() != n {
            // a different phrase table: nothing cached applies
            *self = Auditor::new(g, phrases, eff, problems, self.cfg.clone());
            return &self.report;
        }
        let (new_parent, new_placed) = tree_arrays(eff);
        let mut stat_dirty = vec![false; n];
        let mut search_dirty = vec![false; n];
        let mark = |v: &mut Vec<bool>, p: PhraseId| {
            if p != NO_PARENT {
                v[p as usize] = true;
            }
        };
        for i in 0..n {
            if self.snapshot.parent[i] == new_parent[i] && self.snapshot.placed[i] == new_placed[i]
            {
                continue;
            }
            let p = i as PhraseId;
            let (old_par, new_par) = (self.snapshot.parent[i], new_parent[i]);
            for x in [p, old_par, new_par] {
                mark(&mut stat_dirty, x);
                mark(&mut search_dirty, x);
            }
            // old and new ancestors: their sets of descendants changed
            for chain in [&self.snapshot.parent, &new_parent] {
                let mut cur = chain[i];
                let mut steps = 0;
                while cur != NO_PARENT && steps < n {
                    mark(&mut search_dirty, cur);
                    cur = chain[cur as usize];
                    steps += 1;
                }
            }
            // a phrase that joined the tree may be the better answer for its new siblings
            if new_placed[i] && !self.snapshot.placed[i] && new_par != NO_PARENT {
                for &s in eff.tree.children(new_par) {
                    mark(&mut search_dirty, s);
                }
            }
        }
        let order = Order::of(eff);
        // cached answers that are no longer valid
        for (i, pl) in self.placement.iter().enumerate() {
            if let Some((b, _)) = pl.best {
                let c = i as PhraseId;
                if !eff.tree.is_placed(b) || new_parent[i] == b || order.in_subtree(c, b) {
                    search_dirty[i] = true;
                }
            }
        }
        let stat_list: Vec<PhraseId> = (0..n as PhraseId)
            .filter(|&p| stat_dirty[p as usize])
            .collect();
        let mut stats = std::mem::replace(&mut self.report.stats, empty_stats());
        self.engine.refresh(&mut stats, g, eff, &stat_list, &order);
        let fit = treefit::measure_cached(
            g,
            eff,
            &self.engine,
            &stats,
            self.cfg.containment_min,
            self.cfg.seed,
            &mut self.fit_cache,
        );
        let searcher = Searcher {
            g,
            engine: &self.engine,
            eff,
            order: &order,
            index: &self.index,
            cfg: &self.cfg,
            exhaustive: n <= self.cfg.exhaustive_limit,
        };
        let fresh: Vec<(PhraseId, Placement)> = (0..n as PhraseId)
            .filter(|&p| search_dirty[p as usize])
            .collect::<Vec<_>>()
            .into_par_iter()
            .map(|p| {
                let pl = if needs_search(eff, p) {
                    searcher.place(p)
                } else {
                    Placement::default()
                };
                (p, pl)
            })
            .collect();
        for (p, pl) in fresh {
            self.placement[p as usize] = pl;
        }
        // nodes whose findings must be rebuilt: changed figures or search, review, pin or
        // label; the children of nodes whose fan-out may have changed (single-child chains)
        // and of renamed nodes (their explanations name the parent)
        let mut dirty: Vec<bool> = (0..n).map(|i| stat_dirty[i] || search_dirty[i]).collect();
        let mut renamed = vec![false; n];
        for i in 0..n {
            if self.snapshot.review[i] != eff.review[i] || self.snapshot.pinned[i] != eff.pinned[i]
            {
                dirty[i] = true;
                self.snapshot.review[i] = eff.review[i];
                self.snapshot.pinned[i] = eff.pinned[i];
            }
            if self.snapshot.labels[i] != eff.labels[i] {
                dirty[i] = true;
                renamed[i] = true;
                std::sync::Arc::make_mut(&mut self.snapshot.labels)[i].clone_from(&eff.labels[i]);
            }
        }
        for i in 0..n {
            if stat_dirty[i] || renamed[i] {
                for &c in eff.tree.children(i as PhraseId) {
                    dirty[c as usize] = true;
                }
            }
        }
        let old = std::mem::take(&mut self.report.findings);
        for f in &old {
            if f.other.is_some_and(|o| renamed[o as usize]) {
                dirty[f.node as usize] = true;
            }
        }
        let kept: Vec<Finding> = old
            .into_iter()
            .filter(|f| {
                Rule::from_id(f.rule)
                    .is_some_and(|r| r.node_local() || r.node_local_but_confidence())
                    && !dirty[f.node as usize]
            })
            .collect();
        // the scores behind the confidences change only where figures or searches did
        self.conf.refresh(eff, &stats, &self.placement, |i| {
            stat_dirty[i] || search_dirty[i]
        });
        self.snapshot.parent = new_parent;
        self.snapshot.placed = new_placed;
        self.report = assemble_with(
            g,
            phrases,
            eff,
            problems,
            &self.cfg,
            stats,
            &self.placement,
            Some((&dirty, kept)),
            Some(&mut self.conf),
        );
        self.report.fit = fit;
        &self.report
    }
}

/// Searches run in chunks of this many nodes (the results of one chunk are held at once).
const SEARCH_CHUNK: usize = 1 << 14;

/// Every phrase that needs a candidate search ([`needs_search`]) once: the children of each
/// node together (nodes in row order), then the others (the root, phrases outside the tree).
fn sibling_order(eff: &EffectiveTree) -> Vec<PhraseId> {
    let n = eff.tree.table_len();
    let mut seen = vec![false; n];
    let mut order = Vec::with_capacity(n);
    let mut take = |p: PhraseId, order: &mut Vec<PhraseId>| {
        if !std::mem::replace(&mut seen[p as usize], true) && needs_search(eff, p) {
            order.push(p);
        }
    };
    for p in 0..n as PhraseId {
        for &c in eff.tree.children(p) {
            take(c, &mut order);
        }
    }
    for p in 0..n as PhraseId {
        take(p, &mut order);
    }
    order
}

fn empty_stats() -> Stats {
    Stats {
        nodes: Vec::new(),
        generality: Histogram::of(&[], 1, None),
        containment: Histogram::of(&[], 1, None),
        placed: 0,
        alpha: 0.0,
        samples: 0,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::audit::tests::small_1d;

    #[test]
    fn the_search_order_lists_every_searched_phrase_once_siblings_together() {
        // rows r, a, b, a1, u, a2: a1 and a2 (under a) are not next to each other in row
        // order; u is outside the tree (searched: `unplaced` needs its best parent)
        let rows = [
            ("r", 0.0, 100.0),
            ("a", -5.0, 10.0),
            ("b", 5.0, 10.0),
            ("a1", -6.0, 1.0),
            ("u", 6.0, 1.0),
            ("a2", -4.0, 1.0),
        ];
        let (t, _g, eff) = small_1d(&rows, &[("a", "r"), ("b", "r"), ("a1", "a"), ("a2", "a")]);
        let id = |s: &str| t.get(s).unwrap();
        let order = sibling_order(&eff);
        let want: Vec<PhraseId> = ["a", "b", "a1", "a2", "r", "u"].map(id).to_vec();
        assert_eq!(order, want);
        // the same set as the row-order loop it replaced
        let mut sorted = order.clone();
        sorted.sort_unstable();
        let all: Vec<PhraseId> = (0..rows.len() as PhraseId)
            .filter(|&p| needs_search(&eff, p))
            .collect();
        assert_eq!(sorted, all);
    }
}
