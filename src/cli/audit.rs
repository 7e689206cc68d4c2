//! `treewright audit PROJECT [--format text|json|csv|md] [--out FILE] [--fail-on warning|error]
//! [--rule RULE...] [--known-errors FILE] [--all-findings]`.
//!
//! When the tree as a whole does not fit the embeddings
//! ([`treefit`](crate::model::audit::treefit)), every format says so first (text: a first
//! line; Markdown: a quote under the title; JSON: `summary.tree_fit`; CSV: a `#` comment
//! line before the header) and lists at most
//! [`LISTED_PER_RULE`](crate::model::audit::treefit::LISTED_PER_RULE) findings per rule
//! (the counts stay exact; `--all-findings` lists everything). A fitting tree's reports
//! are unchanged.
//!
//! With `--known-errors FILE` the output is the audit measured against that list
//! ([`evaluate`](crate::model::audit::evaluate)) instead of the report: text or JSON.

use std::fmt::Write as _;
use std::io::Write as _;
use std::path::PathBuf;

use clap::{Args, ValueEnum};
use serde::Serialize;

use super::CliError;
use crate::model::Workspace;
use crate::model::audit::calibrate;
use crate::model::audit::evaluate::{evaluate, read_known_errors};
use crate::model::audit::treefit::{LISTED_PER_RULE, TreeFit};
use crate::model::audit::{AuditConfig, AuditReport, Finding, RULES, Severity};
use crate::model::edit::{Edit, EditRecord};
use crate::model::effective::EffectiveTree;
use crate::model::fsutil::atomic_write_with;
use crate::model::phrase::PhraseTable;
use crate::model::signoff::{latest_signoff, tree_hash};

/// Output formats.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum Format {
    /// One line per finding.
    Text,
    /// `{"summary": {...}, "findings": [...]}`.
    Json,
    /// One row per finding.
    Csv,
    /// A Markdown report to attach to a release.
    Md,
}

/// Severity threshold of `--fail-on`.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum FailOn {
    /// Warnings or errors.
    Warning,
    /// Errors only.
    Error,
}

/// Arguments of `audit`.
#[derive(Debug, Args)]
pub struct AuditArgs {
    /// Project folder or its project.json.
    pub project: PathBuf,
    /// Output format.
    #[arg(long, value_enum, default_value = "text")]
    pub format: Format,
    /// Write the report to this file instead of standard output.
    #[arg(long)]
    pub out: Option<PathBuf>,
    /// Exit 1 when open findings of this severity or worse remain.
    #[arg(long, value_enum)]
    pub fail_on: Option<FailOn>,
    /// Only these rules (repeatable).
    #[arg(long = "rule", value_name = "RULE", num_args = 1..)]
    pub rules: Vec<String>,
    /// Measure the audit against a JSON list of known errors
    /// (`{"node", "true_parent"?, "kind"?, "duplicate_of"?}`) and print the figures
    /// (text, or JSON with `--format json`) instead of the report.
    #[arg(long, value_name = "FILE")]
    pub known_errors: Option<PathBuf>,
    /// List every finding even when the tree as a whole does not fit the embeddings
    /// (the listing is then capped per rule; the counts are always exact).
    #[arg(long)]
    pub all_findings: bool,
}

/// The sign-off state of the effective tree.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct SignoffState {
    /// `not-signed-off`, `signed-off` (hash matches) or `changed-since-signoff`.
    pub state: &'static str,
    /// Hash of the current effective tree.
    pub tree_hash: String,
    /// Reviewer of the latest sign-off.
    pub reviewer: Option<String>,
    /// Time of the latest sign-off.
    pub time: Option<String>,
    /// Index of the sign-off edit in the override layer.
    pub index: Option<usize>,
}

/// Sign-off state from the override layer and the current tree.
pub fn signoff_state(
    eff: &EffectiveTree,
    phrases: &PhraseTable,
    edits: &[EditRecord],
) -> SignoffState {
    let hash = tree_hash(eff, phrases);
    match latest_signoff(edits) {
        Some((index, r)) => {
            let (reviewer, signed) = match &r.edit {
                Edit::Signoff {
                    reviewer,
                    tree_hash,
                    ..
                } => (reviewer.clone(), tree_hash.clone()),
                _ => (r.author.clone(), String::new()),
            };
            SignoffState {
                state: if signed == hash {
                    "signed-off"
                } else {
                    "changed-since-signoff"
                },
                tree_hash: hash,
                reviewer: Some(reviewer),
                time: Some(r.time.clone()),
                index: Some(index),
            }
        }
        None => SignoffState {
            state: "not-signed-off",
            tree_hash: hash,
            reviewer: None,
            time: None,
            index: None,
        },
    }
}

// The JSON structs below list their fields in alphabetical order: the report used to be
// built as a `serde_json::Value` (whose maps sort their keys) and is now streamed straight
// from these structs, with the same bytes.

#[derive(Serialize)]
struct JsonSuggestion<'a> {
    action: &'a str,
    target: Option<&'a str>,
}

#[derive(Serialize)]
struct JsonFinding<'a> {
    confidence: f64,
    explanation: &'a str,
    label: &'a str,
    node: &'a str,
    rule: &'a str,
    score: f64,
    severity: Severity,
    suggestion: Option<JsonSuggestion<'a>>,
    threshold: f64,
}

#[derive(Serialize)]
struct RuleCount {
    accepted: usize,
    open: usize,
    rule: &'static str,
    severity: Severity,
}

#[derive(Serialize)]
struct Summary<'a> {
    accepted: usize,
    /// "calibrated on N decisions (…)" when the reviewer's decisions recalibrated the
    /// confidence; absent otherwise.
    #[serde(skip_serializing_if = "Option::is_none")]
    calibration: Option<String>,
    coverage_threshold: f64,
    findings: usize,
    nodes: usize,
    open_errors: usize,
    open_info: usize,
    open_warnings: usize,
    phrases: usize,
    project: &'a str,
    rules: Vec<RuleCount>,
    samples: usize,
    signoff: SignoffJson<'a>,
    /// Only when the tree as a whole does not fit the embeddings.
    #[serde(skip_serializing_if = "Option::is_none")]
    tree_fit: Option<FitJson>,
    unreviewed: usize,
}

/// `summary.tree_fit` (keys in alphabetical order).
#[derive(Serialize)]
struct FitJson {
    baseline_contained_share: f64,
    baseline_median_kl: f64,
    baseline_pairs: usize,
    contained_share: f64,
    fits: bool,
    kl_ratio: f64,
    listed: usize,
    listed_per_rule: Option<usize>,
    median_kl: f64,
    message: String,
    nodes: usize,
}

/// [`SignoffState`] with its keys in alphabetical order.
#[derive(Serialize)]
struct SignoffJson<'a> {
    index: Option<usize>,
    reviewer: Option<&'a str>,
    state: &'a str,
    time: Option<&'a str>,
    tree_hash: &'a str,
}

/// The findings, serialised one by one as the JSON array is written.
struct JsonFindings<'v, 'a>(&'v View<'a>);

impl Serialize for JsonFindings<'_, '_> {
    fn serialize<S: serde::Serializer>(&self, ser: S) -> Result<S::Ok, S::Error> {
        use serde::ser::SerializeSeq;
        let view = self.0;
        let mut seq = ser.serialize_seq(Some(view.listed.len()))?;
        for f in &view.listed {
            seq.serialize_element(&JsonFinding {
                confidence: f.confidence,
                explanation: &f.explanation,
                label: view.eff.label(f.node),
                node: view.phrases.id(f.node),
                rule: f.rule,
                score: f.score,
                severity: f.severity,
                suggestion: f.suggestion.as_ref().map(|s| JsonSuggestion {
                    action: &s.action,
                    target: s.target.as_deref(),
                }),
                threshold: f.threshold,
            })?;
        }
        seq.end()
    }
}

#[derive(Serialize)]
struct JsonReport<'v, 'a> {
    findings: JsonFindings<'v, 'a>,
    summary: Summary<'v>,
}

/// Everything a renderer needs.
struct View<'a> {
    name: &'a str,
    phrases: &'a PhraseTable,
    eff: &'a EffectiveTree,
    report: &'a AuditReport,
    cfg: &'a AuditConfig,
    findings: Vec<&'a Finding>,
    /// The findings listed: all of them, or at most [`LISTED_PER_RULE`] per rule when the
    /// tree does not fit (and `--all-findings` is not given).
    listed: Vec<&'a Finding>,
    signoff: SignoffState,
    /// Sign-offs cancelled by a revert, with who and why (issue 23; md report only).
    reverted: Vec<String>,
}

impl View<'_> {
    fn open(&self, sev: Severity) -> usize {
        self.findings
            .iter()
            .filter(|f| !f.accepted && f.severity == sev)
            .count()
    }

    fn rule_counts(&self) -> Vec<RuleCount> {
        RULES
            .iter()
            .map(|(r, _)| RuleCount {
                rule: r,
                severity: self.cfg.severity_of(r),
                open: self
                    .findings
                    .iter()
                    .filter(|f| f.rule == *r && !f.accepted)
                    .count(),
                accepted: self
                    .findings
                    .iter()
                    .filter(|f| f.rule == *r && f.accepted)
                    .count(),
            })
            .collect()
    }

    fn summary(&self) -> Summary<'_> {
        Summary {
            project: self.name,
            nodes: self.report.stats.placed,
            phrases: self.phrases.len(),
            findings: self.findings.len(),
            open_errors: self.open(Severity::Error),
            open_warnings: self.open(Severity::Warning),
            open_info: self.open(Severity::Info),
            accepted: self.findings.iter().filter(|f| f.accepted).count(),
            calibration: self.report.calibration.as_ref().map(|c| c.describe()),
            unreviewed: self.report.unreviewed,
            coverage_threshold: self.report.coverage_threshold,
            samples: self.report.stats.samples,
            rules: self.rule_counts(),
            signoff: SignoffJson {
                index: self.signoff.index,
                reviewer: self.signoff.reviewer.as_deref(),
                state: self.signoff.state,
                time: self.signoff.time.as_deref(),
                tree_hash: &self.signoff.tree_hash,
            },
            tree_fit: self.misfit().map(|f| FitJson {
                baseline_contained_share: f.baseline_contained_share,
                baseline_median_kl: f.baseline_median_kl,
                baseline_pairs: f.baseline_pairs,
                contained_share: f.contained_share,
                fits: f.fits,
                kl_ratio: f.kl_ratio(),
                listed: self.listed.len(),
                listed_per_rule: (self.listed.len() < self.findings.len())
                    .then_some(LISTED_PER_RULE),
                median_kl: f.median_kl,
                message: f.headline(),
                nodes: f.nodes,
            }),
        }
    }

    /// The tree-level fit, when the tree does not fit.
    fn misfit(&self) -> Option<&TreeFit> {
        (!self.report.fit.fits).then_some(&self.report.fit)
    }

    /// "N more findings of rule R not listed" lines of a capped listing.
    fn unlisted(&self) -> Vec<(&'static str, usize)> {
        if self.listed.len() == self.findings.len() {
            return Vec::new();
        }
        RULES
            .iter()
            .filter_map(|(r, _)| {
                let all = self.findings.iter().filter(|f| f.rule == *r).count();
                let shown = self.listed.iter().filter(|f| f.rule == *r).count();
                (all > shown).then_some((*r, all - shown))
            })
            .collect()
    }

    /// The JSON report, streamed to `w` (no in-memory copy of the whole document).
    fn json(&self, w: &mut dyn std::io::Write) -> std::io::Result<()> {
        let report = JsonReport {
            findings: JsonFindings(self),
            summary: self.summary(),
        };
        serde_json::to_writer_pretty(&mut *w, &report)?;
        w.write_all(b"\n")
    }

    /// One CSV row per finding, streamed to `out`.
    fn csv(&self, out: &mut dyn std::io::Write) -> std::io::Result<()> {
        if let Some(f) = self.misfit() {
            // a comment line before the header: the message, without the CSV quoting rules
            writeln!(out, "# {}", f.headline().replace(['\n', '\r'], " "))?;
            for (r, k) in self.unlisted() {
                writeln!(
                    out,
                    "# {k} more {r} finding(s) not listed (--all-findings lists them)"
                )?;
            }
        }
        let mut w = csv::Writer::from_writer(out);
        let bad = std::io::Error::other;
        w.write_record([
            "rule",
            "severity",
            "node",
            "label",
            "score",
            "threshold",
            "confidence",
            "accepted",
            "action",
            "target",
            "explanation",
        ])
        .map_err(bad)?;
        for f in &self.listed {
            let (action, target) = f.suggestion.as_ref().map_or(("", ""), |s| {
                (s.action.as_str(), s.target.as_deref().unwrap_or(""))
            });
            w.write_record([
                f.rule,
                f.severity.as_str(),
                self.phrases.id(f.node),
                self.eff.label(f.node),
                &format!("{:.6}", f.score),
                &format!("{:.6}", f.threshold),
                &format!("{:.4}", f.confidence),
                if f.accepted { "true" } else { "false" },
                action,
                target,
                &f.explanation,
            ])
            .map_err(bad)?;
        }
        w.flush()
    }

    fn suggestion_text(f: &Finding) -> String {
        match &f.suggestion {
            Some(s) => match &s.target {
                Some(t) => format!("{} → {}", s.action, t),
                None => s.action.clone(),
            },
            None => String::new(),
        }
    }

    fn text(&self) -> String {
        let mut s = String::new();
        let sm = self.summary();
        if let Some(f) = self.misfit() {
            let _ = writeln!(s, "{}", f.headline());
        }
        let _ = writeln!(
            s,
            "{}: {} nodes, {} findings open: {} error(s), {} warning(s), {} info; {} accepted",
            sm.project,
            sm.nodes,
            sm.open_errors + sm.open_warnings + sm.open_info,
            sm.open_errors,
            sm.open_warnings,
            sm.open_info,
            sm.accepted
        );
        if let Some(c) = &sm.calibration {
            let _ = writeln!(s, "confidence {c}");
        }
        for f in &self.listed {
            let _ = writeln!(
                s,
                "{:<7} {:<19} {:<24} score {:.4} (threshold {:.4}){}  {}  [{}]",
                f.severity.as_str(),
                f.rule,
                self.phrases.id(f.node),
                f.score,
                f.threshold,
                if f.accepted { " accepted" } else { "" },
                f.explanation,
                Self::suggestion_text(f)
            );
        }
        for (r, k) in self.unlisted() {
            let _ = writeln!(
                s,
                "... {k} more {r} finding(s) not listed (--all-findings lists them)"
            );
        }
        s
    }

    fn md(&self) -> String {
        let mut s = String::new();
        let sm = self.summary();
        let esc = |t: &str| t.replace('|', "\\|");
        let _ = writeln!(s, "# Audit report: {}\n", esc(sm.project));
        if let Some(f) = self.misfit() {
            let _ = writeln!(s, "> **{}**\n", esc(&f.headline()));
        }
        let so = &self.signoff;
        let state = match so.state {
            "signed-off" => format!(
                "signed off by {} at {} (edit #{}); the tree is unchanged since",
                so.reviewer.as_deref().unwrap_or("?"),
                so.time.as_deref().unwrap_or("?"),
                so.index.unwrap_or(0)
            ),
            "changed-since-signoff" => format!(
                "**changed since** the sign-off by {} at {} (edit #{})",
                so.reviewer.as_deref().unwrap_or("?"),
                so.time.as_deref().unwrap_or("?"),
                so.index.unwrap_or(0)
            ),
            _ => "**not signed off**".to_string(),
        };
        let _ = writeln!(s, "- Sign-off: {state}");
        for r in &self.reverted {
            let _ = writeln!(s, "- Reverted sign-off: {}", esc(r));
        }
        let _ = writeln!(s, "- Tree hash: `{}`", so.tree_hash);
        let _ = writeln!(
            s,
            "- Nodes: {} of {} phrases; {} not reviewed",
            sm.nodes, sm.phrases, sm.unreviewed
        );
        let _ = writeln!(
            s,
            "- Open findings: {} error(s), {} warning(s), {} info; {} accepted",
            sm.open_errors, sm.open_warnings, sm.open_info, sm.accepted
        );
        if let Some(c) = &sm.calibration {
            let _ = writeln!(s, "- Confidence: {c}");
        }
        let _ = writeln!(
            s,
            "- Sampling: {} points per estimate at α = {}; coverage threshold in force {:.4}\n",
            sm.samples, self.cfg.alpha, sm.coverage_threshold
        );
        let _ = writeln!(s, "## Findings per rule\n");
        let _ = writeln!(s, "| rule | severity | open | accepted |");
        let _ = writeln!(s, "|---|---|---:|---:|");
        for r in &sm.rules {
            let _ = writeln!(
                s,
                "| {} | {} | {} | {} |",
                r.rule,
                r.severity.as_str(),
                r.open,
                r.accepted
            );
        }
        const TOP: usize = 25;
        let open: Vec<&&Finding> = self.findings.iter().filter(|f| !f.accepted).collect();
        let open_listed: Vec<&&Finding> = self.listed.iter().filter(|f| !f.accepted).collect();
        let _ = writeln!(
            s,
            "\n## Top open findings ({} of {})\n",
            open.len().min(TOP),
            open.len()
        );
        if open.is_empty() {
            let _ = writeln!(s, "None.");
        } else {
            let _ = writeln!(
                s,
                "| # | severity | rule | node | score | threshold | confidence | explanation | suggestion |"
            );
            let _ = writeln!(s, "|---:|---|---|---|---:|---:|---:|---|---|");
            for (i, f) in open_listed.iter().take(TOP).enumerate() {
                let _ = writeln!(
                    s,
                    "| {} | {} | {} | {} | {:.4} | {:.4} | {:.2} | {} | {} |",
                    i + 1,
                    f.severity.as_str(),
                    f.rule,
                    esc(self.phrases.id(f.node)),
                    f.score,
                    f.threshold,
                    f.confidence,
                    esc(&f.explanation),
                    esc(&Self::suggestion_text(f))
                );
            }
        }
        let accepted: Vec<&&Finding> = self.findings.iter().filter(|f| f.accepted).collect();
        if !accepted.is_empty() {
            let _ = writeln!(s, "\n## Accepted findings ({})\n", accepted.len());
            for f in accepted.iter().take(TOP) {
                let _ = writeln!(
                    s,
                    "- {} `{}`: {}",
                    f.rule,
                    esc(self.phrases.id(f.node)),
                    esc(&f.explanation)
                );
            }
        }
        s
    }
}

/// At most [`LISTED_PER_RULE`] findings of each rule, in report order.
fn capped<'a>(findings: &[&'a Finding]) -> Vec<&'a Finding> {
    let mut seen = [0usize; RULES.len()];
    findings
        .iter()
        .copied()
        .filter(|f| {
            let i = RULES.iter().position(|(r, _)| *r == f.rule).unwrap_or(0);
            seen[i] += 1;
            seen[i] <= LISTED_PER_RULE
        })
        .collect()
}

/// Run the audit and print or write the report.
pub fn run(args: &AuditArgs) -> Result<(), CliError> {
    for r in &args.rules {
        if !RULES.iter().any(|(x, _)| x == r) {
            let known: Vec<&str> = RULES.iter().map(|(x, _)| *x).collect();
            return Err(CliError::bad_input(format!(
                "--rule: unknown rule \"{r}\" (known: {})",
                known.join(", ")
            )));
        }
    }
    let ws = Workspace::open(&args.project)?;
    let project = &ws.project;
    let cfg = ws.audit_config()?;
    let eff = ws.effective()?;
    // the reviewer's decisions in the override layer recalibrate the confidence (never
    // removing a finding; see `calibrate`); fitted first, so that the audit of the base
    // tree it may need is dropped before the audit of the effective tree is made
    let calibration = calibrate::from_layer(
        &project.gaussians,
        &project.phrases,
        ws.base()?,
        &ws.layer.edits,
        &cfg,
    );
    let mut report = ws.audit_now()?;
    if let Some(c) = calibration {
        c.apply(&mut report, |r| cfg.severity.contains_key(r));
    }
    if let Some(path) = &args.known_errors {
        return run_evaluation(args, path, &project.phrases, &report);
    }
    let findings: Vec<&Finding> = report
        .findings
        .iter()
        .filter(|f| args.rules.is_empty() || args.rules.iter().any(|r| r == f.rule))
        .collect();
    let view = View {
        name: &project.manifest.name,
        phrases: &project.phrases,
        eff,
        report: &report,
        cfg: &cfg,
        signoff: signoff_state(eff, &project.phrases, &ws.layer.edits),
        listed: if report.fit.fits || args.all_findings {
            findings.clone()
        } else {
            capped(&findings)
        },
        findings,
        reverted: crate::model::history::reverted_signoff_lines(&ws.layer.edits),
    };
    let render = |w: &mut dyn std::io::Write| match args.format {
        Format::Text => w.write_all(view.text().as_bytes()),
        Format::Json => view.json(w),
        Format::Csv => view.csv(w),
        Format::Md => w.write_all(view.md().as_bytes()),
    };
    match &args.out {
        Some(path) => atomic_write_with(path, false, render).map_err(|e| {
            CliError::bad_input(format!("{}: cannot write the report: {e}", path.display()))
        })?,
        None => {
            let mut w = std::io::BufWriter::new(std::io::stdout().lock());
            match render(&mut w).and_then(|()| w.flush()) {
                Ok(()) => {}
                // a closed pipe (`| head`) is the reader's choice, not an error
                Err(e) if e.kind() == std::io::ErrorKind::BrokenPipe => {}
                Err(e) => {
                    return Err(CliError::bad_input(format!(
                        "cannot write the report to standard output: {e}"
                    )));
                }
            }
        }
    }
    if let Some(level) = args.fail_on {
        let min = match level {
            FailOn::Warning => Severity::Warning,
            FailOn::Error => Severity::Error,
        };
        let open = view
            .findings
            .iter()
            .filter(|f| !f.accepted && f.severity >= min)
            .count();
        if open > 0 {
            return Err(CliError::check_failed(format!(
                "{open} open finding(s) of severity {} or worse",
                min.as_str()
            )));
        }
    }
    Ok(())
}

/// `--known-errors`: measure the report and print the figures.
fn run_evaluation(
    args: &AuditArgs,
    path: &std::path::Path,
    phrases: &PhraseTable,
    report: &AuditReport,
) -> Result<(), CliError> {
    let known = read_known_errors(path, phrases).map_err(CliError::bad_input)?;
    let ev = evaluate(report, phrases, &known);
    let text = match args.format {
        Format::Text => ev.text(),
        Format::Json => {
            let mut s = serde_json::to_string_pretty(&ev)
                .map_err(|e| CliError::bad_input(format!("cannot serialise: {e}")))?;
            s.push('\n');
            s
        }
        Format::Csv | Format::Md => {
            return Err(CliError::bad_input(
                "--known-errors: the figures are printed as text or json (--format)",
            ));
        }
    };
    match &args.out {
        Some(p) => atomic_write_with(p, false, |w| w.write_all(text.as_bytes())).map_err(|e| {
            CliError::bad_input(format!("{}: cannot write the figures: {e}", p.display()))
        }),
        None => {
            let mut w = std::io::stdout().lock();
            match w.write_all(text.as_bytes()).and_then(|()| w.flush()) {
                Err(e) if e.kind() != std::io::ErrorKind::BrokenPipe => Err(CliError::bad_input(
                    format!("cannot write the figures to standard output: {e}"),
                )),
                _ => Ok(()),
            }
        }
    }
}
