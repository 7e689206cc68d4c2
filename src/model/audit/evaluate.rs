//! Measuring an audit against a list of known errors (`--known-errors FILE`).
//!
//! A known-errors file is a JSON list of objects `{"node", "true_parent"?, "kind"?,
//! "duplicate_of"?}`: `node` is a phrase id the audit should flag, `true_parent` the id of
//! its right parent (when known), `kind` a free word (`far`, `near`, `too-high`,
//! `duplicate` in the real check sets of `benches/real/`), `duplicate_of` the original of a
//! near-duplicate. Entries of kind `duplicate` count as duplicates; every other entry
//! (with or without a kind) counts as a *misplaced* node.
//!
//! # Figures (the same definitions as `benches/real/measure.py`)
//! - **Flagged set**: nodes with an open finding of severity warning or error from the
//!   placement rules (`better-parent`, `weak-inclusion`, `inverted-generality`). Precision
//!   and recall against all known errors; found / total per kind; flagged and precision
//!   per rule.
//! - **Ranking**: distinct nodes in the report's order of their first open placement
//!   finding (any severity). Average precision against the misplaced nodes,
//!   AP = (1/R) Σₖ P@k · rel(k), R the number of misplaced nodes (Manning, Raghavan &
//!   Schütze 2008, *Introduction to Information Retrieval*, §8.4: non-interpolated
//!   average precision, a relevant item never retrieved contributes 0). Precision at
//!   10/50/100 against all known errors (over min(k, ranked) nodes).
//! - **better-parent accuracy**: among flagged misplaced nodes with a known true parent,
//!   the share whose first open `better-parent` finding suggests that parent.
//! - **Duplicates found**: known duplicates with an open `near-duplicate` finding (warning
//!   or error) pairing them with their `duplicate_of`.

use std::collections::{BTreeMap, HashMap, HashSet};
use std::path::Path;

use serde::{Deserialize, Serialize};

use super::{
    AuditReport, BETTER_PARENT, INVERTED_GENERALITY, NEAR_DUPLICATE, Severity, WEAK_INCLUSION,
};
use crate::model::gaussian::PhraseId;
use crate::model::phrase::PhraseTable;

/// The placement rules whose warnings and errors make up the flagged set.
pub const PLACEMENT_RULES: [&str; 3] = [BETTER_PARENT, WEAK_INCLUSION, INVERTED_GENERALITY];

/// One of [`PLACEMENT_RULES`].
pub fn is_placement_rule(rule: &str) -> bool {
    PLACEMENT_RULES.contains(&rule)
}

/// The kind word of a near-duplicate entry.
pub const DUPLICATE_KIND: &str = "duplicate";

/// One entry of a known-errors file, ids resolved to rows.
#[derive(Debug, Clone, PartialEq)]
pub struct KnownError {
    /// The node that is wrong.
    pub node: PhraseId,
    /// Its right parent, when known.
    pub true_parent: Option<PhraseId>,
    /// The kind of error (`far`, `near`, `too-high`, `duplicate`, …), when given.
    pub kind: Option<String>,
    /// For a near-duplicate: the original.
    pub duplicate_of: Option<PhraseId>,
}

impl KnownError {
    /// A near-duplicate entry (kind `duplicate`).
    pub fn is_duplicate(&self) -> bool {
        self.kind.as_deref() == Some(DUPLICATE_KIND)
    }

    /// The kind, or `unspecified`.
    pub fn kind_name(&self) -> &str {
        self.kind.as_deref().unwrap_or("unspecified")
    }
}

/// A bad known-errors file.
#[derive(Debug, thiserror::Error)]
pub enum KnownErrorsError {
    /// The file could not be read.
    #[error("{file}: cannot read: {source}")]
    Read {
        /// The file.
        file: String,
        /// The I/O error.
        source: std::io::Error,
    },
    /// Not JSON of the expected shape.
    #[error("{file}: {message}")]
    Format {
        /// The file.
        file: String,
        /// What is wrong, naming the entry and field.
        message: String,
    },
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawEntry {
    node: String,
    #[serde(default)]
    true_parent: Option<String>,
    #[serde(default)]
    kind: Option<String>,
    #[serde(default)]
    duplicate_of: Option<String>,
}

/// Parse a known-errors document (`file` names it in errors) against a phrase table.
pub fn parse_known_errors(
    text: &str,
    file: &str,
    phrases: &PhraseTable,
) -> Result<Vec<KnownError>, KnownErrorsError> {
    let fmt = |message: String| KnownErrorsError::Format {
        file: file.to_string(),
        message,
    };
    let v: serde_json::Value =
        serde_json::from_str(text).map_err(|e| fmt(format!("not valid JSON: {e}")))?;
    let list = v
        .as_array()
        .ok_or_else(|| fmt("must be a JSON list of {\"node\", ...} objects".into()))?;
    let mut out = Vec::with_capacity(list.len());
    let mut seen = HashSet::new();
    for (i, item) in list.iter().enumerate() {
        let raw: RawEntry =
            serde_json::from_value(item.clone()).map_err(|e| fmt(format!("entry {i}: {e}")))?;
        let resolve = |field: &str, id: &str| {
            phrases
                .get(id)
                .ok_or_else(|| fmt(format!("entry {i}: {field}: unknown phrase id \"{id}\"")))
        };
        let node = resolve("node", &raw.node)?;
        if !seen.insert(node) {
            return Err(fmt(format!(
                "entry {i}: node: \"{}\" is listed twice",
                raw.node
            )));
        }
        let true_parent = raw
            .true_parent
            .as_deref()
            .map(|t| resolve("true_parent", t))
            .transpose()?;
        let duplicate_of = raw
            .duplicate_of
            .as_deref()
            .map(|t| resolve("duplicate_of", t))
            .transpose()?;
        if raw.kind.as_deref() == Some(DUPLICATE_KIND) && duplicate_of.is_none() {
            return Err(fmt(format!(
                "entry {i}: duplicate_of: required for kind \"{DUPLICATE_KIND}\""
            )));
        }
        out.push(KnownError {
            node,
            true_parent,
            kind: raw.kind,
            duplicate_of,
        });
    }
    Ok(out)
}

/// Read a known-errors file.
pub fn read_known_errors(
    path: &Path,
    phrases: &PhraseTable,
) -> Result<Vec<KnownError>, KnownErrorsError> {
    let file = path.display().to_string();
    let text = std::fs::read_to_string(path).map_err(|source| KnownErrorsError::Read {
        file: file.clone(),
        source,
    })?;
    parse_known_errors(&text, &file, phrases)
}

/// Found / total for one error kind.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct KindFigures {
    /// The kind (`unspecified` when the file gave none).
    pub kind: String,
    /// Known errors of this kind.
    pub total: usize,
    /// Of them, in the flagged set.
    pub flagged: usize,
    /// For duplicates: pairs found by `near-duplicate`.
    pub paired: Option<usize>,
}

/// Flagged nodes and precision of one placement rule.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct RuleFigures {
    /// Rule id.
    pub rule: &'static str,
    /// Nodes with an open warning or error of this rule.
    pub flagged: usize,
    /// Share of them that are known errors (None when none is flagged).
    pub precision: Option<f64>,
}

/// An audit measured against known errors (see the module documentation).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Evaluation {
    /// Entries of the known-errors file.
    pub known_errors: usize,
    /// Of them misplaced (not duplicates).
    pub misplaced: usize,
    /// Nodes in the flagged set.
    pub flagged: usize,
    /// Flagged nodes that are known errors.
    pub true_positives: usize,
    /// true positives / flagged (None when nothing is flagged).
    pub precision: Option<f64>,
    /// true positives / known errors (None without known errors).
    pub recall: Option<f64>,
    /// Average precision of the ranking against the misplaced nodes.
    pub average_precision: Option<f64>,
    /// Precision at 10, 50 and 100 against all known errors: (k, value).
    pub precision_at: Vec<(usize, Option<f64>)>,
    /// Flagged misplaced nodes with a known true parent.
    pub better_parent_judged: usize,
    /// Of them, whose `better-parent` suggestion is the true parent.
    pub better_parent_right: usize,
    /// better_parent_right / better_parent_judged.
    pub better_parent_accuracy: Option<f64>,
    /// Per kind, in alphabetical order.
    pub kinds: Vec<KindFigures>,
    /// Per placement rule.
    pub rules: Vec<RuleFigures>,
    /// Nodes in the ranking (with any open placement finding).
    pub ranked: usize,
}

fn ratio(a: usize, b: usize) -> Option<f64> {
    (b > 0).then(|| a as f64 / b as f64)
}

/// Non-interpolated average precision of a ranked list against a relevant set of size
/// `relevant` (Manning, Raghavan & Schütze 2008, §8.4): the mean over relevant items of
/// the precision at the rank where each is found, 0 for those never found.
pub fn average_precision(hits: &[bool], relevant: usize) -> Option<f64> {
    if relevant == 0 {
        return None;
    }
    let (mut found, mut sum) = (0usize, 0.0);
    for (i, &h) in hits.iter().enumerate() {
        if h {
            found += 1;
            sum += found as f64 / (i + 1) as f64;
        }
    }
    Some(sum / relevant as f64)
}

/// Measure `report` against `known` (see the module documentation).
pub fn evaluate(report: &AuditReport, phrases: &PhraseTable, known: &[KnownError]) -> Evaluation {
    let placement = |r: &str| PLACEMENT_RULES.contains(&r);
    let open = || report.findings.iter().filter(|f| !f.accepted);
    let by_node: HashMap<PhraseId, &KnownError> = known.iter().map(|k| (k.node, k)).collect();
    let misplaced: HashSet<PhraseId> = known
        .iter()
        .filter(|k| !k.is_duplicate())
        .map(|k| k.node)
        .collect();

    let mut flagged: HashSet<PhraseId> = HashSet::new();
    let mut per_rule: BTreeMap<&str, HashSet<PhraseId>> = BTreeMap::new();
    for f in open().filter(|f| placement(f.rule) && f.severity >= Severity::Warning) {
        flagged.insert(f.node);
        per_rule.entry(f.rule).or_default().insert(f.node);
    }
    let tp = flagged.iter().filter(|n| by_node.contains_key(n)).count();

    // ranking: distinct nodes by their first open placement finding
    let mut seen = HashSet::new();
    let ranked: Vec<PhraseId> = open()
        .filter(|f| placement(f.rule) && seen.insert(f.node))
        .map(|f| f.node)
        .collect();
    let hits: Vec<bool> = ranked.iter().map(|n| misplaced.contains(n)).collect();
    let precision_at = [10usize, 50, 100]
        .into_iter()
        .map(|k| {
            let top = &ranked[..k.min(ranked.len())];
            let good = top.iter().filter(|n| by_node.contains_key(n)).count();
            (k, ratio(good, top.len()))
        })
        .collect();

    // better-parent names the true parent
    let mut bp_target: HashMap<PhraseId, Option<&str>> = HashMap::new();
    for f in open().filter(|f| f.rule == BETTER_PARENT) {
        bp_target
            .entry(f.node)
            .or_insert_with(|| f.suggestion.as_ref().and_then(|s| s.target.as_deref()));
    }
    let (mut judged, mut right) = (0, 0);
    for k in known.iter().filter(|k| !k.is_duplicate()) {
        if let (true, Some(tp)) = (flagged.contains(&k.node), k.true_parent) {
            judged += 1;
            if bp_target.get(&k.node).copied().flatten() == Some(phrases.id(tp)) {
                right += 1;
            }
        }
    }

    // duplicates paired by near-duplicate
    let mut pairs: HashSet<(PhraseId, PhraseId)> = HashSet::new();
    for f in open().filter(|f| f.rule == NEAR_DUPLICATE && f.severity >= Severity::Warning) {
        let target = f
            .suggestion
            .as_ref()
            .and_then(|s| s.target.as_deref())
            .and_then(|t| phrases.get(t))
            .or(f.other);
        if let Some(t) = target {
            pairs.insert((f.node.min(t), f.node.max(t)));
        }
    }

    let mut kinds: BTreeMap<String, KindFigures> = BTreeMap::new();
    for k in known {
        let e = kinds
            .entry(k.kind_name().to_string())
            .or_insert_with(|| KindFigures {
                kind: k.kind_name().to_string(),
                total: 0,
                flagged: 0,
                paired: k.is_duplicate().then_some(0),
            });
        e.total += 1;
        e.flagged += usize::from(flagged.contains(&k.node));
        if let (Some(p), Some(o)) = (e.paired.as_mut(), k.duplicate_of) {
            *p += usize::from(pairs.contains(&(k.node.min(o), k.node.max(o))));
        }
    }

    Evaluation {
        known_errors: known.len(),
        misplaced: misplaced.len(),
        flagged: flagged.len(),
        true_positives: tp,
        precision: ratio(tp, flagged.len()),
        recall: ratio(tp, known.len()),
        average_precision: average_precision(&hits, misplaced.len()),
        precision_at,
        better_parent_judged: judged,
        better_parent_right: right,
        better_parent_accuracy: ratio(right, judged),
        kinds: kinds.into_values().collect(),
        rules: PLACEMENT_RULES
            .iter()
            .map(|&r| {
                let s = per_rule.get(r);
                let n = s.map_or(0, HashSet::len);
                let good = s.map_or(0, |s| s.iter().filter(|x| by_node.contains_key(x)).count());
                RuleFigures {
                    rule: r,
                    flagged: n,
                    precision: ratio(good, n),
                }
            })
            .collect(),
        ranked: ranked.len(),
    }
}

impl Evaluation {
    /// A few lines for a person.
    pub fn text(&self) -> String {
        use std::fmt::Write as _;
        let f = |v: Option<f64>| v.map_or("n/a".to_string(), |x| format!("{x:.3}"));
        let mut s = String::new();
        let _ = writeln!(
            s,
            "known errors: {} ({} misplaced); flagged (open warnings and errors of the placement rules): {}",
            self.known_errors, self.misplaced, self.flagged
        );
        let _ = writeln!(
            s,
            "precision {}  recall {}  ({} true positives)",
            f(self.precision),
            f(self.recall),
            self.true_positives
        );
        let pat: Vec<String> = self
            .precision_at
            .iter()
            .map(|(k, v)| format!("P@{k} {}", f(*v)))
            .collect();
        let _ = writeln!(
            s,
            "ranking of {} nodes: average precision (misplaced) {}  {}",
            self.ranked,
            f(self.average_precision),
            pat.join("  ")
        );
        let _ = writeln!(
            s,
            "better-parent names the true parent: {}/{} ({})",
            self.better_parent_right,
            self.better_parent_judged,
            f(self.better_parent_accuracy)
        );
        for k in &self.kinds {
            let _ = write!(s, "kind {:<12} flagged {}/{}", k.kind, k.flagged, k.total);
            if let Some(p) = k.paired {
                let _ = write!(s, "  paired by near-duplicate {p}/{}", k.total);
            }
            let _ = writeln!(s);
        }
        for r in &self.rules {
            let _ = writeln!(
                s,
                "rule {:<20} flagged {:>5}  precision {}",
                r.rule,
                r.flagged,
                f(r.precision)
            );
        }
        s
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::audit::{Finding, Suggestion};
    use crate::model::stats::{Histogram, Stats};

    fn table() -> PhraseTable {
        PhraseTable::from_ids(&["r", "a", "b", "c", "d", "e", "f", "g"]).unwrap()
    }

    fn finding(rule: &'static str, sev: Severity, node: PhraseId, target: Option<&str>) -> Finding {
        Finding {
            rule,
            severity: sev,
            node,
            other: None,
            score: 1.0,
            threshold: 0.5,
            confidence: 0.5,
            evidence: 0.0,
            explanation: String::new(),
            suggestion: Some(Suggestion {
                action: "reparent".into(),
                target: target.map(str::to_string),
                edit: None,
            }),
            accepted: false,
        }
    }

    fn report(findings: Vec<Finding>) -> AuditReport {
        AuditReport {
            findings,
            stats: Stats {
                nodes: Vec::new(),
                generality: Histogram::of(&[], 1, None),
                containment: Histogram::of(&[], 1, None),
                placed: 0,
                alpha: 0.0,
                samples: 0,
            },
            coverage_threshold: 0.0,
            unreviewed: 0,
            calibration: None,
            fit: crate::model::audit::treefit::TreeFit::default(),
        }
    }

    #[test]
    fn average_precision_by_hand() {
        // Manning, Raghavan & Schütze 2008, §8.4: relevant at ranks 1 and 3 of 2 relevant:
        // (1/1 + 2/3) / 2 = 0.8333…; a relevant item never ranked counts 0: (1 + 2/3) / 3
        let ap = average_precision(&[true, false, true, false], 2).unwrap();
        assert!((ap - 5.0 / 6.0).abs() < 1e-12, "{ap}");
        let ap = average_precision(&[true, false, true], 3).unwrap();
        assert!((ap - 5.0 / 9.0).abs() < 1e-12, "{ap}");
        assert_eq!(average_precision(&[false], 0), None);
    }

    #[test]
    fn reader_names_file_entry_and_field() {
        let t = table();
        let ok = parse_known_errors(
            r#"[{"node":"a","true_parent":"r","kind":"far"},{"node":"g","kind":"duplicate","duplicate_of":"f"},{"node":"b"}]"#,
            "k.json",
            &t,
        )
        .unwrap();
        assert_eq!(ok.len(), 3);
        assert_eq!((ok[0].node, ok[0].true_parent), (1, Some(0)));
        assert!(ok[1].is_duplicate() && ok[1].duplicate_of == Some(6));
        assert_eq!(ok[2].kind_name(), "unspecified");
        let e = parse_known_errors(r#"[{"node":"a","true_parent":"zz"}]"#, "k.json", &t)
            .unwrap_err()
            .to_string();
        assert_eq!(e, "k.json: entry 0: true_parent: unknown phrase id \"zz\"");
        let e = parse_known_errors(r#"[{"nod":"a"}]"#, "k.json", &t)
            .unwrap_err()
            .to_string();
        assert!(e.starts_with("k.json: entry 0: unknown field `nod`"), "{e}");
        let e = parse_known_errors(r#"{"node":"a"}"#, "k.json", &t)
            .unwrap_err()
            .to_string();
        assert!(e.starts_with("k.json: must be a JSON list"), "{e}");
        let e = parse_known_errors(r#"[{"node":"g","kind":"duplicate"}]"#, "k.json", &t)
            .unwrap_err()
            .to_string();
        assert!(e.contains("duplicate_of: required"), "{e}");
    }

    #[test]
    fn figures_counted_by_hand() {
        // counted by hand (common practice, no source beyond the AP definition above)
        let t = table();
        let known = parse_known_errors(
            r#"[{"node":"a","true_parent":"r","kind":"far"},
                {"node":"b","true_parent":"c","kind":"near"},
                {"node":"c","true_parent":"r","kind":"too-high"},
                {"node":"g","kind":"duplicate","duplicate_of":"f"}]"#,
            "k.json",
            &t,
        )
        .unwrap();
        use Severity::*;
        let mut dup = finding(NEAR_DUPLICATE, Warning, 7, Some("f"));
        dup.suggestion.as_mut().unwrap().action = "merge".into();
        let mut acc = finding(BETTER_PARENT, Error, 0, Some("r"));
        acc.accepted = true;
        let r = report(vec![
            finding(BETTER_PARENT, Error, 1, Some("r")), // a: right parent
            finding(WEAK_INCLUSION, Warning, 4, None),   // d: false alarm
            finding(WEAK_INCLUSION, Warning, 3, None),   // c: too-high, flagged
            finding(BETTER_PARENT, Error, 2, Some("d")), // b: wrong parent suggested
            finding(WEAK_INCLUSION, Warning, 1, None),   // a again (ranked once)
            finding(INVERTED_GENERALITY, Info, 5, None), // e: info, ranked, not flagged
            dup,
            acc, // accepted: ignored
        ]);
        let e = evaluate(&r, &t, &known);
        // flagged = {a, d, c, b}; known among them a, c, b
        assert_eq!(e.flagged, 4);
        assert_eq!(e.true_positives, 3);
        assert_eq!(e.precision, Some(0.75));
        assert_eq!(e.recall, Some(0.75));
        // ranking a, d, c, b, e; misplaced hits at ranks 1, 3, 4 of 3 misplaced:
        // (1/1 + 2/3 + 3/4) / 3 = 29/36
        assert_eq!(e.ranked, 5);
        assert!((e.average_precision.unwrap() - 29.0 / 36.0).abs() < 1e-12);
        // 3 known errors among the 5 ranked nodes
        assert_eq!(e.precision_at[0], (10, Some(0.6)));
        // judged: a, b, c (flagged, misplaced, true parent known); right: a only
        assert_eq!((e.better_parent_right, e.better_parent_judged), (1, 3));
        let dupk = e.kinds.iter().find(|k| k.kind == "duplicate").unwrap();
        assert_eq!((dupk.flagged, dupk.paired, dupk.total), (0, Some(1), 1));
        let wi = e.rules.iter().find(|r| r.rule == WEAK_INCLUSION).unwrap();
        assert_eq!((wi.flagged, wi.precision), (3, Some(2.0 / 3.0)));
    }
}
