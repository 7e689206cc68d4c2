//! A tree that does not fit its embeddings (issue 17, part 6): every report format says so
//! first, lists at most 50 findings per rule with exact counts, and `--all-findings` lists
//! everything; a fitting tree's reports carry no such message.

use std::path::{Path, PathBuf};
use std::process::Command;

use rand::SeedableRng;
use rand_distr::{Distribution, StandardNormal};
use rand_xoshiro::Xoshiro256PlusPlus;
use treewright::model::phrase::{PhraseRecord, PhraseTable};
use treewright::model::project::ProjectWriter;
use treewright::model::sample::{SyntheticSpec, write_synthetic};
use treewright::model::tree::TreeFile;

const LISTED: usize = treewright::model::audit::treefit::LISTED_PER_RULE;

/// `n` rows under an 8-ary tree (row i's parent is (i − 1) / 8), means iid N(0, 1), unit
/// variances: the parents are no closer than random nodes.
fn random_project(dir: &Path, n: usize, d: usize) {
    let mut rng = Xoshiro256PlusPlus::seed_from_u64(17);
    let means: Vec<f32> = (0..n * d)
        .map(|_| {
            let z: f64 = StandardNormal.sample(&mut rng);
            z as f32
        })
        .collect();
    let vars = vec![1.0f32; n * d];
    let ids: Vec<String> = (0..n).map(|i| format!("r{i}")).collect();
    let recs: Vec<PhraseRecord> = ids
        .iter()
        .map(|id| PhraseRecord {
            id: Some(id.clone()),
            label: format!("row {id}"),
        })
        .collect();
    let phrases = PhraseTable::from_records(&recs).unwrap();
    let tree = TreeFile {
        root: ids[0].clone(),
        parent: (1..n)
            .map(|i| (ids[i].clone(), ids[(i - 1) / 8].clone()))
            .collect(),
    };
    ProjectWriter {
        name: "random means",
        phrases: &phrases,
        dim: d,
        means: &means,
        variances: &vars,
        users: &[],
        tree: Some(&tree),
    }
    .write(dir)
    .unwrap();
}

fn bin() -> PathBuf {
    PathBuf::from(env!("CARGO_BIN_EXE_treewright"))
}

fn audit(dir: &Path, extra: &[&str]) -> String {
    let out = Command::new(bin())
        .arg("audit")
        .arg(dir)
        .args(extra)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    String::from_utf8(out.stdout).unwrap()
}

#[test]
fn a_misfit_is_said_first_in_every_format_and_listings_are_capped() {
    let dir = tempfile::tempdir().unwrap();
    random_project(dir.path(), 3000, 16);
    let p = dir.path();
    let text = audit(p, &[]);
    assert!(
        text.starts_with("THE TREE AS A WHOLE DOES NOT FIT"),
        "{}",
        &text[..200]
    );
    let md = audit(p, &["--format", "md"]);
    let second = md.lines().nth(2).unwrap();
    assert!(
        second.starts_with("> **THE TREE AS A WHOLE DOES NOT FIT"),
        "{second}"
    );
    let csv = audit(p, &["--format", "csv"]);
    assert!(
        csv.starts_with("# THE TREE AS A WHOLE DOES NOT FIT"),
        "{}",
        &csv[..200]
    );

    // JSON: the fit in the summary, at most LISTED per rule, exact counts
    let capped: serde_json::Value = serde_json::from_str(&audit(p, &["--format", "json"])).unwrap();
    let all: serde_json::Value =
        serde_json::from_str(&audit(p, &["--format", "json", "--all-findings"])).unwrap();
    let fit = &capped["summary"]["tree_fit"];
    assert_eq!(fit["fits"], false);
    assert!(fit["kl_ratio"].as_f64().unwrap() > 0.5, "{fit}");
    assert_eq!(capped["summary"]["findings"], all["summary"]["findings"]);
    assert_eq!(capped["summary"]["rules"], all["summary"]["rules"]);
    let total = all["summary"]["findings"].as_u64().unwrap() as usize;
    assert_eq!(all["findings"].as_array().unwrap().len(), total);
    let listed = capped["findings"].as_array().unwrap();
    assert!(listed.len() < total, "{} of {total}", listed.len());
    assert_eq!(fit["listed"].as_u64().unwrap() as usize, listed.len());
    for r in capped["summary"]["rules"].as_array().unwrap() {
        let rule = r["rule"].as_str().unwrap();
        let n = (r["open"].as_u64().unwrap() + r["accepted"].as_u64().unwrap()) as usize;
        let shown = listed.iter().filter(|f| f["rule"] == rule).count();
        assert_eq!(shown, n.min(LISTED), "{rule}");
    }
    // the capped list is the head of the full ranking, rule by rule
    let first_of = |v: &serde_json::Value, rule: &str| {
        v["findings"]
            .as_array()
            .unwrap()
            .iter()
            .filter(|f| f["rule"] == rule)
            .take(LISTED)
            .cloned()
            .collect::<Vec<_>>()
    };
    assert_eq!(
        first_of(&capped, "weak-inclusion"),
        first_of(&all, "weak-inclusion")
    );
    // the text names what it left out
    assert!(text.contains("not listed (--all-findings lists them)"));
}

#[test]
fn a_fitting_tree_has_no_fit_message() {
    let dir = tempfile::tempdir().unwrap();
    let spec = SyntheticSpec {
        phrases: 3000,
        dim: 16,
        seed: 5,
        ..SyntheticSpec::default()
    };
    write_synthetic(dir.path(), &spec).unwrap();
    let json: serde_json::Value =
        serde_json::from_str(&audit(dir.path(), &["--format", "json"])).unwrap();
    assert!(json["summary"].get("tree_fit").is_none());
    let text = audit(dir.path(), &[]);
    assert!(!text.contains("DOES NOT FIT"));
    assert_eq!(
        json["findings"].as_array().unwrap().len() as u64,
        json["summary"]["findings"].as_u64().unwrap()
    );
}
