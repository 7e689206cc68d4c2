//! The audit's configuration: the `audit` object of `project.json`.

use std::collections::BTreeMap;

use serde::{Deserialize, Serialize};

use super::Severity;
use super::rules::Rule;
use crate::model::stats::StatsConfig;

/// Audit thresholds and sampling settings; the `audit` object of `project.json` (every key
/// optional, unknown keys refused).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct AuditConfig {
    /// Probability level α of a Gaussian's region (default 0.95).
    pub alpha: f64,
    /// Sampled points per containment / coverage estimate (default 256).
    pub samples: usize,
    /// Seed of the sample bank.
    pub seed: u64,
    /// Nats of ln det Σ a child may exceed its parent by before `inverted-generality` (0.5).
    pub inversion_margin: f64,
    /// `weak-inclusion` below this containment (0.3).
    pub containment_min: f64,
    /// `better-parent`: least KL improvement in nats (1.5).
    pub better_parent_margin: f64,
    /// `better-parent`: least KL improvement as a share of KL(child ‖ parent) (0.1).
    pub better_parent_ratio: f64,
    /// `better-parent`: the candidate must also contain the child about as well as the
    /// parent does: containment in it ≥ containment in the parent − this (0.1).
    pub better_parent_containment_slack: f64,
    /// `better-parent`: a candidate must be broader than the child by more than this many
    /// nats of ln det Σ (1.5), so that near-equal siblings are not proposed as parents.
    pub better_parent_broader: f64,
    /// `near-duplicate`: least Bhattacharyya coefficient (0.9).
    pub duplicate_bc_min: f64,
    /// `near-duplicate`: most abs(Δ ln det Σ) in nats (2.0).
    pub duplicate_generality_margin: f64,
    /// `coverage-gap`: absolute ceiling of the coverage threshold (0.6).
    pub coverage_min: f64,
    /// `coverage-gap`: threshold as a share of the median coverage of nodes with ≥ 2
    /// children (0.7).
    pub coverage_relative: f64,
    /// `wide-fanout` above this many children (15).
    pub max_fanout: usize,
    /// `single-child-chain` from this many single-child nodes in a row (1).
    pub single_child_chain_min: usize,
    /// Beam width of the pruned candidate search (3).
    pub search_beam: usize,
    /// Search exhaustively when the table has at most this many phrases (500).
    pub exhaustive_limit: usize,
    /// Severity per rule id, overriding the defaults.
    pub severity: BTreeMap<String, Severity>,
}

impl Default for AuditConfig {
    fn default() -> Self {
        let stats = StatsConfig::default();
        AuditConfig {
            alpha: stats.alpha,
            samples: stats.samples,
            seed: stats.seed,
            inversion_margin: 0.5,
            containment_min: 0.3,
            better_parent_margin: 1.5,
            better_parent_ratio: 0.1,
            better_parent_broader: 1.5,
            better_parent_containment_slack: 0.1,
            duplicate_bc_min: 0.9,
            duplicate_generality_margin: 2.0,
            coverage_min: 0.6,
            coverage_relative: 0.7,
            max_fanout: 15,
            single_child_chain_min: 1,
            search_beam: 3,
            exhaustive_limit: 500,
            severity: BTreeMap::new(),
        }
    }
}

/// A bad `audit` section.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[error("{file}: audit: {message}")]
pub struct AuditConfigError {
    /// The file the section came from.
    pub file: String,
    /// What is wrong, naming the key.
    pub message: String,
}

impl AuditConfig {
    /// Read the `audit` value of a manifest (`file` names it in errors). Unknown keys and
    /// out-of-range values are errors naming the key.
    pub fn from_value(v: &serde_json::Value, file: &str) -> Result<Self, AuditConfigError> {
        let err = |message: String| AuditConfigError {
            file: file.to_string(),
            message,
        };
        if !v.is_object() {
            return Err(err("must be a JSON object".into()));
        }
        let cfg: AuditConfig = serde_json::from_value(v.clone()).map_err(|e| err(e.to_string()))?;
        cfg.validate().map_err(err)?;
        Ok(cfg)
    }

    /// The configuration of a project: its manifest's `audit` section or the defaults.
    pub fn of_project(p: &crate::model::project::Project) -> Result<Self, AuditConfigError> {
        let file = p.dir.join("project.json").display().to_string();
        match &p.manifest.audit {
            Some(v) => AuditConfig::from_value(v, &file),
            None => Ok(AuditConfig::default()),
        }
    }

    /// Check ranges; the message names the key.
    pub fn validate(&self) -> Result<(), String> {
        let unit_open = |k: &str, v: f64| {
            if v > 0.0 && v < 1.0 {
                Ok(())
            } else {
                Err(format!("{k} must be strictly between 0 and 1, got {v}"))
            }
        };
        let unit = |k: &str, v: f64| {
            if (0.0..=1.0).contains(&v) {
                Ok(())
            } else {
                Err(format!("{k} must be between 0 and 1, got {v}"))
            }
        };
        let nonneg = |k: &str, v: f64| {
            if v.is_finite() && v >= 0.0 {
                Ok(())
            } else {
                Err(format!("{k} must be a finite number ≥ 0, got {v}"))
            }
        };
        unit_open("alpha", self.alpha)?;
        if !(16..=1_000_000).contains(&self.samples) {
            return Err(format!(
                "samples must be between 16 and 1000000, got {}",
                self.samples
            ));
        }
        nonneg("inversion_margin", self.inversion_margin)?;
        unit("containment_min", self.containment_min)?;
        nonneg("better_parent_margin", self.better_parent_margin)?;
        unit("better_parent_ratio", self.better_parent_ratio)?;
        nonneg("better_parent_broader", self.better_parent_broader)?;
        unit(
            "better_parent_containment_slack",
            self.better_parent_containment_slack,
        )?;
        if !(self.duplicate_bc_min > 0.0 && self.duplicate_bc_min <= 1.0) {
            return Err(format!(
                "duplicate_bc_min must be in (0, 1], got {}",
                self.duplicate_bc_min
            ));
        }
        nonneg(
            "duplicate_generality_margin",
            self.duplicate_generality_margin,
        )?;
        unit("coverage_min", self.coverage_min)?;
        nonneg("coverage_relative", self.coverage_relative)?;
        if self.search_beam == 0 {
            return Err("search_beam must be at least 1".into());
        }
        for k in self.severity.keys() {
            if Rule::from_id(k).is_none() {
                return Err(format!("severity: unknown rule \"{k}\""));
            }
        }
        Ok(())
    }

    /// Severity of a rule (the configured one, else its default).
    pub fn severity_of(&self, rule: &str) -> Severity {
        self.severity.get(rule).copied().unwrap_or_else(|| {
            Rule::from_id(rule).map_or(Severity::Warning, Rule::default_severity)
        })
    }

    /// The sampling settings the statistics use (α, samples, seed).
    pub fn stats(&self) -> StatsConfig {
        StatsConfig {
            alpha: self.alpha,
            samples: self.samples,
            seed: self.seed,
        }
    }

    /// The keys that belong to no single rule: sampling, search and severities.
    pub const GLOBAL_KEYS: &'static [&'static str] = &[
        "alpha",
        "samples",
        "seed",
        "search_beam",
        "exhaustive_limit",
        "severity",
    ];
}

impl From<&AuditConfig> for StatsConfig {
    fn from(cfg: &AuditConfig) -> Self {
        cfg.stats()
    }
}
