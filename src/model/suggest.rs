//! Suggestion preview: which broader, narrower and sibling phrases the curated tree would
//! offer a shopper for a phrase, generic and personalised, and a bulk check of every phrase.
//!
//! Everything reads the [`EffectiveTree`]: a merged-away alias redirects to its target and an
//! excluded phrase is never offered.
//!
//! Scores (higher is better):
//! - broader: −KL(phrase ‖ candidate), the information lost when the candidate stands in for
//!   the phrase; the narrowest good container (usually the parent) comes first;
//! - narrower: −KL(candidate ‖ phrase), how well the phrase describes the candidate;
//! - siblings: the Bhattacharyya coefficient with the phrase.
//!
//! (The divergences and the bulk check's thresholds are written out in `docs/maths.md` §4–§6
//! and §14.)
//!
//! Broader candidates are the phrase's ancestors plus nodes outside its ancestry that are
//! broader (larger ln det Σ) and contain it: containment ≥ `external_min_containment`. A single
//! query scans every node for such containers (O(n·d)); the bulk check bounds the scan to the
//! ancestors, their other children and the phrase's siblings, so it stays O(n · fan-out · d).

use std::collections::HashSet;

use serde::Serialize;

use super::effective::EffectiveTree;
use super::gaussian::{
    Gaussians, PhraseId, bhattacharyya_coefficient, containment, kl, log_expected_likelihood,
};
use super::phrase::PhraseTable;
use super::project::UserProfile;

/// How a candidate relates to the phrase in the effective tree.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Relation {
    /// The phrase's parent.
    Parent,
    /// A higher ancestor.
    Ancestor,
    /// Broader and containing, but not an ancestor in the tree.
    Container,
    /// A child.
    Child,
    /// A deeper descendant.
    Descendant,
    /// Shares the phrase's parent.
    Sibling,
}

/// The measure used to match a shopper profile with a candidate.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Default)]
#[serde(rename_all = "lowercase")]
pub enum UserMeasure {
    /// Log expected-likelihood kernel.
    #[default]
    Elk,
    /// Bhattacharyya coefficient.
    Bhattacharyya,
}

/// Parameters of the suggestion preview.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SuggestParams {
    /// How many candidates per list.
    pub top: usize,
    /// Probability level of the containment region.
    pub alpha: f64,
    /// Samples per containment estimate.
    pub samples: usize,
    /// Seed of the containment sampler.
    pub seed: u64,
    /// Smallest containment for a non-ancestor to be offered as broader.
    pub external_min_containment: f64,
    /// How many non-ancestor containers are scored exactly (nearest by KL first).
    pub external_pool: usize,
    /// Measure for personalised ranking.
    pub user_measure: UserMeasure,
    /// Bulk check: flag a top broader offer whose containment is below this.
    pub min_containment: f64,
    /// Bulk check: flag when the personalised top offer differs for more than this share of
    /// shopper profiles.
    pub max_user_disagreement: f64,
}

impl Default for SuggestParams {
    fn default() -> Self {
        SuggestParams {
            top: 5,
            alpha: 0.95,
            samples: 512,
            seed: 0x5eed,
            external_min_containment: 0.8,
            external_pool: 16,
            user_measure: UserMeasure::Elk,
            min_containment: 0.5,
            max_user_disagreement: 0.5,
        }
    }
}

/// One offered phrase with its distributional scores.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Candidate {
    /// Row of the candidate.
    #[serde(skip)]
    pub phrase: PhraseId,
    /// Stable id.
    pub id: String,
    /// Effective label.
    pub label: String,
    /// Ranking score of the list (see the module docs).
    pub score: f64,
    /// True when the relation holds in the effective tree (ancestor / descendant / sibling).
    pub in_tree: bool,
    /// How it relates to the phrase.
    pub relation: Relation,
    /// Containment of the narrower of the two in the broader one's α-region.
    pub containment: f64,
    /// KL(narrower ‖ broader).
    pub kl: f64,
    /// Bhattacharyya coefficient between the two.
    pub overlap: f64,
    /// ln det Σ of the candidate.
    pub generality: f64,
    /// Overlap with the shopper profile, when one is given.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub user_score: Option<f64>,
    /// Rank in the generic order (0-based).
    pub generic_rank: usize,
    /// Rank in the personalised order, when a profile is given.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub personal_rank: Option<usize>,
    /// (narrower, broader) rows of the pair the numbers describe.
    #[serde(skip)]
    pub pair: (PhraseId, PhraseId),
}

/// The phrase a suggestion is for.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct QueryPhrase {
    /// Row.
    #[serde(skip)]
    pub phrase: PhraseId,
    /// Stable id (after alias redirect).
    pub id: String,
    /// Effective label.
    pub label: String,
    /// The alias the query named, when it was redirected.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub redirected_from: Option<String>,
    /// ln det Σ.
    pub generality: f64,
    /// Whether the phrase is a node of the effective tree.
    pub in_tree: bool,
}

/// Offers for one phrase, best first (generic order; `personal_rank` gives the other).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Suggestions {
    /// The phrase.
    pub phrase: QueryPhrase,
    /// The shopper profile id, if personalised.
    pub user: Option<String>,
    /// Broader offers.
    pub broader: Vec<Candidate>,
    /// Narrower offers.
    pub narrower: Vec<Candidate>,
    /// Close siblings.
    pub siblings: Vec<Candidate>,
}

/// Why a suggestion could not be made.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
pub enum SuggestError {
    /// The phrase is excluded from the deployed tree.
    #[error("\"{0}\" is excluded from the deployed tree; nothing is offered for it")]
    Excluded(String),
    /// The profile's dimension differs from the embeddings'.
    #[error("profile \"{0}\" has another dimension than the embeddings")]
    UserDimension(String),
}

/// The shared inputs of every suggestion.
pub struct SuggestCtx<'a> {
    /// Gaussians.
    pub gaussians: &'a Gaussians,
    /// Phrase table.
    pub phrases: &'a PhraseTable,
    /// Effective tree.
    pub eff: &'a EffectiveTree,
    /// Parameters.
    pub params: &'a SuggestParams,
}

impl<'a> SuggestCtx<'a> {
    /// Bundle the inputs of a suggestion.
    pub fn new(
        gaussians: &'a Gaussians,
        phrases: &'a PhraseTable,
        eff: &'a EffectiveTree,
        params: &'a SuggestParams,
    ) -> Self {
        SuggestCtx {
            gaussians,
            phrases,
            eff,
            params,
        }
    }

    fn offerable(&self, p: PhraseId) -> bool {
        let i = p as usize;
        self.eff.tree.is_placed(p) && !self.eff.excluded[i] && self.eff.alias_of[i].is_none()
    }

    /// A candidate with its cheap numbers (KL, generality). `narrow` is the narrower of the
    /// pair; `score` defaults to −KL(narrow ‖ broad). Containment and overlap are sampled /
    /// computed by [`SuggestCtx::measure`] only for the candidates that are shown.
    fn candidate(
        &self,
        narrow: PhraseId,
        broad: PhraseId,
        cand: PhraseId,
        relation: Relation,
        score: Option<f64>,
    ) -> Candidate {
        let g = self.gaussians;
        let k = kl(&g.get(narrow as usize), &g.get(broad as usize));
        Candidate {
            phrase: cand,
            id: self.phrases.id(cand).to_string(),
            label: self.eff.label(cand).to_string(),
            score: score.unwrap_or(-k),
            in_tree: !matches!(relation, Relation::Container),
            relation,
            containment: f64::NAN,
            kl: k,
            overlap: f64::NAN,
            generality: g.log_det(cand as usize),
            user_score: None,
            generic_rank: 0,
            personal_rank: None,
            pair: (narrow, broad),
        }
    }

    /// Fill in the sampled containment and the overlap of a candidate (once).
    fn measure(&self, c: &mut Candidate) {
        if !c.containment.is_nan() {
            return;
        }
        let g = self.gaussians;
        let (narrow, broad) = (g.get(c.pair.0 as usize), g.get(c.pair.1 as usize));
        let p = self.params;
        c.containment = containment(&narrow, &broad, p.alpha, p.samples, p.seed).value;
        if c.overlap.is_nan() {
            c.overlap = bhattacharyya_coefficient(&narrow, &broad);
        }
    }

    /// Broader candidates; `exhaustive` scans every node for containers, otherwise only the
    /// bounded local pool (bulk check).
    fn broader(&self, q: PhraseId, exhaustive: bool) -> Vec<Candidate> {
        let g = self.gaussians;
        let me = g.get(q as usize);
        let tree = &self.eff.tree;
        let mut out = Vec::new();
        let ancestors: Vec<PhraseId> = if tree.is_placed(q) {
            tree.ancestors(q)
        } else {
            Vec::new()
        };
        for (i, &a) in ancestors.iter().enumerate() {
            let rel = if i == 0 {
                Relation::Parent
            } else {
                Relation::Ancestor
            };
            out.push(self.candidate(q, a, a, rel, None));
        }
        let anc: HashSet<PhraseId> = ancestors.iter().copied().collect();
        let pool: Vec<PhraseId> = if exhaustive || !tree.is_placed(q) {
            (0..g.len() as PhraseId).collect()
        } else {
            let mut v: Vec<PhraseId> = ancestors
                .iter()
                .flat_map(|&a| tree.children(a).iter().copied())
                .collect();
            v.sort_unstable();
            v.dedup();
            v
        };
        let my_ld = g.log_det(q as usize);
        let mut ext: Vec<(f64, PhraseId)> = pool
            .into_iter()
            .filter(|&c| {
                c != q
                    && !anc.contains(&c)
                    && self.offerable(c)
                    && g.log_det(c as usize) > my_ld
                    && !(tree.is_placed(q) && tree.is_ancestor(q, c))
            })
            .map(|c| (kl(&me, &g.get(c as usize)), c))
            .collect();
        ext.sort_by(|a, b| a.0.total_cmp(&b.0).then(a.1.cmp(&b.1)));
        for &(k, c) in ext.iter().take(self.params.external_pool) {
            let mut cand = self.candidate(q, c, c, Relation::Container, Some(-k));
            self.measure(&mut cand);
            if cand.containment >= self.params.external_min_containment {
                out.push(cand);
            }
        }
        out
    }

    fn narrower(&self, q: PhraseId) -> Vec<Candidate> {
        let tree = &self.eff.tree;
        let mut out = Vec::new();
        if !tree.is_placed(q) {
            return out;
        }
        let mut stack: Vec<(PhraseId, u32)> =
            tree.children(q).iter().rev().map(|&c| (c, 1)).collect();
        while let Some((c, depth)) = stack.pop() {
            let rel = if depth == 1 {
                Relation::Child
            } else {
                Relation::Descendant
            };
            out.push(self.candidate(c, q, c, rel, None));
            for &cc in tree.children(c).iter().rev() {
                stack.push((cc, depth + 1));
            }
        }
        out
    }

    fn siblings(&self, q: PhraseId) -> Vec<Candidate> {
        let g = self.gaussians;
        let me = g.get(q as usize);
        let tree = &self.eff.tree;
        let Some(parent) = (if tree.is_placed(q) {
            tree.parent(q)
        } else {
            None
        }) else {
            return Vec::new();
        };
        tree.children(parent)
            .iter()
            .filter(|&&s| s != q)
            .map(|&s| {
                let bc = bhattacharyya_coefficient(&me, &g.get(s as usize));
                let mut c = self.candidate(s, q, s, Relation::Sibling, Some(bc));
                c.overlap = bc;
                c
            })
            .collect()
    }
}

fn rank(
    mut v: Vec<Candidate>,
    top: usize,
    user: Option<&UserProfile>,
    ctx: &SuggestCtx,
) -> Vec<Candidate> {
    v.sort_by(|a, b| b.score.total_cmp(&a.score).then(a.phrase.cmp(&b.phrase)));
    v.truncate(top);
    for (i, c) in v.iter_mut().enumerate() {
        c.generic_rank = i;
        ctx.measure(c);
    }
    if let Some(u) = user {
        let uv = u.gaussian.view();
        for c in v.iter_mut() {
            let gc = ctx.gaussians.get(c.phrase as usize);
            c.user_score = Some(match ctx.params.user_measure {
                UserMeasure::Elk => log_expected_likelihood(&uv, &gc),
                UserMeasure::Bhattacharyya => bhattacharyya_coefficient(&uv, &gc),
            });
        }
        let mut order: Vec<usize> = (0..v.len()).collect();
        order.sort_by(|&a, &b| {
            v[b].user_score
                .unwrap_or(f64::NEG_INFINITY)
                .total_cmp(&v[a].user_score.unwrap_or(f64::NEG_INFINITY))
                .then(a.cmp(&b))
        });
        for (r, &i) in order.iter().enumerate() {
            v[i].personal_rank = Some(r);
        }
    }
    v
}

/// Offers for `query` (any phrase row; aliases redirect to their target).
pub fn suggest(
    ctx: &SuggestCtx,
    query: PhraseId,
    user: Option<&UserProfile>,
) -> Result<Suggestions, SuggestError> {
    let eff = ctx.eff;
    let q = eff.resolve(query);
    if eff.excluded[q as usize] {
        return Err(SuggestError::Excluded(ctx.phrases.id(q).to_string()));
    }
    if let Some(u) = user
        && u.gaussian.mean.len() != ctx.gaussians.dim()
    {
        return Err(SuggestError::UserDimension(u.id.clone()));
    }
    let top = ctx.params.top;
    Ok(Suggestions {
        phrase: QueryPhrase {
            phrase: q,
            id: ctx.phrases.id(q).to_string(),
            label: eff.label(q).to_string(),
            redirected_from: (q != query).then(|| ctx.phrases.id(query).to_string()),
            generality: ctx.gaussians.log_det(q as usize),
            in_tree: eff.tree.is_placed(q),
        },
        user: user.map(|u| u.id.clone()),
        broader: rank(ctx.broader(q, true), top, user, ctx),
        narrower: rank(ctx.narrower(q), top, user, ctx),
        siblings: rank(ctx.siblings(q), top, user, ctx),
    })
}

impl Suggestions {
    /// One plain-language line of what a shopper would be shown (personalised order when a
    /// profile was given).
    pub fn preview_line(&self) -> String {
        let pick = |v: &[Candidate]| -> Option<String> {
            let best = if self.user.is_some() {
                v.iter().find(|c| c.personal_rank == Some(0))
            } else {
                v.first()
            };
            best.map(|c| format!("\"{}\"", c.label))
        };
        let mut parts = Vec::new();
        if let Some(b) = pick(&self.broader) {
            parts.push(format!("something broader: {b}"));
        }
        if let Some(n) = pick(&self.narrower) {
            parts.push(format!("something narrower: {n}"));
        }
        if parts.is_empty() {
            format!(
                "A shopper using \"{}\" is offered nothing else.",
                self.phrase.label
            )
        } else {
            format!(
                "A shopper using \"{}\" sees: did you mean {}?",
                self.phrase.label,
                parts.join(", or ")
            )
        }
    }
}

/// One row of the bulk check.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct BulkRow {
    /// Phrase id.
    pub id: String,
    /// Effective label.
    pub label: String,
    /// Id of the top broader offer (empty when none).
    pub top_broader: String,
    /// Its label.
    pub top_broader_label: String,
    /// Its containment of the phrase.
    pub containment: f64,
    /// The top offer is not an ancestor in the effective tree.
    pub not_ancestor: bool,
    /// Its containment is below `min_containment`.
    pub weak_containment: bool,
    /// Share of shopper profiles whose personalised top offer differs.
    pub user_disagreement: f64,
    /// `user_disagreement` exceeds `max_user_disagreement`.
    pub users_disagree: bool,
}

impl BulkRow {
    /// True when any flag is raised.
    pub fn flagged(&self) -> bool {
        self.not_ancestor || self.weak_containment || self.users_disagree
    }
}

/// Top broader offer of every node of the effective tree (the root excluded), with flags.
/// Uses the bounded candidate pool (see the module docs); runs in parallel.
pub fn bulk_check(ctx: &SuggestCtx, users: &[UserProfile]) -> Vec<BulkRow> {
    let done = std::sync::atomic::AtomicUsize::new(0);
    let cancel = std::sync::atomic::AtomicBool::new(false);
    bulk_check_with(ctx, users, &done, &cancel).unwrap_or_default()
}

/// [`bulk_check`] with a progress counter (phrases done) and a cancel flag; `None` when
/// cancelled. Rows come in tree pre-order.
pub fn bulk_check_with(
    ctx: &SuggestCtx,
    users: &[UserProfile],
    done: &std::sync::atomic::AtomicUsize,
    cancel: &std::sync::atomic::AtomicBool,
) -> Option<Vec<BulkRow>> {
    use rayon::prelude::*;
    use std::sync::atomic::Ordering;
    let tree = &ctx.eff.tree;
    let nodes = bulk_nodes(ctx.eff);
    let rows: Vec<Option<BulkRow>> = nodes
        .par_iter()
        .map(|&p| {
            if cancel.load(Ordering::Relaxed) {
                return None;
            }
            let ranked = rank(ctx.broader(p, false), ctx.params.top.max(1), None, ctx);
            let top = ranked.first();
            let mut differ = 0usize;
            for u in users {
                let personal = rank(ranked.clone(), ranked.len(), Some(u), ctx);
                let best = personal.iter().find(|c| c.personal_rank == Some(0));
                if best.map(|c| c.phrase) != top.map(|c| c.phrase) {
                    differ += 1;
                }
            }
            let share = if users.is_empty() {
                0.0
            } else {
                differ as f64 / users.len() as f64
            };
            let containment = top.map_or(0.0, |c| c.containment);
            done.fetch_add(1, Ordering::Relaxed);
            Some(BulkRow {
                id: ctx.phrases.id(p).to_string(),
                label: ctx.eff.label(p).to_string(),
                top_broader: top.map_or(String::new(), |c| c.id.clone()),
                top_broader_label: top.map_or(String::new(), |c| c.label.clone()),
                containment,
                not_ancestor: top.is_some_and(|c| !tree.is_ancestor(c.phrase, p)),
                weak_containment: containment < ctx.params.min_containment,
                user_disagreement: share,
                users_disagree: share > ctx.params.max_user_disagreement,
            })
        })
        .collect();
    if cancel.load(Ordering::Relaxed) {
        return None;
    }
    rows.into_iter().collect()
}

/// The top broader offer of `p` as the bulk check ranks it (bounded candidate pool, generic
/// order), or `None` when nothing broader is offered.
pub fn top_broader(ctx: &SuggestCtx, p: PhraseId) -> Option<Candidate> {
    rank(ctx.broader(p, false), 1, None, ctx).into_iter().next()
}

/// The phrases the bulk check covers: every node of the effective tree but the root.
pub fn bulk_nodes(eff: &EffectiveTree) -> Vec<PhraseId> {
    let tree = &eff.tree;
    tree.preorder()
        .into_iter()
        .filter(|&p| tree.parent(p).is_some())
        .collect()
}

/// The bulk check as CSV (header + one row per phrase).
pub fn bulk_csv(rows: &[BulkRow]) -> String {
    let mut w = csv::Writer::from_writer(Vec::new());
    let _ = w.write_record([
        "id",
        "label",
        "top_broader",
        "top_broader_label",
        "containment",
        "not_ancestor",
        "weak_containment",
        "user_disagreement",
        "users_disagree",
    ]);
    for r in rows {
        let _ = w.write_record([
            r.id.as_str(),
            &r.label,
            &r.top_broader,
            &r.top_broader_label,
            &format!("{:.4}", r.containment),
            &r.not_ancestor.to_string(),
            &r.weak_containment.to_string(),
            &format!("{:.4}", r.user_disagreement),
            &r.users_disagree.to_string(),
        ]);
    }
    String::from_utf8(w.into_inner().unwrap_or_default()).unwrap_or_default()
}

/// Parse the CSV written by [`bulk_csv`] back into rows.
pub fn parse_bulk_csv(text: &str) -> Result<Vec<BulkRow>, String> {
    let mut r = csv::Reader::from_reader(text.as_bytes());
    let mut out = Vec::new();
    for (i, rec) in r.records().enumerate() {
        let rec = rec.map_err(|e| format!("line {}: {e}", i + 2))?;
        let f = |k: usize| rec.get(k).unwrap_or("").to_string();
        let num = |k: usize| -> Result<f64, String> {
            f(k).parse()
                .map_err(|_| format!("line {}: column {} is not a number", i + 2, k + 1))
        };
        let flag = |k: usize| -> Result<bool, String> {
            f(k).parse()
                .map_err(|_| format!("line {}: column {} is not true/false", i + 2, k + 1))
        };
        out.push(BulkRow {
            id: f(0),
            label: f(1),
            top_broader: f(2),
            top_broader_label: f(3),
            containment: num(4)?,
            not_ancestor: flag(5)?,
            weak_containment: flag(6)?,
            user_disagreement: num(7)?,
            users_disagree: flag(8)?,
        });
    }
    Ok(out)
}

/// Labels closest to `query` by edit distance (case-insensitive), best first.
pub fn nearest_labels(phrases: &PhraseTable, query: &str, count: usize) -> Vec<String> {
    let q = query.to_lowercase();
    let mut scored: Vec<(usize, &str)> = phrases
        .labels()
        .iter()
        .map(|l| (strsim::levenshtein(&q, &l.to_lowercase()), l.as_str()))
        .collect();
    scored.sort_by(|a, b| a.0.cmp(&b.0).then(a.1.cmp(b.1)));
    scored
        .into_iter()
        .take(count)
        .map(|(_, l)| l.to_string())
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::gaussian::OwnedGaussian;
    use crate::model::phrase::PhraseRecord;
    use crate::model::tree::Tree;

    /// root ⊃ {a ⊃ {a1, a2}, b ⊃ {b1, b2}} in 2-D, a and b on opposite sides.
    fn fixture() -> (PhraseTable, Gaussians, Tree) {
        let ids = ["root", "a", "b", "a1", "a2", "b1", "b2"];
        let recs: Vec<PhraseRecord> = ids
            .iter()
            .map(|i| PhraseRecord {
                id: Some(i.to_string()),
                label: i.to_string(),
            })
            .collect();
        let phrases = PhraseTable::from_records(&recs).unwrap();
        let means = vec![
            0.0, 0.0, -3.0, 0.0, 3.0, 0.0, -3.5, 0.8, -3.5, -0.8, 3.5, 0.8, 3.5, -0.8,
        ];
        let vars = vec![
            16.0, 16.0, 2.0, 2.0, 2.0, 2.0, 0.3, 0.3, 0.3, 0.3, 0.3, 0.3, 0.3, 0.3,
        ];
        let g = Gaussians::from_diagonal(7, 2, means, vars, 1e-6).unwrap();
        let edges = [(1, 0), (2, 0), (3, 1), (4, 1), (5, 2), (6, 2)];
        let tree = Tree::from_edges(&phrases, 0, &edges).unwrap();
        (phrases, g, tree)
    }

    #[test]
    fn parent_is_the_top_broader_offer() {
        let (phrases, g, tree) = fixture();
        let eff = EffectiveTree::from_base(&tree, &phrases);
        let params = SuggestParams::default();
        let ctx = SuggestCtx::new(&g, &phrases, &eff, &params);
        let s = suggest(&ctx, 3, None).unwrap();
        assert_eq!(s.broader[0].id, "a");
        assert_eq!(s.broader[0].relation, Relation::Parent);
        assert!(s.broader.iter().any(|c| c.id == "root"));
        assert_eq!(s.siblings[0].id, "a2");
        let s = suggest(&ctx, 0, None).unwrap();
        assert!(s.broader.is_empty());
        assert_eq!(s.narrower.len(), 5.min(params.top));
        assert!(s.preview_line().contains("something narrower"));
        let bulk = bulk_check(&ctx, &[]);
        assert_eq!(bulk.len(), 6);
        assert!(bulk.iter().all(|r| !r.not_ancestor), "{bulk:?}");
    }

    #[test]
    fn personalisation_prefers_the_users_branch() {
        let (phrases, g, tree) = fixture();
        let eff = EffectiveTree::from_base(&tree, &phrases);
        let params = SuggestParams::default();
        let ctx = SuggestCtx::new(&g, &phrases, &eff, &params);
        let user = UserProfile {
            id: "u-b".into(),
            label: "likes b".into(),
            gaussian: OwnedGaussian::diagonal(&[3.4, 0.0], &[0.5, 0.5]).unwrap(),
        };
        let generic = suggest(&ctx, 0, None).unwrap();
        let personal = suggest(&ctx, 0, Some(&user)).unwrap();
        let first = personal
            .narrower
            .iter()
            .find(|c| c.personal_rank == Some(0))
            .unwrap();
        assert!(first.id.starts_with('b'), "{first:?}");
        assert_eq!(generic.narrower.len(), personal.narrower.len());
        assert!(personal.preview_line().contains('b'));
    }

    #[test]
    fn aliases_redirect_and_exclusions_are_never_offered() {
        let (phrases, g, tree) = fixture();
        let mut eff = EffectiveTree::from_base(&tree, &phrases);
        // merge a2 into a1 by hand: a2 leaves the tree as an alias of a1
        let edges = [(1, 0), (2, 0), (3, 1), (5, 2), (6, 2)];
        eff.tree = Tree::from_edges(&phrases, 0, &edges).unwrap();
        eff.alias_of[4] = Some(3);
        eff.aliases[3] = vec![4];
        // exclude b1: its (absent) children would move up; here it just leaves
        let edges = [(1, 0), (2, 0), (3, 1), (6, 2)];
        eff.tree = Tree::from_edges(&phrases, 0, &edges).unwrap();
        eff.excluded[5] = true;
        let params = SuggestParams::default();
        let ctx = SuggestCtx::new(&g, &phrases, &eff, &params);
        let s = suggest(&ctx, 4, None).unwrap();
        assert_eq!(s.phrase.id, "a1");
        assert_eq!(s.phrase.redirected_from.as_deref(), Some("a2"));
        let all = suggest(&ctx, 0, None).unwrap();
        assert!(all.narrower.iter().all(|c| c.id != "b1" && c.id != "a2"));
        assert!(matches!(
            suggest(&ctx, 5, None),
            Err(SuggestError::Excluded(_))
        ));
        for q in 0..7u32 {
            if let Ok(s) = suggest(&ctx, q, None) {
                for c in s.broader.iter().chain(&s.narrower).chain(&s.siblings) {
                    assert!(c.id != "b1" && c.id != "a2", "{q}: {c:?}");
                }
            }
        }
    }

    #[test]
    fn bulk_csv_round_trips() {
        let (phrases, g, tree) = fixture();
        let eff = EffectiveTree::from_base(&tree, &phrases);
        let params = SuggestParams::default();
        let ctx = SuggestCtx::new(&g, &phrases, &eff, &params);
        let users = [UserProfile {
            id: "u".into(),
            label: "u".into(),
            gaussian: OwnedGaussian::diagonal(&[3.0, 0.0], &[1.0, 1.0]).unwrap(),
        }];
        let rows = bulk_check(&ctx, &users);
        let text = bulk_csv(&rows);
        let back = parse_bulk_csv(&text).unwrap();
        assert_eq!(back.len(), rows.len());
        for (a, b) in rows.iter().zip(&back) {
            assert_eq!(a.id, b.id);
            assert_eq!(a.top_broader, b.top_broader);
            assert!((a.containment - b.containment).abs() < 1e-4);
            assert_eq!(a.flagged(), b.flagged());
        }
    }

    #[test]
    fn nearest_labels_by_edit_distance() {
        let (phrases, _, _) = fixture();
        // "a" and "a1" are both one edit from "a3"; ties go by label
        assert_eq!(nearest_labels(&phrases, "a3", 2), vec!["a", "a1"]);
    }
}
