//! End-to-end: the override-layer commands on a small Fernhollow project in a temp dir.

use std::collections::BTreeMap;
use std::path::Path;
use std::process::{Command, Output};

use treewright::model::PhraseTable;
use treewright::model::phrase::PhraseRecord;
use treewright::model::project::ProjectWriter;
use treewright::model::tree::TreeFile;

const LABELS: [&str; 9] = [
    "garden supplies",
    "drought tolerant",
    "succulent",
    "cactus",
    "shade loving",
    "fern",
    "hosta",
    "peat free compost",
    "slug resistant",
];

fn write_project(dir: &Path) {
    let recs: Vec<PhraseRecord> = LABELS
        .iter()
        .map(|l| PhraseRecord {
            id: None,
            label: l.to_string(),
        })
        .collect();
    let phrases = PhraseTable::from_records(&recs).unwrap();
    let dim = 2;
    let means: Vec<f32> = (0..LABELS.len() * dim).map(|i| i as f32 * 0.1).collect();
    let variances = vec![0.5f32; LABELS.len() * dim];
    let parent: BTreeMap<String, String> = [
        ("drought-tolerant", "garden-supplies"),
        ("succulent", "drought-tolerant"),
        ("cactus", "succulent"),
        ("shade-loving", "garden-supplies"),
        ("fern", "shade-loving"),
        ("hosta", "shade-loving"),
        ("peat-free-compost", "garden-supplies"),
        ("slug-resistant", "hosta"),
    ]
    .iter()
    .map(|(a, b)| (a.to_string(), b.to_string()))
    .collect();
    let tree = TreeFile {
        root: "garden-supplies".into(),
        parent,
    };
    ProjectWriter {
        name: "Fernhollow mini",
        phrases: &phrases,
        dim,
        means: &means,
        variances: &variances,
        users: &[],
        tree: Some(&tree),
    }
    .write(dir)
    .unwrap();
}

fn tw(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_treewright"))
        .args(args)
        .output()
        .unwrap()
}

fn code(o: &Output) -> i32 {
    o.status.code().unwrap_or(-1)
}

fn text(o: &Output) -> String {
    format!(
        "{}{}",
        String::from_utf8_lossy(&o.stdout),
        String::from_utf8_lossy(&o.stderr)
    )
}

#[test]
fn edit_apply_signoff_verify_export() {
    let tmp = tempfile::tempdir().unwrap();
    let dir = tmp.path().join("proj");
    write_project(&dir);
    let p = dir.to_str().unwrap();
    let ov = dir.join("overrides.json");

    // edits by id and by label
    for args in [
        vec![
            "edit",
            p,
            "reparent",
            "hosta",
            "drought-tolerant",
            "--author",
            "ines",
            "--note",
            "sun tolerant too",
        ],
        vec!["edit", p, "pin", "Hosta", "--author", "ines"],
        vec![
            "edit",
            p,
            "merge",
            "cactus",
            "--into",
            "succulent",
            "--author",
            "ines",
        ],
        vec![
            "edit",
            p,
            "rename",
            "peat-free-compost",
            "peat-free compost",
            "--author",
            "ines",
        ],
        vec!["edit", p, "exclude", "shade loving", "--author", "ines"],
        vec![
            "edit",
            p,
            "review",
            "fern",
            "approved",
            "--comment",
            "fine",
            "--author",
            "rowan",
        ],
    ] {
        let o = tw(&args);
        assert_eq!(code(&o), 0, "{args:?}: {}", text(&o));
    }
    // refused edits exit 2, say why, and write nothing
    let before = std::fs::read(&ov).unwrap();
    for (args, why) in [
        (
            vec!["edit", p, "exclude", "garden-supplies", "--author", "ines"],
            "root",
        ),
        (
            vec![
                "edit",
                p,
                "reparent",
                "drought-tolerant",
                "succulent",
                "--author",
                "ines",
            ],
            "cycle",
        ),
        (
            vec![
                "edit",
                p,
                "merge",
                "fern",
                "--into",
                "shade-loving",
                "--author",
                "ines",
            ],
            "excluded",
        ),
        (
            vec!["edit", p, "reparent", "hosta", "fern", "--author", "ines"],
            "pinned",
        ),
        (
            vec!["edit", p, "rename", "no-such-tag", "x", "--author", "ines"],
            "no phrase",
        ),
        (
            vec!["edit", p, "review", "fern", "great", "--author", "ines"],
            "approved, to-fix",
        ),
    ] {
        let o = tw(&args);
        assert_eq!(code(&o), 2, "{args:?}: {}", text(&o));
        assert!(text(&o).contains(why), "{args:?}: {}", text(&o));
        assert_eq!(
            std::fs::read(&ov).unwrap(),
            before,
            "{args:?} wrote the file"
        );
    }

    let out = tmp.path().join("effective.json");
    let o = tw(&["apply", p, "--out", out.to_str().unwrap()]);
    assert_eq!(code(&o), 0, "{}", text(&o));
    let v: serde_json::Value = serde_json::from_slice(&std::fs::read(&out).unwrap()).unwrap();
    assert_eq!(v["parent"]["hosta"], "drought-tolerant");
    assert_eq!(v["parent"]["fern"], "garden-supplies");
    assert_eq!(v["aliases"]["succulent"][0], "cactus");
    assert_eq!(v["excluded"][0], "shade-loving");

    let o = tw(&["diff", p]);
    assert_eq!(code(&o), 0);
    assert!(
        text(&o).contains("moved     hosta: shade-loving → drought-tolerant"),
        "{}",
        text(&o)
    );

    let skos = tmp.path().join("tags.ttl");
    let export = |req: bool| {
        let mut a = vec![
            "export",
            p,
            "--format",
            "skos",
            "--out",
            skos.to_str().unwrap(),
        ];
        if req {
            a.push("--require-signoff");
        }
        tw(&a)
    };
    assert_eq!(code(&export(true)), 1, "no sign-off yet");
    assert_eq!(code(&tw(&["verify", p])), 1);

    let o = tw(&[
        "signoff",
        p,
        "--reviewer",
        "rowan",
        "--note",
        "spring range",
    ]);
    assert_eq!(code(&o), 0, "{}", text(&o));
    assert!(text(&o).contains("open findings"));
    let o = tw(&["verify", p]);
    assert_eq!(code(&o), 0, "{}", text(&o));
    let o = export(true);
    assert_eq!(code(&o), 0, "{}", text(&o));
    let ttl = std::fs::read_to_string(&skos).unwrap();
    assert!(ttl.contains("skos:ConceptScheme") && ttl.contains("\"cactus\"@en"));

    // one more edit: verify fails and lists it, export refuses until signed again
    let o = tw(&[
        "edit",
        p,
        "reparent",
        "slug-resistant",
        "fern",
        "--author",
        "ines",
    ]);
    assert_eq!(code(&o), 0, "{}", text(&o));
    let o = tw(&["verify", p]);
    assert_eq!(code(&o), 1, "{}", text(&o));
    assert!(
        text(&o).contains("reparent slug-resistant under fern"),
        "{}",
        text(&o)
    );
    assert!(
        text(&o).contains("moved     slug-resistant: hosta → fern"),
        "{}",
        text(&o)
    );
    std::fs::remove_file(&skos).unwrap();
    let o = export(true);
    assert_eq!(code(&o), 1, "{}", text(&o));
    assert!(!skos.exists(), "a refused export writes nothing");
    assert_eq!(code(&tw(&["signoff", p, "--reviewer", "rowan"])), 0);
    assert_eq!(code(&export(true)), 0);
    for fmt in ["csv", "json"] {
        let f = tmp.path().join(format!("tags.{fmt}"));
        let o = tw(&["export", p, "--format", fmt, "--out", f.to_str().unwrap()]);
        assert_eq!(code(&o), 0, "{}", text(&o));
    }
    let csv = std::fs::read_to_string(tmp.path().join("tags.csv")).unwrap();
    assert!(csv.starts_with("id,label,parent,depth,aliases,status\n"));
    assert!(
        csv.contains("fern,fern,garden-supplies,1,,approved\n"),
        "{csv}"
    );

    // undo of the last edit, the second sign-off, needs a reason (issue 23); with one it
    // appends a revert: verify fails again
    let o = tw(&["undo", p]);
    assert_eq!(code(&o), 2, "{}", text(&o));
    assert!(
        text(&o).contains("reverting it needs a reason"),
        "{}",
        text(&o)
    );
    let o = tw(&["undo", p, "--reason", "signed too early"]);
    assert_eq!(code(&o), 0, "{}", text(&o));
    assert!(text(&o).contains("signoff by rowan"));
    assert_eq!(code(&tw(&["verify", p])), 1);
    assert!(dir.join("overrides.json.bak").exists());

    // a re-trained tree: the pin holds, the rename of a vanished phrase goes stale
    let new_tree = tmp.path().join("retrained.json");
    std::fs::write(
        &new_tree,
        r#"{"root": "garden-supplies", "parent": {"drought-tolerant": "garden-supplies",
            "succulent": "drought-tolerant", "shade-loving": "garden-supplies",
            "fern": "shade-loving", "hosta": "shade-loving", "slug-resistant": "hosta",
            "mulch": "garden-supplies"}}"#,
    )
    .unwrap();
    let o = tw(&["diff", p, "--against", new_tree.to_str().unwrap()]);
    assert_eq!(code(&o), 0, "{}", text(&o));
    let t = text(&o);
    assert!(t.contains("new phrases (1):\n  mulch"), "{t}");
    assert!(
        t.contains("vanished phrases (2):\n  cactus\n  peat-free-compost"),
        "{t}"
    );
    assert!(
        t.contains("hosta stays under drought-tolerant (new tree: shade-loving)"),
        "{t}"
    );
    assert!(t.contains("stale edits (2)"), "{t}");
    // the same re-trained tree as a CSV edge list gives the same report
    let csv_tree = tmp.path().join("retrained.csv");
    std::fs::write(
        &csv_tree,
        "child,parent\ngarden-supplies,\ndrought-tolerant,garden-supplies\n\
         succulent,drought-tolerant\nshade-loving,garden-supplies\nfern,shade-loving\n\
         hosta,shade-loving\nslug-resistant,hosta\nmulch,garden-supplies\n",
    )
    .unwrap();
    let o = tw(&["diff", p, "--against", csv_tree.to_str().unwrap()]);
    assert_eq!(code(&o), 0, "{}", text(&o));
    assert_eq!(text(&o), t);
}

#[test]
fn corrupt_or_changed_override_file_is_an_error() {
    let tmp = tempfile::tempdir().unwrap();
    let dir = tmp.path().join("proj");
    write_project(&dir);
    let p = dir.to_str().unwrap();
    std::fs::write(
        dir.join("overrides.json"),
        "{\"format\": \"treewright-overrides\", \"version\": 3, \"edits\": []}",
    )
    .unwrap();
    let o = tw(&["verify", p]);
    assert_eq!(code(&o), 2, "{}", text(&o));
    assert!(text(&o).contains("version"), "{}", text(&o));
    std::fs::write(dir.join("overrides.json"), "not json").unwrap();
    let o = tw(&["edit", p, "exclude", "fern", "--author", "ines"]);
    assert_eq!(code(&o), 2, "{}", text(&o));
    assert!(text(&o).contains("overrides.json:1:"), "{}", text(&o));
    assert_eq!(
        std::fs::read_to_string(dir.join("overrides.json")).unwrap(),
        "not json"
    );
}

#[test]
fn scripted_sequence_on_the_demo_project() {
    let tmp = tempfile::tempdir().unwrap();
    let src = Path::new(env!("CARGO_MANIFEST_DIR")).join("sample-projects/fernhollow");
    let dir = tmp.path().join("fernhollow");
    std::fs::create_dir_all(&dir).unwrap();
    for e in std::fs::read_dir(&src).unwrap() {
        let e = e.unwrap();
        if e.file_name() != "overrides.json" {
            std::fs::copy(e.path(), dir.join(e.file_name())).unwrap();
        }
    }
    let p = dir.to_str().unwrap();
    for args in [
        vec![
            "edit",
            p,
            "reparent",
            "bee friendly",
            "houseplants",
            "--author",
            "ines",
        ],
        vec!["edit", p, "pin", "aloe", "--author", "ines"],
        vec![
            "edit",
            p,
            "merge",
            "bark mulch",
            "--into",
            "mulches",
            "--author",
            "ines",
        ],
        vec![
            "edit",
            p,
            "rename",
            "autumn",
            "autumn range",
            "--author",
            "ines",
        ],
        vec!["edit", p, "exclude", "autumn-planters", "--author", "ines"],
        vec![
            "edit",
            p,
            "reparent",
            "grow-lights",
            "houseplants",
            "--author",
            "ines",
        ],
        vec!["edit", p, "review", "aloe", "approved", "--author", "rowan"],
    ] {
        let o = tw(&args);
        assert_eq!(code(&o), 0, "{args:?}: {}", text(&o));
    }
    let out = tmp.path().join("eff.json");
    assert_eq!(code(&tw(&["apply", p, "--out", out.to_str().unwrap()])), 0);
    let audit = tw(&["audit", p, "--format", "json"]);
    let summary: serde_json::Value = serde_json::from_slice(&audit.stdout).unwrap();
    let open = summary["summary"]["open_errors"].as_u64().unwrap()
        + summary["summary"]["open_warnings"].as_u64().unwrap();
    assert!(open > 0, "the demo's planted flaws are open findings");
    let o = tw(&["signoff", p, "--reviewer", "rowan"]);
    assert_eq!(code(&o), 0, "{}", text(&o));
    // the sign-off records the audit's open warnings and errors
    assert!(
        text(&o).contains(&format!(", {open} open findings,")),
        "{}",
        text(&o)
    );
    assert_eq!(code(&tw(&["verify", p])), 0);
    let o = tw(&["edit", p, "rename", "aloe", "aloe vera", "--author", "ines"]);
    assert_eq!(code(&o), 0, "{}", text(&o));
    let o = tw(&["verify", p]);
    assert_eq!(code(&o), 1);
    assert!(
        text(&o).contains("renamed   aloe: \"aloe\" → \"aloe vera\""),
        "{}",
        text(&o)
    );
    let ttl = tmp.path().join("demo.ttl");
    let export = || {
        tw(&[
            "export",
            p,
            "--format",
            "skos",
            "--out",
            ttl.to_str().unwrap(),
            "--require-signoff",
        ])
    };
    assert_eq!(code(&export()), 1);
    assert!(!ttl.exists());
    assert_eq!(code(&tw(&["signoff", p, "--reviewer", "rowan"])), 0);
    assert_eq!(code(&export()), 0);
    let text = std::fs::read_to_string(&ttl).unwrap();
    assert!(text.contains("\"aloe vera\"@en") && text.contains("skos:altLabel \"bark mulch\"@en"));
    assert!(!text.contains("/autumn-planters>"));
}

#[test]
fn json_outputs_and_empty_undo() {
    let tmp = tempfile::tempdir().unwrap();
    let dir = tmp.path().join("proj");
    write_project(&dir);
    let p = dir.to_str().unwrap();
    let o = tw(&["undo", p]);
    assert_eq!(code(&o), 2);
    assert!(text(&o).contains("no edit to undo"), "{}", text(&o));
    assert!(!dir.join("overrides.json").exists());
    let o = tw(&["verify", p, "--json"]);
    assert_eq!(code(&o), 1);
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(v["state"], "no-signoff");
    assert_eq!(
        code(&tw(&[
            "edit",
            p,
            "merge",
            "fern",
            "hosta",
            "--into",
            "shade loving",
            "--author",
            "ines"
        ])),
        0
    );
    let o = tw(&["diff", p, "--json"]);
    assert_eq!(code(&o), 0);
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    let kinds: Vec<&str> = v
        .as_array()
        .unwrap()
        .iter()
        .map(|c| c["kind"].as_str().unwrap())
        .collect();
    // fern and hosta merged; slug-resistant (child of hosta) moved to shade-loving
    assert_eq!(kinds, vec!["merged", "merged", "moved"], "{v}");
    assert_eq!(code(&tw(&["signoff", p, "--reviewer", "rowan"])), 0);
    let o = tw(&["verify", p, "--json"]);
    assert_eq!(code(&o), 0);
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(v["state"], "valid");
    assert_eq!(v["hash"].as_str().unwrap().len(), 64);
}
