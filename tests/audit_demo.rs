//! The audit on the Fernhollow demo: every planted flaw is found with a suggestion, and the
//! CLI's `--fail-on error` passes once the suggested fixes are recorded as edits.

use std::path::{Path, PathBuf};
use std::process::{Command, Output};

use treewright::model::Project;
use treewright::model::audit::{AuditConfig, Severity, audit};
use treewright::model::effective::EffectiveTree;
use treewright::model::sample::{planted_flaws, write_demo};

fn demo() -> (tempfile::TempDir, Project) {
    let dir = tempfile::tempdir().unwrap();
    write_demo(dir.path()).unwrap();
    let p = Project::load(dir.path()).unwrap();
    (dir, p)
}

fn bin() -> PathBuf {
    PathBuf::from(env!("CARGO_BIN_EXE_treewright"))
}

fn run(args: &[&str]) -> Output {
    Command::new(bin()).args(args).output().unwrap()
}

#[test]
fn every_planted_flaw_is_found() {
    let (_dir, p) = demo();
    let tree = p.tree.clone().unwrap();
    let eff = EffectiveTree::from_base(&tree, &p.phrases);
    let cfg = AuditConfig::default();
    let r = audit(&p.gaussians, &p.phrases, &eff, &[], &cfg);
    let id = |s: &str| p.phrases.get(s).unwrap();
    for flaw in planted_flaws() {
        let node = id(flaw.node);
        let hit = r.findings.iter().find(|f| match flaw.kind {
            "near-duplicate" => {
                f.rule == "near-duplicate"
                    && [f.node, f.other.unwrap()].contains(&node)
                    && [f.node, f.other.unwrap()].contains(&id(flaw.other.unwrap()))
            }
            "wrong-parent" => {
                f.rule == "better-parent"
                    && f.node == node
                    && f.other == Some(id(flaw.other.unwrap()))
            }
            "inverted-generality" => {
                f.rule == "inverted-generality"
                    && f.node == node
                    && f.other == Some(id(flaw.other.unwrap()))
            }
            kind => f.rule == kind && f.node == node,
        });
        let f = hit.unwrap_or_else(|| panic!("planted {} on {} not found", flaw.kind, flaw.node));
        assert!(f.suggestion.is_some(), "{f:?}");
        assert!(f.severity >= Severity::Warning);
    }
    // the coverage figure agrees with an estimate made here, outside the project's code:
    // points drawn with rand_distr's normal sampler from another generator (StdRng), the
    // Mahalanobis test written out for diagonal covariances, the χ² quantile from statrs;
    // agreement within three combined standard errors
    let gifts = id("gifts");
    let ours = r.stats.nodes[gifts as usize].coverage.unwrap();
    let kids: Vec<u32> = tree.children(gifts).to_vec();
    let other = independent_coverage(&p, gifts, &kids, 0.95, 20_000);
    let se = (ours.std_error.powi(2) + (other * (1.0 - other) / 20_000.0)).sqrt();
    assert!(
        (ours.value - other).abs() <= 3.0 * se,
        "{ours:?} vs independent {other}"
    );
}

/// Share of N(μ_p, diag v_p) inside at least one of the `covers`' `alpha` regions, by plain
/// Monte Carlo written without the project's Gaussian code (definition of coverage in the
/// README's audit section).
fn independent_coverage(p: &Project, node: u32, covers: &[u32], alpha: f64, n: usize) -> f64 {
    use rand::SeedableRng;
    use rand_distr::{Distribution, StandardNormal};
    use statrs::distribution::{ChiSquared, ContinuousCDF};
    let g = &p.gaussians;
    let d = g.dim();
    let r2 = ChiSquared::new(d as f64).unwrap().inverse_cdf(alpha);
    let (mu, var) = (g.mean(node as usize), g.variances(node as usize));
    let mut rng = rand::rngs::StdRng::seed_from_u64(20261204);
    let mut x = vec![0.0f64; d];
    let mut hits = 0usize;
    for _ in 0..n {
        for k in 0..d {
            let z: f64 = StandardNormal.sample(&mut rng);
            x[k] = mu[k] as f64 + (var[k] as f64).sqrt() * z;
        }
        let inside = covers.iter().any(|&c| {
            let (m, v) = (g.mean(c as usize), g.variances(c as usize));
            let q: f64 = (0..d)
                .map(|k| (x[k] - m[k] as f64).powi(2) / v[k] as f64)
                .sum();
            q <= r2
        });
        hits += inside as usize;
    }
    hits as f64 / n as f64
}

fn audit_json(dir: &Path) -> serde_json::Value {
    let out = run(&["audit", dir.to_str().unwrap(), "--format", "json"]);
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    serde_json::from_slice(&out.stdout).unwrap()
}

#[test]
fn fail_on_error_passes_after_the_suggested_fixes() {
    let (dir, _p) = demo();
    let d = dir.path().to_str().unwrap();
    let v = audit_json(dir.path());
    let findings = v["findings"].as_array().unwrap();
    for f in findings {
        for k in [
            "rule",
            "severity",
            "node",
            "label",
            "score",
            "threshold",
            "confidence",
            "explanation",
            "suggestion",
        ] {
            assert!(f.get(k).is_some(), "{k} missing in {f}");
        }
        assert_eq!(f.as_object().unwrap().len(), 9);
        let c = f["confidence"].as_f64().unwrap();
        assert!((0.0..=1.0).contains(&c), "{f}");
    }
    assert!(v["summary"]["open_errors"].as_u64().unwrap() >= 1);
    let fail = run(&["audit", d, "--fail-on", "error", "--format", "md"]);
    assert_eq!(fail.status.code(), Some(1));
    let md = String::from_utf8_lossy(&fail.stdout);
    assert!(
        md.contains("## Findings per rule") && md.contains("not signed off"),
        "{md}"
    );
    // record every error's suggested fix as an edit through the CLI
    for f in findings.iter().filter(|f| f["severity"] == "error") {
        let s = &f["suggestion"];
        assert_eq!(s["action"], "reparent", "{f}");
        let out = run(&[
            "edit",
            d,
            "reparent",
            f["node"].as_str().unwrap(),
            s["target"].as_str().unwrap(),
            "--author",
            "test",
        ]);
        assert_eq!(
            out.status.code(),
            Some(0),
            "{}",
            String::from_utf8_lossy(&out.stderr)
        );
    }
    let ok = run(&["audit", d, "--fail-on", "error"]);
    assert_eq!(
        ok.status.code(),
        Some(0),
        "{}{}",
        String::from_utf8_lossy(&ok.stdout),
        String::from_utf8_lossy(&ok.stderr)
    );
    // unknown rule names are bad input
    let bad = run(&["audit", d, "--rule", "nope"]);
    assert_eq!(bad.status.code(), Some(2));
    // --rule filters, --out writes the file, CSV has a header
    let out_path = dir.path().join("audit.csv");
    let o = run(&[
        "audit",
        d,
        "--format",
        "csv",
        "--rule",
        "unplaced",
        "--out",
        out_path.to_str().unwrap(),
    ]);
    assert_eq!(o.status.code(), Some(0));
    let csv = std::fs::read_to_string(&out_path).unwrap();
    assert!(csv.starts_with("rule,severity,node,label,score,threshold"));
    assert_eq!(csv.lines().count(), 4, "{csv}");
}

#[test]
fn an_unknown_audit_key_is_bad_input() {
    let (dir, _p) = demo();
    let path = dir.path().join("project.json");
    let mut m: serde_json::Value = serde_json::from_slice(&std::fs::read(&path).unwrap()).unwrap();
    m["audit"] = serde_json::json!({"containment_minimum": 0.2});
    std::fs::write(&path, serde_json::to_vec_pretty(&m).unwrap()).unwrap();
    let out = run(&["audit", dir.path().to_str().unwrap()]);
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(
        err.contains("containment_minimum") && err.contains("project.json"),
        "{err}"
    );
}

#[test]
fn the_markdown_report_carries_the_signoff_state() {
    let (dir, _p) = demo();
    let d = dir.path().to_str().unwrap();
    let so = run(&["signoff", d, "--reviewer", "ana"]);
    assert_eq!(
        so.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&so.stderr)
    );
    let md = String::from_utf8(run(&["audit", d, "--format", "md"]).stdout).unwrap();
    assert!(md.contains("- Sign-off: signed off by ana at "), "{md}");
    assert!(md.contains("| better-parent | error | 2 | 0 |"), "{md}");
    let e = run(&[
        "edit",
        d,
        "reparent",
        "grow-lights",
        "houseplants",
        "--author",
        "t",
    ]);
    assert_eq!(e.status.code(), Some(0));
    let v = audit_json(dir.path());
    assert_eq!(v["summary"]["signoff"]["state"], "changed-since-signoff");
    assert_eq!(v["summary"]["signoff"]["reviewer"], "ana");
}
