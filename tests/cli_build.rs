//! `treewright build` end to end through the built binary, on a small project written with
//! `ProjectWriter` into a temporary folder.

use std::collections::BTreeSet;
use std::fs;
use std::path::Path;
use std::process::Command;

use treewright::model::phrase::{PhraseRecord, PhraseTable};
use treewright::model::project::ProjectWriter;
use treewright::model::tree::{Tree, TreeFile};

fn treewright() -> Command {
    Command::new(env!("CARGO_BIN_EXE_treewright"))
}

const LABELS: [&str; 12] = [
    "garden plants",
    "drought tolerant",
    "succulent",
    "cactus",
    "rock garden",
    "shade loving",
    "fern",
    "hosta",
    "woodland",
    "peat free compost",
    "slug resistant",
    "bark mulch",
];

/// Three groups of three narrow phrases around a broad "garden plants", plus three loose
/// ones, in 3 dimensions; with an old tree that puts everything under "garden plants".
fn write_project(dir: &Path, with_tree: bool) -> PhraseTable {
    let recs: Vec<PhraseRecord> = LABELS
        .iter()
        .map(|l| PhraseRecord {
            id: None,
            label: l.to_string(),
        })
        .collect();
    let phrases = PhraseTable::from_records(&recs).unwrap();
    let centres = [[5.0f32, 0.0, 0.0], [0.0, 5.0, 0.0], [0.0, 0.0, 5.0]];
    let mut means = vec![0.0f32, 0.0, 0.0];
    let mut variances = vec![9.0f32, 9.0, 9.0];
    for (g, c) in centres.iter().enumerate() {
        for i in 0..3 {
            let off = 0.2 * (i as f32 - 1.0);
            means.extend([c[0] + off, c[1] - off, c[2] + 0.1 * g as f32]);
            variances.extend([0.3f32, 0.3, 0.3]);
        }
    }
    for i in 0..2 {
        means.extend([-3.0f32, -3.0 + i as f32, 1.0]);
        variances.extend([0.5f32, 0.5, 0.5]);
    }
    assert_eq!(means.len(), LABELS.len() * 3);
    let old = TreeFile {
        root: "garden-plants".into(),
        parent: phrases
            .ids()
            .iter()
            .skip(1)
            .map(|id| (id.clone(), "garden-plants".to_string()))
            .collect(),
    };
    ProjectWriter {
        name: "Fernhollow build test",
        phrases: &phrases,
        dim: 3,
        means: &means,
        variances: &variances,
        users: &[],
        tree: with_tree.then_some(&old),
    }
    .write(dir)
    .unwrap();
    phrases
}

fn assert_covers_all(tree_json: &[u8], phrases: &PhraseTable) {
    let t: TreeFile = serde_json::from_slice(tree_json).unwrap();
    let tree = Tree::from_id_map(phrases, &t.root, &t.parent).expect("a valid tree");
    assert_eq!(tree.node_count(), phrases.len(), "every phrase is a node");
    let mut ids: BTreeSet<&str> = t.parent.keys().map(String::as_str).collect();
    assert!(ids.insert(&t.root), "root listed as a child");
    assert_eq!(ids.len(), phrases.len());
}

#[test]
fn build_replaces_the_tree_keeps_a_backup_and_is_repeatable() {
    let d = tempfile::tempdir().unwrap();
    let phrases = write_project(d.path(), true);
    let old = fs::read(d.path().join("tree.json")).unwrap();
    let out = treewright()
        .arg("build")
        .arg(d.path())
        .args(["--seed", "3", "--method", "divisive"])
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    // not a terminal: no progress bar on standard error
    assert!(
        out.stderr.is_empty(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let first = fs::read(d.path().join("tree.json")).unwrap();
    assert_eq!(fs::read(d.path().join("tree.json.bak")).unwrap(), old);
    assert_covers_all(&first, &phrases);
    let report: serde_json::Value =
        serde_json::from_slice(&fs::read(d.path().join("build-report.json")).unwrap()).unwrap();
    assert_eq!(report["format"], "treewright-build-report");
    assert_eq!(report["params"]["seed"], 3);
    assert_eq!(report["phrases"], 12);
    let root = report["root"].as_str().unwrap();
    assert_eq!(report["nodes"][0]["node"], root);
    assert_eq!(report["nodes"][0]["size"], 12);
    let first_report = fs::read(d.path().join("build-report.json")).unwrap();

    // the same command again gives the same bytes
    let again = treewright()
        .arg("build")
        .arg(d.path())
        .args(["--seed", "3", "--method", "divisive"])
        .output()
        .unwrap();
    assert!(again.status.success());
    assert_eq!(fs::read(d.path().join("tree.json")).unwrap(), first);
    assert_eq!(
        fs::read(d.path().join("build-report.json")).unwrap(),
        first_report
    );

    // the project loads with its new tree
    let info = treewright()
        .arg("info")
        .arg(d.path())
        .arg("--json")
        .output()
        .unwrap();
    assert!(info.status.success());
    let v: serde_json::Value = serde_json::from_slice(&info.stdout).unwrap();
    assert_eq!(v["tree"]["nodes"], 12);
    assert_eq!(v["unplaced"], serde_json::json!([]));
}

#[test]
fn out_report_and_options() {
    let d = tempfile::tempdir().unwrap();
    let phrases = write_project(d.path(), false);
    let out_dir = tempfile::tempdir().unwrap();
    let tree = out_dir.path().join("t.json");
    let report = out_dir.path().join("r.json");
    let out = treewright()
        .arg("build")
        .arg(d.path())
        .arg("--out")
        .arg(&tree)
        .arg("--report")
        .arg(&report)
        .args([
            "--similarity",
            "kl",
            "--with-variance",
            "0.5",
            "--max-depth",
            "2",
        ])
        .args(["--k-max", "4", "--min-cluster", "2"])
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    assert_covers_all(&fs::read(&tree).unwrap(), &phrases);
    let r: serde_json::Value = serde_json::from_slice(&fs::read(&report).unwrap()).unwrap();
    assert_eq!(r["params"]["similarity"], "kl");
    assert_eq!(r["params"]["with_variance"], 0.5);
    assert_eq!(r["params"]["k_max"], 4);
    assert!(r["depth"].as_u64().unwrap() <= 2);
    // --out elsewhere leaves the project folder alone
    assert!(!d.path().join("tree.json").exists());
    assert!(!d.path().join("build-report.json").exists());

    // a CSV target gets a child,parent edge list that the loader reads back
    let csv = out_dir.path().join("t.csv");
    let out = treewright()
        .arg("build")
        .arg(d.path())
        .arg("--out")
        .arg(&csv)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let text = fs::read_to_string(&csv).unwrap();
    assert!(text.starts_with("child,parent\n"), "{text}");
    let t = treewright::model::project::parse_tree_csv(text.as_bytes(), "t.csv").unwrap();
    let json = serde_json::to_vec(&t).unwrap();
    assert_covers_all(&json, &phrases);
}

#[test]
fn a_project_without_a_tree_gets_one() {
    let d = tempfile::tempdir().unwrap();
    let phrases = write_project(d.path(), false);
    let out = treewright().arg("build").arg(d.path()).output().unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    assert_covers_all(&fs::read(d.path().join("tree.json")).unwrap(), &phrases);
    let m: serde_json::Value =
        serde_json::from_slice(&fs::read(d.path().join("project.json")).unwrap()).unwrap();
    assert_eq!(m["tree"], "tree.json");
}

#[test]
fn bad_options_exit_2_and_write_nothing() {
    let d = tempfile::tempdir().unwrap();
    write_project(d.path(), true);
    let before = fs::read(d.path().join("tree.json")).unwrap();
    for args in [
        vec!["--similarity", "cosine"],
        vec!["--k-max", "1"],
        vec!["--min-cluster", "0"],
        vec!["--max-depth", "0"],
        vec!["--with-variance", "-1"],
    ] {
        let out = treewright()
            .arg("build")
            .arg(d.path())
            .args(&args)
            .output()
            .unwrap();
        assert_eq!(out.status.code(), Some(2), "{args:?}");
        assert!(!out.stderr.is_empty());
    }
    assert_eq!(fs::read(d.path().join("tree.json")).unwrap(), before);
    assert!(!d.path().join("tree.json.bak").exists());
    assert!(!d.path().join("build-report.json").exists());
    let missing = treewright()
        .arg("build")
        .arg(d.path().join("nope"))
        .output()
        .unwrap();
    assert_eq!(missing.status.code(), Some(2));
}

#[test]
fn the_demo_project_builds_the_same_twice() {
    let demo = Path::new(env!("CARGO_MANIFEST_DIR")).join("sample-projects/fernhollow");
    let project = treewright::model::Project::load(&demo).unwrap();
    let out_dir = tempfile::tempdir().unwrap();
    let mut outputs = Vec::new();
    for name in ["a", "b"] {
        let tree = out_dir.path().join(format!("{name}.json"));
        let report = out_dir.path().join(format!("{name}-report.json"));
        let out = treewright()
            .arg("build")
            .arg(&demo)
            .arg("--out")
            .arg(&tree)
            .arg("--report")
            .arg(&report)
            .output()
            .unwrap();
        assert!(
            out.status.success(),
            "{}",
            String::from_utf8_lossy(&out.stderr)
        );
        outputs.push((fs::read(&tree).unwrap(), fs::read(&report).unwrap()));
    }
    assert_covers_all(&outputs[0].0, &project.phrases);
    assert_eq!(outputs[0], outputs[1]);
}

/// Since issue 14 the default method is inclusion; an option of the divisive method alone
/// still selects the divisive method (so older command lines keep working).
#[test]
fn the_default_method_is_inclusion_unless_a_divisive_option_is_given() {
    let d = tempfile::tempdir().unwrap();
    let phrases = write_project(d.path(), true);
    let report = |args: &[&str]| -> serde_json::Value {
        let out = treewright()
            .arg("build")
            .arg(d.path())
            .args(args)
            .output()
            .unwrap();
        assert!(
            out.status.success(),
            "{}",
            String::from_utf8_lossy(&out.stderr)
        );
        assert_covers_all(&fs::read(d.path().join("tree.json")).unwrap(), &phrases);
        serde_json::from_slice(&fs::read(d.path().join("build-report.json")).unwrap()).unwrap()
    };
    assert_eq!(report(&[])["method"], "inclusion");
    assert_eq!(report(&["--similarity", "kl"])["method"], "divisive");
    assert_eq!(report(&["--method", "divisive"])["method"], "divisive");
    // an explicit method still refuses the other method's options
    let out = treewright()
        .arg("build")
        .arg(d.path())
        .args(["--method", "inclusion", "--k-max", "4"])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
}

/// Building into the project (which installs the tree through the workspace, dropping the
/// build's tree and report as soon as they are written) writes the same bytes and prints
/// the same summary as building to chosen files, for both methods, also when an earlier
/// build's report is in the folder (common practice, no source: the two paths are one
/// build with two ways of writing it).
#[test]
fn building_into_the_project_writes_what_building_to_files_writes() {
    for method in ["inclusion", "divisive"] {
        let d = tempfile::tempdir().unwrap();
        write_project(d.path(), true);
        let outside = tempfile::tempdir().unwrap();
        let (t, r) = (outside.path().join("t.json"), outside.path().join("r.json"));
        let to_files = treewright()
            .args(["build", "--seed", "3", "--method", method])
            .arg(d.path())
            .arg("--out")
            .arg(&t)
            .arg("--report")
            .arg(&r)
            .output()
            .unwrap();
        assert!(to_files.status.success(), "{method}");
        for round in 0..2 {
            // the second round finds the first round's report in the folder
            let into = treewright()
                .args(["build", "--seed", "3", "--method", method])
                .arg(d.path())
                .output()
                .unwrap();
            assert!(into.status.success(), "{method} round {round}");
            assert_eq!(
                fs::read(d.path().join("tree.json")).unwrap(),
                fs::read(&t).unwrap(),
                "{method} round {round}: tree"
            );
            assert_eq!(
                fs::read(d.path().join("build-report.json")).unwrap(),
                fs::read(&r).unwrap(),
                "{method} round {round}: report"
            );
            let first = |o: &std::process::Output| {
                String::from_utf8_lossy(&o.stdout)
                    .lines()
                    .next()
                    .unwrap_or_default()
                    .to_string()
            };
            assert_eq!(first(&into), first(&to_files), "{method} round {round}");
            assert!(first(&into).starts_with("built a tree of 12 phrases"));
        }
    }
}
