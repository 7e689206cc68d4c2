//! The review queue: the nodes worth a reviewer's time, in order of risk.
//!
//! A node is queued when the audit has a finding about it (a per-node rule; the tree-wide
//! `unreviewed` and `stale-edit` findings are not about one node). Its **risk** is
//!
//! > risk = confidence × reach
//!
//! where *confidence* is the highest confidence of the node's findings
//! ([`crate::model::audit::confidence`]: 1 − the false-discovery rate for the placement
//! rules, 1 for the others) and *reach* is how much of the tree depends on the node: the
//! size of its subtree (itself included), or, when the manifest names a `weights` file, the
//! traffic under it, the sum of the weights of the phrases in its subtree and of the
//! phrases merged into them (an unplaced phrase reaches only itself). Ties go to the lower
//! row, so the order is deterministic.
//!
//! Each row says why the node is queued (its most confident finding, and how many more it
//! has) and the suggested decision (the ready edit of that finding, else "review").
//!
//! A queue remembers what happened to its rows during a session: approved, marked to fix,
//! resolved (no open finding left, by an edit elsewhere or a pin) or skipped.
//! [`ReviewQueue::update`] follows an edit without reordering the rows the reviewer has
//! already seen: states and risks are refreshed, nodes with new findings join at the end
//! (ordered by risk among themselves). It costs O(findings + rows + n) (the reach is one
//! pass over the tree).
//!
//! **Progress**: reviewed = rows approved, marked to fix or resolved; the weighted share is
//! the reach of those rows over the reach of all rows.
//!
//! # Weights file
//! JSON (`{"phrase-id": 1200, ...}`) or CSV (header `id,weight`, one row per phrase), chosen
//! by the extension (`.json` / `.csv`). Every id must be a phrase of the project and every
//! weight a finite number ≥ 0; phrases not listed weigh 0. Errors name the file and the
//! phrase or row.

use std::collections::HashMap;
use std::path::Path;

use serde::Serialize;

use super::audit::{AuditReport, Finding, Rule, Scope};
use super::edit::{Edit, ReviewStatus};
use super::effective::EffectiveTree;
use super::gaussian::PhraseId;
use super::phrase::PhraseTable;
use super::project::{Project, resolve_inside};
use super::signoff::describe_edit;

/// What happened to a queued node.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum ItemState {
    /// Waiting for a decision.
    Open,
    /// Reviewed as approved.
    Approved,
    /// Reviewed as to fix.
    ToFix,
    /// No open finding left (fixed by an edit, or pinned).
    Resolved,
    /// Passed over in this session (still open).
    Skipped,
}

impl ItemState {
    /// `open`, `approved`, `to-fix`, `resolved` or `skipped`.
    pub fn as_str(self) -> &'static str {
        match self {
            ItemState::Open => "open",
            ItemState::Approved => "approved",
            ItemState::ToFix => "to-fix",
            ItemState::Resolved => "resolved",
            ItemState::Skipped => "skipped",
        }
    }

    /// Counted as reviewed in the progress.
    pub fn is_reviewed(self) -> bool {
        matches!(
            self,
            ItemState::Approved | ItemState::ToFix | ItemState::Resolved
        )
    }
}

/// One row of the queue.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct QueueItem {
    /// Row of the node.
    #[serde(skip)]
    pub node: PhraseId,
    /// Its stable id.
    pub id: String,
    /// Its effective label.
    pub label: String,
    /// confidence × reach.
    pub risk: f64,
    /// Highest confidence of its findings.
    pub confidence: f64,
    /// Subtree size, or traffic under it when weights are given.
    pub reach: f64,
    /// Rule of the most confident finding.
    pub rule: &'static str,
    /// Why it is queued: the rule, its explanation and how many more findings there are.
    pub why: String,
    /// The suggested decision in words.
    pub suggested: String,
    /// The ready edit of the suggestion, when there is one.
    #[serde(skip)]
    pub edit: Option<Edit>,
    /// What happened to it.
    pub state: ItemState,
}

/// Reviewed / queued and the weighted share reviewed.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Progress {
    /// Rows approved, marked to fix or resolved.
    pub reviewed: usize,
    /// Rows in the queue.
    pub queued: usize,
    /// Reach of the reviewed rows over the reach of all rows (0 for an empty queue).
    pub weighted_share: f64,
}

impl Progress {
    /// "12 / 40 reviewed (35.0 % of the weight)".
    pub fn text(&self) -> String {
        format!(
            "{} / {} reviewed ({:.1} % of the weight)",
            self.reviewed,
            self.queued,
            100.0 * self.weighted_share
        )
    }
}

/// The risk-ordered review queue of a session.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct ReviewQueue {
    /// Rows: risk order at build time, later arrivals at the end.
    pub items: Vec<QueueItem>,
    /// Row of the queue per node.
    index: HashMap<PhraseId, usize>,
}

/// A bad weights file.
#[derive(Debug, thiserror::Error)]
pub enum WeightsError {
    /// Not readable.
    #[error("{file}: cannot read the weights file: {source}")]
    Read {
        /// The file.
        file: String,
        /// Why.
        source: std::io::Error,
    },
    /// Not valid JSON / CSV of the expected shape.
    #[error("{file}: {why}")]
    Format {
        /// The file.
        file: String,
        /// What is wrong, with the row.
        why: String,
    },
    /// An id that is not a phrase of the project.
    #[error("{file}: \"{id}\" is not a phrase of the project")]
    UnknownPhrase {
        /// The file.
        file: String,
        /// The id.
        id: String,
    },
    /// A weight that is negative or not finite.
    #[error("{file}: the weight of \"{id}\" must be a finite number >= 0, found {value}")]
    BadWeight {
        /// The file.
        file: String,
        /// The phrase.
        id: String,
        /// The value as written.
        value: String,
    },
    /// The manifest's `weights` path is not usable (absolute, outside the folder).
    #[error("{0}")]
    Manifest(String),
    /// The extension is neither `.json` nor `.csv`.
    #[error("{file}: weights must be a .json or .csv file")]
    Extension {
        /// The file.
        file: String,
    },
}

/// The weights named by the project's manifest (`weights`), if any.
pub fn project_weights(project: &Project) -> Result<Option<Vec<f64>>, WeightsError> {
    let Some(rel) = &project.manifest.weights else {
        return Ok(None);
    };
    let path = resolve_inside(&project.dir, rel, "weights")
        .map_err(|e| WeightsError::Manifest(e.to_string()))?;
    load_weights(&path, &project.phrases).map(Some)
}

/// Read a weights file (see the module documentation): one weight per phrase row.
pub fn load_weights(path: &Path, phrases: &PhraseTable) -> Result<Vec<f64>, WeightsError> {
    let file = path.display().to_string();
    let bytes = std::fs::read(path).map_err(|source| WeightsError::Read {
        file: file.clone(),
        source,
    })?;
    let ext = path
        .extension()
        .and_then(|e| e.to_str())
        .map(str::to_ascii_lowercase);
    let pairs: Vec<(String, String)> = match ext.as_deref() {
        Some("json") => {
            let map: serde_json::Map<String, serde_json::Value> = serde_json::from_slice(&bytes)
                .map_err(|e| WeightsError::Format {
                    file: file.clone(),
                    why: format!("expected an object {{\"phrase id\": number}}: {e}"),
                })?;
            map.into_iter().map(|(k, v)| (k, v.to_string())).collect()
        }
        Some("csv") => {
            let mut r = csv::ReaderBuilder::new()
                .has_headers(true)
                .from_reader(bytes.as_slice());
            let headers = r.headers().map_err(|e| WeightsError::Format {
                file: file.clone(),
                why: format!("header: {e}"),
            })?;
            if headers.len() != 2 || &headers[0] != "id" || &headers[1] != "weight" {
                return Err(WeightsError::Format {
                    file,
                    why: "the header must be \"id,weight\"".into(),
                });
            }
            let mut out = Vec::new();
            for (i, rec) in r.records().enumerate() {
                let rec = rec.map_err(|e| WeightsError::Format {
                    file: file.clone(),
                    why: format!("row {}: {e}", i + 2),
                })?;
                out.push((rec[0].to_string(), rec[1].trim().to_string()));
            }
            out
        }
        _ => return Err(WeightsError::Extension { file }),
    };
    let mut w = vec![0.0; phrases.len()];
    for (id, value) in pairs {
        let Some(p) = phrases.find(&id) else {
            return Err(WeightsError::UnknownPhrase { file, id });
        };
        match value.parse::<f64>() {
            Ok(x) if x.is_finite() && x >= 0.0 => w[p as usize] = x,
            _ => return Err(WeightsError::BadWeight { file, id, value }),
        }
    }
    Ok(w)
}

/// Reach of every phrase: subtree size, or with `weights` the weight under it (aliases
/// count for their target). An unplaced phrase reaches only itself.
pub fn reach(eff: &EffectiveTree, weights: Option<&[f64]>) -> Vec<f64> {
    let n = eff.labels.len();
    let own = |p: usize| weights.map_or(1.0, |w| w.get(p).copied().unwrap_or(0.0));
    let mut r: Vec<f64> = (0..n).map(own).collect();
    if weights.is_some() {
        for (p, rp) in r.iter_mut().enumerate() {
            if eff.tree.is_placed(p as PhraseId) {
                for &a in &eff.aliases[p] {
                    *rp += own(a as usize);
                }
            }
        }
    }
    for x in eff.tree.preorder().into_iter().rev() {
        if let Some(parent) = eff.tree.parent(x) {
            r[parent as usize] += r[x as usize];
        }
    }
    r
}

/// A finding's score and threshold in words, for a tooltip: "KL gain over the parent is
/// 44.97 nats, the threshold is 4.69; confidence 0.99".
pub fn score_in_words(f: &Finding) -> String {
    let (s, t) = (f.score, f.threshold);
    let pct = |x: f64| format!("{:.1} %", 100.0 * x);
    let body = match f.rule {
        "better-parent" => {
            format!("KL is lower under the better parent by {s:.2} nats, the threshold is {t:.2}")
        }
        "inverted-generality" => {
            format!("ln det Σ is {s:.2} above the parent's, the margin is {t:.2}")
        }
        "weak-inclusion" => format!(
            "containment in the parent is {}, the threshold is {}",
            pct(s),
            pct(t)
        ),
        "coverage-gap" => format!("the children cover {}, the threshold is {}", pct(s), pct(t)),
        "near-duplicate" => {
            format!("the Bhattacharyya coefficient is {s:.3}, the threshold is {t:.3}")
        }
        "single-child-chain" => format!("the chain has {s:.0} nodes, the threshold is {t:.0}"),
        "wide-fanout" => format!("it has {s:.0} children, the limit is {t:.0}"),
        "unreviewed" => format!("{} of the nodes are unreviewed", pct(s)),
        _ => "no score: the finding is a fact, not a measurement".into(),
    };
    format!("{body}; confidence {:.2}", f.confidence)
}

fn is_node_finding(f: &Finding) -> bool {
    Rule::from_id(f.rule).is_some_and(|r| r.scope() == Scope::Node)
}

/// Findings per node: (open count, all count, the most confident one — open first).
fn by_node(report: &AuditReport) -> HashMap<PhraseId, (usize, usize, &Finding)> {
    let mut m: HashMap<PhraseId, (usize, usize, &Finding)> = HashMap::new();
    // findings are ranked: open first, then by severity and confidence, so the first one
    // seen of a node is its headline
    for f in report.findings.iter().filter(|f| is_node_finding(f)) {
        let e = m.entry(f.node).or_insert((0, 0, f));
        e.1 += 1;
        if !f.accepted {
            e.0 += 1;
        }
        if f.confidence > e.2.confidence && f.accepted == e.2.accepted {
            e.2 = f;
        }
    }
    m
}

fn state_of(eff: &EffectiveTree, p: PhraseId, open: usize, before: ItemState) -> ItemState {
    match eff.review[p as usize] {
        ReviewStatus::Approved => ItemState::Approved,
        ReviewStatus::ToFix => ItemState::ToFix,
        ReviewStatus::Unreviewed if open == 0 => ItemState::Resolved,
        ReviewStatus::Unreviewed => match before {
            ItemState::Skipped => ItemState::Skipped,
            _ => ItemState::Open,
        },
    }
}

fn make_item(
    phrases: &PhraseTable,
    eff: &EffectiveTree,
    p: PhraseId,
    (open, all, f): (usize, usize, &Finding),
    reach: &[f64],
) -> QueueItem {
    let confidence = f.confidence;
    let r = reach[p as usize];
    let more = all - 1;
    let why = if more == 0 {
        format!("{}: {}", f.rule, f.explanation)
    } else {
        format!(
            "{}: {} (and {more} more finding{})",
            f.rule,
            f.explanation,
            if more == 1 { "" } else { "s" }
        )
    };
    let edit = f.suggestion.as_ref().and_then(|s| s.edit.clone());
    let suggested = match (&edit, &f.suggestion) {
        (Some(e), _) => describe_edit(e),
        (None, Some(s)) => s.action.clone(),
        (None, None) => "review".into(),
    };
    QueueItem {
        node: p,
        id: phrases.id(p).to_string(),
        label: eff.label(p).to_string(),
        risk: confidence * r,
        confidence,
        reach: r,
        rule: f.rule,
        why,
        suggested,
        edit,
        state: state_of(eff, p, open, ItemState::Open),
    }
}

fn by_risk(a: &QueueItem, b: &QueueItem) -> std::cmp::Ordering {
    b.risk.total_cmp(&a.risk).then(a.node.cmp(&b.node))
}

impl ReviewQueue {
    /// The queue of a report over `eff`, highest risk first.
    pub fn build(
        report: &AuditReport,
        eff: &EffectiveTree,
        phrases: &PhraseTable,
        weights: Option<&[f64]>,
    ) -> Self {
        let reach = reach(eff, weights);
        let mut items: Vec<QueueItem> = by_node(report)
            .into_iter()
            .map(|(p, c)| make_item(phrases, eff, p, c, &reach))
            .collect();
        items.sort_by(by_risk);
        let index = items.iter().enumerate().map(|(i, x)| (x.node, i)).collect();
        ReviewQueue { items, index }
    }

    /// Follow an edit: refresh states, labels, risks and suggestions of the rows, append
    /// nodes that got findings (by risk). Rows keep their places.
    pub fn update(
        &mut self,
        report: &AuditReport,
        eff: &EffectiveTree,
        phrases: &PhraseTable,
        weights: Option<&[f64]>,
    ) {
        let reach = reach(eff, weights);
        let mut found = by_node(report);
        for item in &mut self.items {
            let before = item.state;
            match found.remove(&item.node) {
                Some(c) => {
                    let mut fresh = make_item(phrases, eff, item.node, c, &reach);
                    fresh.state = state_of(eff, item.node, c.0, before);
                    *item = fresh;
                }
                None => {
                    item.label = eff.label(item.node).to_string();
                    item.reach = reach[item.node as usize];
                    item.risk = item.confidence * item.reach;
                    item.state = state_of(eff, item.node, 0, before);
                }
            }
        }
        let mut new: Vec<QueueItem> = found
            .into_iter()
            .filter(|(_, c)| c.0 > 0)
            .map(|(p, c)| make_item(phrases, eff, p, c, &reach))
            .collect();
        new.sort_by(by_risk);
        for item in new {
            self.index.insert(item.node, self.items.len());
            self.items.push(item);
        }
    }

    /// The row of a node, if queued.
    pub fn position(&self, p: PhraseId) -> Option<usize> {
        self.index.get(&p).copied()
    }

    /// Pass over row `i` (kept open for later).
    pub fn skip(&mut self, i: usize) {
        if let Some(x) = self.items.get_mut(i)
            && x.state == ItemState::Open
        {
            x.state = ItemState::Skipped;
        }
    }

    /// The next row after `from` (wrapping) that still waits for a decision: open rows
    /// first, then skipped ones.
    pub fn next_open(&self, from: Option<usize>) -> Option<usize> {
        let n = self.items.len();
        let start = from.map_or(0, |i| i + 1);
        for want in [ItemState::Open, ItemState::Skipped] {
            if let Some(k) = (0..n)
                .map(|k| (start + k) % n)
                .find(|&i| self.items[i].state == want)
            {
                return Some(k);
            }
        }
        None
    }

    /// The previous row before `from` (wrapping) that still waits for a decision.
    pub fn previous_open(&self, from: Option<usize>) -> Option<usize> {
        let n = self.items.len();
        if n == 0 {
            return None;
        }
        let start = from.unwrap_or(0) + n;
        (1..=n)
            .map(|k| (start - k) % n)
            .find(|&i| !self.items[i].state.is_reviewed())
    }

    /// Rows still waiting (open or skipped), in queue order.
    pub fn pending(&self) -> impl Iterator<Item = &QueueItem> {
        self.items.iter().filter(|x| !x.state.is_reviewed())
    }

    /// Reviewed / queued and the weighted share.
    pub fn progress(&self) -> Progress {
        let total = self.items.iter().fold(0.0, |a, x| a + x.reach);
        let done: Vec<&QueueItem> = self
            .items
            .iter()
            .filter(|x| x.state.is_reviewed())
            .collect();
        let w = done.iter().fold(0.0, |a, x| a + x.reach);
        Progress {
            reviewed: done.len(),
            queued: self.items.len(),
            weighted_share: if total > 0.0 { w / total } else { 0.0 },
        }
    }
}

#[cfg(test)]
mod tests;
