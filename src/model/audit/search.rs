//! The candidate search of `better-parent`, `near-duplicate` and `unplaced`: exhaustive
//! for small tables, else a beam over a kept navigation hierarchy (see the module
//! documentation of [`super`]).

use std::collections::HashMap;
use std::sync::OnceLock;

use super::AuditConfig;
use super::navindex::{NavIndex, Query, WIDE};
use crate::model::effective::EffectiveTree;
use crate::model::gaussian::{Gaussians, PhraseId, Sampled, bhattacharyya_coefficient, kl};
use crate::model::kernels;
pub(super) use crate::model::stats::Shape as Order;
use crate::model::stats::{Stats, StatsEngine, quad_form};
use crate::model::tree::NO_PARENT;

/// Result of the candidate search for one phrase.
#[derive(Debug, Clone, Default, PartialEq)]
pub(super) struct Placement {
    /// Lowest-KL broader node that is placed, not a descendant and not the current parent.
    pub(super) best: Option<(PhraseId, f64)>,
    /// Near-duplicate partners with their Bhattacharyya coefficient.
    pub(super) dups: Vec<(PhraseId, f64)>,
    /// Containment of the node in `best`, when `best` fits better than the parent.
    pub(super) best_containment: Option<Sampled>,
}

/// The kept navigation hierarchy of the pruned search.
#[derive(Debug, Clone)]
pub(super) struct CandidateIndex {
    root: PhraseId,
    pub(super) children: Vec<Vec<PhraseId>>,
    /// Phrases not in the hierarchy, always scanned.
    extra: Vec<PhraseId>,
    /// Navigation indexes of the wide nodes (more than `nav_min` children), built on
    /// demand by the first search that reaches the node (`navindex.rs`).
    pub(super) nav: HashMap<PhraseId, OnceLock<NavIndex>>,
    /// Nodes with more children than this get a navigation index ([`WIDE`]; tests set
    /// `usize::MAX` to compare with scoring every child).
    pub(super) nav_min: usize,
    /// Per node: whether one of its children has children of its own (recomputed by
    /// [`CandidateIndex::with_nav`], which every change of the children lists calls).
    pub(super) grand: Vec<bool>,
    /// Nats added to the navigation indexes' KL bounds: 0 except in tests (a deliberately
    /// broken twin, `navindex.rs`).
    pub(super) nav_bias: f64,
    /// Tests only: a deliberately broken twin of [`NavMemo`] that keeps only the
    /// `search_beam` lowest broader children of each answer (no wider beam, no best
    /// candidate, no duplicates).
    pub(super) memo_broken: bool,
}

impl CandidateIndex {
    pub(super) fn of(eff: &EffectiveTree) -> Self {
        let n = eff.tree.table_len();
        CandidateIndex {
            root: eff.tree.root(),
            children: (0..n as PhraseId)
                .map(|p| eff.tree.children(p).to_vec())
                .collect(),
            extra: (0..n as PhraseId)
                .filter(|&p| !eff.tree.is_placed(p))
                .collect(),
            nav: HashMap::new(),
            nav_min: WIDE,
            grand: Vec::new(),
            nav_bias: 0.0,
            memo_broken: false,
        }
        .with_nav()
    }

    /// (Re)declare the navigation indexes after the children lists changed: a wide node
    /// whose index no longer covers its whole list is rebuilt on demand.
    pub(super) fn with_nav(mut self) -> Self {
        let mut nav = std::mem::take(&mut self.nav);
        nav.retain(|&b, slot| {
            let len = self.children[b as usize].len();
            len > self.nav_min && slot.get().is_none_or(|x| x.covered == len)
        });
        for (b, ch) in self.children.iter().enumerate() {
            if ch.len() > self.nav_min {
                nav.entry(b as PhraseId).or_default();
            }
        }
        self.nav = nav;
        self.grand = self
            .children
            .iter()
            .map(|ch| ch.iter().any(|&x| !self.children[x as usize].is_empty()))
            .collect();
        self
    }
}

/// Everything the candidate search reads.
pub(super) struct Searcher<'a> {
    pub(super) g: &'a Gaussians,
    pub(super) engine: &'a StatsEngine,
    pub(super) eff: &'a EffectiveTree,
    pub(super) order: &'a Order,
    pub(super) index: &'a CandidateIndex,
    pub(super) cfg: &'a AuditConfig,
    pub(super) exhaustive: bool,
}

impl Searcher<'_> {
    /// KL(c ‖ x) of the diagonal parts (exact for diagonal covariance).
    fn kl_diag(&self, c: PhraseId, x: PhraseId) -> f64 {
        let d = self.g.dim();
        let (mc, mx) = (self.g.mean(c as usize), self.g.mean(x as usize));
        let vc = self.g.variances(c as usize);
        let vx = self.g.variances(x as usize);
        let s = kernels::kl_sum(mc, vc, mx, vx);
        let ld = &self.engine.diag_log_det;
        0.5 * (s as f64 - d as f64 + ld[x as usize] - ld[c as usize])
    }

    /// [`Searcher::kl_diag`] when it is at most `t`, else None (or the exact value): the data
    /// term stops early once its partial sum proves KL(c ‖ x) > `t` (every term is ≥ 0;
    /// `kernels::kl_sum_until`). A returned value has the bits of [`Searcher::kl_diag`].
    fn kl_diag_below(&self, c: PhraseId, x: PhraseId, t: f64) -> Option<f64> {
        let d = self.g.dim() as f64;
        let ld = &self.engine.diag_log_det;
        let (ldx, ldc) = (ld[x as usize], ld[c as usize]);
        // the data-term value at which KL = t; rounding is settled by the check below
        let stop = (2.0 * t + d - ldx + ldc) as f32;
        let (mc, mx) = (self.g.mean(c as usize), self.g.mean(x as usize));
        let vc = self.g.variances(c as usize);
        let vx = self.g.variances(x as usize);
        match kernels::kl_sum_until(mc, vc, mx, vx, stop) {
            Ok(s) => Some(0.5 * (s as f64 - d + ldx - ldc)),
            // the same formula is monotone in the sum: the full KL is at least this
            Err(partial) if 0.5 * (partial as f64 - d + ldx - ldc) > t => None,
            Err(_) => Some(self.kl_diag(c, x)),
        }
    }

    /// Exact KL(c ‖ x).
    pub(super) fn kl_to(&self, c: PhraseId, x: PhraseId) -> f64 {
        if self.engine.diagonal {
            self.kl_diag(c, x)
        } else {
            kl(&self.g.get(c as usize), &self.g.get(x as usize))
        }
    }

    /// Exact BC when the pair passes the cheap bound, else None; `dmax` is
    /// −ln `duplicate_bc_min` (computed once per search: a logarithm per pair cost 5 % of
    /// the audit of 1 000 000 phrases).
    fn dup_bc(&self, c: PhraseId, x: PhraseId, dmax: f64) -> Option<f64> {
        if self.engine.diagonal {
            let (mc, mx) = (self.g.mean(c as usize), self.g.mean(x as usize));
            let (vc, vx) = (self.g.variances(c as usize), self.g.variances(x as usize));
            // D_B ≥ ¼ Σ Δ² / (σ²c + σ²x); skip the exact coefficient when the bound is over
            let limit = (4.0 * dmax * (1.0 + 1e-4)) as f32;
            if kernels::mean_term_exceeds(mc, vc, mx, vx, limit) {
                return None;
            }
        } else {
            // full covariance: for u = Δ, Cauchy–Schwarz gives ΔᵀΣ̄⁻¹Δ ≥ ‖Δ‖⁴ / ΔᵀΣ̄Δ
            let (gc, gx) = (self.g.get(c as usize), self.g.get(x as usize));
            let delta: Vec<f64> = gc
                .mean
                .iter()
                .zip(gx.mean)
                .map(|(&a, &b)| a as f64 - b as f64)
                .collect();
            let n2: f64 = delta.iter().map(|v| v * v).sum();
            let quad = 0.5 * (quad_form(&gc, &delta) + quad_form(&gx, &delta));
            if quad > 0.0 && n2 * n2 / quad / 8.0 > dmax * (1.0 + 1e-9) {
                return None;
            }
        }
        let bc = bhattacharyya_coefficient(&self.g.get(c as usize), &self.g.get(x as usize));
        (bc >= self.cfg.duplicate_bc_min).then_some(bc)
    }

    /// The navigation index of wide node `b` (built on first use), for diagonal
    /// covariance; None for other nodes.
    fn nav_of(&self, b: PhraseId) -> Option<&NavIndex> {
        if !self.engine.diagonal {
            return None;
        }
        let slot = self.index.nav.get(&b)?;
        Some(slot.get_or_init(|| {
            NavIndex::build(
                self.g,
                &self.engine.diag_log_det,
                &self.index.children[b as usize],
            )
        }))
    }

    pub(super) fn place(&self, c: PhraseId) -> Placement {
        self.place_with(c, true)
    }

    /// [`Searcher::place`], with the wider second search only when `widen` (the full
    /// audit's first pass leaves it to the pass after the index repair, which searches
    /// every node that clears the gain again).
    pub(super) fn place_with(&self, c: PhraseId, widen: bool) -> Placement {
        self.place_memo(c, widen, &mut Memo::Off)
    }

    /// The full audit's first pass before an index repair: [`Searcher::place_with`]
    /// without the wider search, keeping what the queries of the navigation indexes
    /// found in a [`NavMemo`] for [`Searcher::place_remembered`].
    pub(super) fn place_recording(&self, c: PhraseId) -> (Placement, NavMemo) {
        let mut memo = NavMemo::default();
        let out = self.place_memo(c, false, &mut Memo::Record(&mut memo));
        (out, memo)
    }

    /// [`Searcher::place`] after the index repair, with the first pass's [`NavMemo`] of
    /// `c`: a navigation index that still covers what it covered then is not queried
    /// again (the answer is the same; see [`NavMemo`]).
    pub(super) fn place_remembered(&self, c: PhraseId, memo: Option<&NavMemo>) -> Placement {
        match memo {
            Some(m) => self.place_memo(c, true, &mut Memo::Use(m)),
            None => self.place(c),
        }
    }

    fn place_memo(&self, c: PhraseId, widen: bool, memo: &mut Memo) -> Placement {
        let mut out = self.search_memo(c, self.cfg.search_beam, memo);
        let kp = self.eff.tree.parent(c).map(|par| self.kl_to(c, par));
        if let (Some((_, kb)), Some(kp)) = (out.best, kp)
            && widen
            && !self.exhaustive
            && clear_gain(self.cfg, kp, kb)
        {
            // a `better-parent` finding will name this candidate: search again with a
            // wider beam so that the named parent is not an artefact of a narrow search
            // (the lower of the two answers is kept; the duplicate lists are merged)
            let mut memo = match &*memo {
                Memo::Use(m) => Memo::Use(m),
                _ => Memo::Off,
            };
            let wide = self.search_memo(c, SUSPECT_BEAM_FACTOR * self.cfg.search_beam, &mut memo);
            if let Some(w) = wide.best
                && out
                    .best
                    .is_none_or(|o| w.1.total_cmp(&o.1).then(w.0.cmp(&o.0)).is_lt())
            {
                out.best = Some(w);
            }
            out.dups.extend(wide.dups);
            out.dups.sort_by_key(|e| e.0);
            out.dups.dedup_by_key(|e| e.0);
        }
        if let (Some((b, kb)), Some(kp)) = (out.best, kp)
            && kb < kp
        {
            out.best_containment = Some(self.engine.containment(self.g, c, b));
        }
        out
    }

    #[cfg(test)]
    fn search(&self, c: PhraseId, width: usize) -> Placement {
        self.search_memo(c, width, &mut Memo::Off)
    }

    /// The entries of a navigation-index answer (`items`) that a later search of `c` with
    /// a beam of at most `keep` needs: the `keep` lowest broader children (by [`by_kl`],
    /// each entry counted), the lowest eligible candidate and the near-duplicates. Every
    /// other entry is above the beam cut and above the best candidate, and no duplicate.
    fn memo_items(
        &self,
        c: PhraseId,
        items: &[(PhraseId, Option<f64>)],
        keep: usize,
    ) -> Box<[(PhraseId, Option<f64>)]> {
        let ldc = self.g.log_det(c as usize);
        let parent = self.eff.tree.parent(c).unwrap_or(NO_PARENT);
        let min_ld = ldc + self.cfg.better_parent_broader;
        let margin = self.cfg.duplicate_generality_margin;
        let dmax = -self.cfg.duplicate_bc_min.ln();
        let mut kept = vec![false; items.len()];
        let mut broader: Vec<usize> = (0..items.len()).filter(|&i| items[i].1.is_some()).collect();
        let key = |i: usize| (items[i].0, items[i].1.unwrap_or(f64::INFINITY));
        broader.sort_unstable_by(|&i, &j| by_kl(&key(i), &key(j)).then(i.cmp(&j)));
        // the broken twin keeps only the narrow beam's children (no wider beam, no best
        // candidate, no duplicates)
        let twin = self.index.memo_broken;
        let take = if twin { self.cfg.search_beam } else { keep };
        for &i in broader.iter().take(take) {
            kept[i] = true;
        }
        let placed = |x: PhraseId| x != c && self.eff.tree.is_placed(x);
        let best = broader
            .iter()
            .copied()
            .filter(|&i| {
                let x = items[i].0;
                placed(x)
                    && x != parent
                    && self.g.log_det(x as usize) > min_ld
                    && !self.order.in_subtree(c, x)
            })
            .min_by(|&i, &j| by_kl(&key(i), &key(j)));
        if let Some(i) = best.filter(|_| !twin) {
            kept[i] = true;
        }
        for (i, &(x, _)) in items.iter().enumerate() {
            if !twin
                && !kept[i]
                && placed(x)
                && (self.g.log_det(x as usize) - ldc).abs() <= margin
                && self.dup_bc(c, x, dmax).is_some()
            {
                kept[i] = true;
            }
        }
        items
            .iter()
            .zip(&kept)
            .filter(|e| *e.1)
            .map(|e| *e.0)
            .collect()
    }

    fn search_memo<'m>(&self, c: PhraseId, width: usize, memo: &mut Memo<'m>) -> Placement {
        let wide_width = (SUSPECT_BEAM_FACTOR * self.cfg.search_beam).max(width);
        let ldc = self.g.log_det(c as usize);
        let margin = self.cfg.duplicate_generality_margin;
        let dmax = -self.cfg.duplicate_bc_min.ln();
        let parent = self.eff.tree.parent(c).unwrap_or(NO_PARENT);
        let min_ld = ldc + self.cfg.better_parent_broader;
        let diagonal = self.engine.diagonal;
        let mut out = Placement::default();
        let mut cands = Cands::default();
        // whether a placed node x other than c may be the answer, given its generality
        let eligible =
            |x: PhraseId, ldx: f64| x != parent && ldx > min_ld && !self.order.in_subtree(c, x);
        let consider = |x: PhraseId, klx: Option<f64>, out: &mut Placement, cands: &mut Cands| {
            if x == c || !self.eff.tree.is_placed(x) {
                return;
            }
            let ldx = self.g.log_det(x as usize);
            if (ldx - ldc).abs() <= margin
                && let Some(bc) = self.dup_bc(c, x, dmax)
            {
                out.dups.push((x, bc));
            }
            if let Some(k) = klx
                && eligible(x, ldx)
            {
                cands.push((x, k));
            }
        };
        let broader = |x: PhraseId| self.g.log_det(x as usize) > ldc;
        if self.exhaustive {
            for x in 0..self.g.len() as PhraseId {
                let k = (x != c && broader(x)).then(|| self.kl_to(c, x));
                consider(x, k, &mut out, &mut cands);
            }
            out.best = cands.best;
            return out;
        }
        let root = self.index.root;
        if root != c {
            let k = broader(root).then(|| self.kl_diag(c, root));
            consider(root, k, &mut out, &mut cands);
        }
        let mut beam = vec![root];
        let mut next = Lowest::new(width);
        let mut scratch: Vec<(PhraseId, Option<f64>)> = Vec::new();
        // every node whose children were looked at
        let mut expanded: Vec<PhraseId> = Vec::new();
        // `follow`: the lowest KLs of the broader children (`next`) become the next beam and
        // some of them have children of their own; otherwise only the best candidate and the
        // duplicates depend on the children scored here
        let expand = |b: PhraseId,
                      follow: bool,
                      out: &mut Placement,
                      cands: &mut Cands,
                      next: &mut Lowest,
                      scratch: &mut Vec<(PhraseId, Option<f64>)>,
                      memo: &mut Memo<'m>| {
            let kids = &self.index.children[b as usize];
            let mut from = 0;
            if let Some(nav) = self.nav_of(b) {
                let remembered = match &*memo {
                    Memo::Use(m) => {
                        let m: &'m NavMemo = m;
                        m.get(b, nav.covered)
                    }
                    _ => None,
                };
                // recording: the answer must serve the later searches of c (both beams,
                // whatever the best candidate then), so it is asked for the wider beam,
                // followed, without the best candidate so far
                let record = matches!(memo, Memo::Record(_));
                let eligible = |x: PhraseId| {
                    x != parent && self.eff.tree.is_placed(x) && !self.order.in_subtree(c, x)
                };
                let kl = |x: PhraseId| self.kl_diag(c, x);
                let q = Query {
                    c,
                    ld_c: ldc,
                    diag_ld_c: self.engine.diag_log_det[c as usize],
                    beam: if record { wide_width } else { width },
                    beam_matters: follow || record,
                    bias: self.index.nav_bias,
                    best_so_far: match record {
                        true => f64::INFINITY,
                        false => cands.best.map_or(f64::INFINITY, |e| e.1),
                    },
                    min_ld,
                    eligible: &eligible,
                    dup_dmax: dmax,
                    dup_margin: margin,
                    kl: &kl,
                };
                match remembered {
                    Some(items) => {
                        scratch.clear();
                        scratch.extend_from_slice(items);
                    }
                    None => {
                        nav.query(self.g, &q, scratch);
                        if let Memo::Record(m) = memo
                            && m.get(b, nav.covered).is_none()
                        {
                            let items = self.memo_items(c, scratch, wide_width);
                            m.0.push(MemoEntry {
                                b,
                                covered: nav.covered,
                                items,
                            });
                        }
                    }
                }
                for &(x, k) in scratch.iter() {
                    consider(x, k, out, cands);
                    if let Some(k) = k {
                        next.push((x, k));
                    }
                }
                from = nav.covered;
            }
            for &x in &kids[from..] {
                if x == c {
                    continue;
                }
                if !broader(x) {
                    consider(x, None, out, cands);
                    continue;
                }
                let k = if !diagonal {
                    // full covariance: every candidate's diagonal KL ranks the exact rescoring
                    Some(self.kl_diag(c, x))
                } else {
                    // x's KL matters only below the best candidate so far (when x can be
                    // one) or below the `width`-th lowest of `next` (when that is followed);
                    // above both it changes no answer (ties by row: strictly above)
                    let mut t = f64::NEG_INFINITY;
                    if self.eff.tree.is_placed(x) && eligible(x, self.g.log_det(x as usize)) {
                        t = cands.best.map_or(f64::INFINITY, |e| e.1);
                    }
                    if follow {
                        t = t.max(next.bound());
                    }
                    if t == f64::INFINITY {
                        Some(self.kl_diag(c, x))
                    } else if t == f64::NEG_INFINITY {
                        None
                    } else {
                        self.kl_diag_below(c, x, t)
                    }
                };
                consider(x, k, out, cands);
                if let Some(k) = k {
                    next.push((x, k));
                }
            }
        };
        while !beam.is_empty() {
            next.clear();
            let beam_matters = beam.iter().any(|&b| self.index.grand[b as usize]);
            for &b in &beam {
                expand(
                    b,
                    beam_matters,
                    &mut out,
                    &mut cands,
                    &mut next,
                    &mut scratch,
                    memo,
                );
            }
            expanded.extend_from_slice(&beam);
            // the `search_beam` lowest (ties by row; `next` keeps only those); a node
            // reachable twice (repaired index links) is kept once
            next.kept.dedup_by_key(|e| e.0);
            beam.clear();
            beam.extend(next.kept.iter().map(|&(x, _)| x));
        }
        // the node's siblings (the children of its parent in the kept hierarchy) are always
        // looked at, whether or not the beam reached them: a copy sits beside its original,
        // and a node placed one level too high has its true parent among its siblings
        if parent != NO_PARENT && !expanded.contains(&parent) {
            next.clear();
            // what the expansion adds to `next` is not followed: only the best candidate
            // and the duplicates matter there
            expand(
                parent,
                false,
                &mut out,
                &mut cands,
                &mut next,
                &mut scratch,
                memo,
            );
        }
        for &x in &self.index.extra {
            let k = (x != c && broader(x)).then(|| self.kl_diag(c, x));
            consider(x, k, &mut out, &mut cands);
        }
        let mut cands = cands.list;
        if !diagonal {
            // the beam was steered by the KL of the diagonal parts: rescore the lowest
            // few exactly
            cands.sort_unstable_by(by_kl);
            cands.dedup_by_key(|e| e.0);
            cands.truncate(FULL_RESCORE);
            for e in cands.iter_mut() {
                e.1 = self.kl_to(c, e.0);
            }
        }
        out.best = lowest(&cands);
        out.dups.sort_by_key(|e| e.0);
        out.dups.dedup_by_key(|e| e.0);
        out
    }
}

/// What the first pass of a full audit found in the navigation indexes for one node c,
/// kept for the searches of c after the index repair (`Auditor::with_nav_opts`; dropped
/// after it). Per index queried (node b, the prefix of b's children it covered): the
/// entries of the answer that a search of c with a beam of at most
/// [`SUSPECT_BEAM_FACTOR`] · `search_beam` can use (`Searcher::memo_items`), asked for with
/// that beam, followed, and no best candidate so far. The repair only appends children
/// and changes neither the tree nor the eligibility of a candidate, so when b's index
/// covers the same prefix, these entries hold every child the beam keeps (with its KL),
/// the lowest eligible candidate and every near-duplicate: a search given them instead of
/// a new query keeps the same beam, best candidate and duplicates. (Not used by
/// incremental updates.)
#[derive(Debug, Clone, Default)]
pub(super) struct NavMemo(Vec<MemoEntry>);

#[derive(Debug, Clone)]
struct MemoEntry {
    b: PhraseId,
    covered: usize,
    items: Box<[(PhraseId, Option<f64>)]>,
}

impl NavMemo {
    fn get(&self, b: PhraseId, covered: usize) -> Option<&[(PhraseId, Option<f64>)]> {
        self.0
            .iter()
            .find(|e| e.b == b && e.covered == covered)
            .map(|e| &*e.items)
    }

    /// Whether nothing was kept (no navigation index was queried).
    pub(super) fn is_empty(&self) -> bool {
        self.0.is_empty()
    }
}

/// How a search uses the [`NavMemo`] of its node.
pub(super) enum Memo<'m> {
    Off,
    Record(&'m mut NavMemo),
    Use(&'m NavMemo),
}

/// Order of scored nodes: lower KL first, ties by the lower row.
fn by_kl(a: &(PhraseId, f64), b: &(PhraseId, f64)) -> std::cmp::Ordering {
    a.1.total_cmp(&b.1).then(a.0.cmp(&b.0))
}

/// The candidates of one search and the lowest of them so far.
#[derive(Default)]
struct Cands {
    list: Vec<(PhraseId, f64)>,
    /// [`lowest`] of `list`.
    best: Option<(PhraseId, f64)>,
}

impl Cands {
    fn push(&mut self, e: (PhraseId, f64)) {
        if self.best.is_none_or(|b| by_kl(&e, &b).is_lt()) {
            self.best = Some(e);
        }
        self.list.push(e);
    }
}

/// The `width` lowest entries pushed (by [`by_kl`], duplicates counted), kept sorted: the
/// same as sorting everything pushed and keeping the first `width`.
struct Lowest {
    width: usize,
    kept: Vec<(PhraseId, f64)>,
}

impl Lowest {
    fn new(width: usize) -> Self {
        Lowest {
            width,
            kept: Vec::with_capacity(width + 1),
        }
    }

    fn clear(&mut self) {
        self.kept.clear();
    }

    fn push(&mut self, e: (PhraseId, f64)) {
        if self.kept.len() >= self.width && self.kept.last().is_none_or(|l| by_kl(&e, l).is_ge()) {
            return;
        }
        let at = self.kept.partition_point(|a| by_kl(a, &e).is_le());
        self.kept.insert(at, e);
        self.kept.truncate(self.width);
    }

    /// The KL an entry must not exceed to be kept (+∞ until `width` are kept).
    fn bound(&self) -> f64 {
        if self.kept.len() < self.width {
            f64::INFINITY
        } else {
            self.kept.last().map_or(f64::INFINITY, |l| l.1)
        }
    }
}

/// Full covariance: candidates rescored with the exact KL after the pruned search.
const FULL_RESCORE: usize = 8;

/// A node whose best candidate clears the `better-parent` gain is searched again with a
/// beam this many times `search_beam` wide: the finding names that candidate as the new
/// parent, so it is worth a wider look (the extra work is spent only on such nodes).
pub(super) const SUSPECT_BEAM_FACTOR: usize = 4;

/// The `better-parent` gain test on KL(child ‖ parent) = `kp` and KL(child ‖ best) = `kb`:
/// kp − kb > max(`better_parent_margin`, `better_parent_ratio` · kp).
pub(super) fn clear_gain(cfg: &AuditConfig, kp: f64, kb: f64) -> bool {
    kp - kb > cfg.better_parent_margin.max(cfg.better_parent_ratio * kp)
}

/// The candidate with the lowest score (ties: the lower row).
fn lowest(cands: &[(PhraseId, f64)]) -> Option<(PhraseId, f64)> {
    cands.iter().copied().min_by(by_kl)
}

/// A placed node whose placement rules fire (better parent, weak inclusion, inversion):
/// the pruned search's index repair. It applies the thresholds of those three rules
/// (`rules/inverted_generality.rs`, `weak_inclusion.rs`, `better_parent.rs`, without the
/// containment condition of the last), so a change to them belongs here too.
pub(super) fn suspicious(
    g: &Gaussians,
    eff: &EffectiveTree,
    cfg: &AuditConfig,
    stats: &Stats,
    placement: &[Placement],
    p: PhraseId,
) -> bool {
    let i = p as usize;
    let Some(par) = eff.tree.parent(p) else {
        return false;
    };
    let s = &stats.nodes[i];
    let inverted = g.log_det(i) - g.log_det(par as usize) > cfg.inversion_margin;
    let weak = s.containment.is_some_and(|c| c.value < cfg.containment_min);
    let better = match (placement[i].best, s.kl_to_parent) {
        (Some((_, kb)), Some(kp)) => clear_gain(cfg, kp, kb),
        _ => false,
    };
    inverted || weak || better
}

/// Placed nodes and unplaced phrases get a candidate search; aliases and exclusions do not.
pub(super) fn needs_search(eff: &EffectiveTree, p: PhraseId) -> bool {
    let i = p as usize;
    eff.tree.is_placed(p) || (eff.alias_of[i].is_none() && !eff.excluded[i])
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::audit::tests::{of_rule, small_1d};
    use crate::model::audit::{Auditor, Rule, audit};

    /// Root N(0, 10⁴) with a N(0, 400) and b N(32, 20) under it, b1 N(21, 3) under b, z
    /// N(−30, 4) under a, w N(60, 4) under b; the node c N(21, 0.5) (its parent is given to
    /// [`edges`]) and, when `copy` is set, its copy c2 N(21.02, 0.5) beside it. For c, univariate
    /// KL(N(μ0, s0) ‖ N(μ1, s1)) = ½ ln(s1 / s0) + (s0 + (μ0 − μ1)²) / (2 s1) − ½ (closed form,
    /// docs/maths.md section 4): KL(c ‖ a) = ½ ln 800 + 441.5 / 800 − ½ = 3.3943 is below
    /// KL(c ‖ b) = ½ ln 40 + 121.5 / 40 − ½ = 4.3819, so a beam of width 1 keeps a and never
    /// looks under b, where b1 fits c far better: KL(c ‖ b1) = ½ ln 6 + 0.5 / 6 − ½ = 0.4792.
    /// `f` run with a searcher over the tree as it is (the audit's index repair would link
    /// c elsewhere) and the audit's own statistics engine.
    fn with_searcher<R>(
        t: &crate::model::phrase::PhraseTable,
        g: &Gaussians,
        eff: &EffectiveTree,
        cfg: &AuditConfig,
        f: impl FnOnce(&Searcher) -> R,
    ) -> R {
        let aud = Auditor::new(g, t, eff, &[], cfg.clone());
        let index = CandidateIndex::of(eff);
        let order = Order::of(eff);
        f(&Searcher {
            g,
            engine: &aud.engine,
            eff,
            order: &order,
            index: &index,
            cfg,
            exhaustive: false,
        })
    }

    fn rows(copy: bool) -> Vec<(&'static str, f64, f64)> {
        let mut rows = vec![
            ("r", 0.0, 1e4),
            ("a", 0.0, 400.0),
            ("b", 32.0, 20.0),
            ("b1", 21.0, 3.0),
            ("z", -30.0, 4.0),
            ("w", 60.0, 4.0),
            ("c", 21.0, 0.5),
        ];
        if copy {
            rows.push(("c2", 21.02, 0.5));
        }
        rows
    }

    fn edges(parent_of_c: &'static str, copy: bool) -> Vec<(&'static str, &'static str)> {
        let mut e = vec![
            ("a", "r"),
            ("b", "r"),
            ("b1", "b"),
            ("z", "a"),
            ("w", "b"),
            ("c", parent_of_c),
        ];
        if copy {
            e.push(("c2", parent_of_c));
        }
        e
    }

    fn narrow() -> AuditConfig {
        AuditConfig {
            exhaustive_limit: 0,
            search_beam: 1,
            ..AuditConfig::default()
        }
    }

    #[test]
    fn a_node_with_a_clear_gain_is_searched_again_with_a_wider_beam() {
        let (t, g, eff) = small_1d(&rows(false), &edges("z", false));
        let cfg = narrow();
        // the broken twin (no second search) is `search` with the narrow beam: it names a,
        // not the better b1 (`first` below)
        let c = t.get("c").unwrap();
        let (a, b1) = (t.get("a").unwrap(), t.get("b1").unwrap());
        let (first, best) = with_searcher(&t, &g, &eff, &cfg, |s| {
            (s.search(c, 1).best.unwrap(), s.place(c).best.unwrap())
        });
        assert_eq!(first.0, a);
        assert!((first.1 - 3.394_3).abs() < 1e-3, "{first:?}");
        // KL(c ‖ z) = ½ ln 8 + 2601.5 / 8 − ½ = 325.73 clears the gain, so the wider search
        // runs and finds b1
        assert_eq!(best.0, b1);
        assert!((best.1 - 0.479_2).abs() < 1e-3, "{best:?}");
        let r = audit(&g, &t, &eff, &[], &cfg);
        let f: Vec<_> = of_rule(&r, Rule::BetterParent)
            .into_iter()
            .filter(|f| f.node == c)
            .collect();
        assert_eq!(f.len(), 1, "{f:#?}");
        assert_eq!(
            f[0].suggestion.as_ref().unwrap().target.as_deref(),
            Some("b1")
        );
    }

    #[test]
    fn the_siblings_are_looked_at_even_when_the_beam_passes_them_by() {
        // c and its copy under w (under b, which the beam of width 1 leaves aside); no
        // better-parent gain counts (margin 10⁹), so only the sibling look finds the pair.
        // Bhattacharyya (1943), equal variances s: D_B = Δμ² / (8 s) = 0.0004 / 4 = 10⁻⁴,
        // BC = exp(−10⁻⁴) = 0.9999
        let (t, g, eff) = small_1d(&rows(true), &edges("w", true));
        let cfg = AuditConfig {
            better_parent_margin: 1e9,
            ..narrow()
        };
        let (c, c2) = (t.get("c").unwrap(), t.get("c2").unwrap());
        // the broken twin (no sibling look: the block after the beam loop deleted) finds no
        // duplicate here: the beam goes r → a → z and never reaches w
        let dups = with_searcher(&t, &g, &eff, &cfg, |s| s.search(c, 1).dups);
        assert_eq!(dups.len(), 1, "{dups:?}");
        assert_eq!(dups[0].0, c2);
        assert!((dups[0].1 - (-1e-4f64).exp()).abs() < 1e-6, "{dups:?}");
        let r = audit(&g, &t, &eff, &[], &cfg);
        assert_eq!(of_rule(&r, Rule::NearDuplicate).len(), 1);
    }
}
