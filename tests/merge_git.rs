//! A real `git merge` of two branches of a project with `treewright merge-edits` configured
//! as the merge driver of `overrides.json` (git's documented merge-driver convention:
//! `%O %A %B`, result in `%A`, non-zero exit on conflicts; see gitattributes(5)).
//! Non-conflicting edits merge cleanly; conflicting ones stop the merge with the report, the
//! loader refuses the conflicted file, and `treewright resolve` finishes it.

use std::path::Path;
use std::process::{Command, Output};

const BIN: &str = env!("CARGO_BIN_EXE_treewright");

fn tw(dir: &Path, args: &[&str]) -> Output {
    Command::new(BIN)
        .current_dir(dir)
        .args(args)
        .output()
        .unwrap()
}

fn git(dir: &Path, args: &[&str]) -> Output {
    Command::new("git")
        .current_dir(dir)
        .args([
            "-c",
            "user.name=Curator",
            "-c",
            "user.email=curator@fernhollow.test",
        ])
        .args([
            "-c",
            "init.defaultBranch=main",
            "-c",
            "commit.gpgsign=false",
        ])
        .args(args)
        .output()
        .unwrap()
}

fn ok(o: &Output) -> String {
    let s = format!(
        "{}{}",
        String::from_utf8_lossy(&o.stdout),
        String::from_utf8_lossy(&o.stderr)
    );
    assert!(o.status.success(), "{s}");
    s
}

fn parent_of(dir: &Path, node: &str) -> String {
    let o = ok(&tw(dir, &["apply", ".", "--out", "eff.json"]));
    let _ = o;
    let v: serde_json::Value =
        serde_json::from_slice(&std::fs::read(dir.join("eff.json")).unwrap()).unwrap();
    std::fs::remove_file(dir.join("eff.json")).unwrap();
    v["parent"][node].as_str().unwrap_or_default().to_string()
}

#[test]
fn git_merge_with_the_driver() {
    let tmp = tempfile::tempdir().unwrap();
    let d = tmp.path();
    ok(&tw(d, &["sample", "--out", "."]));
    ok(&git(d, &["init", "-q"]));
    std::fs::write(
        d.join(".gitattributes"),
        "overrides.json merge=treewright-edits\n",
    )
    .unwrap();
    std::fs::write(d.join(".gitignore"), "*.bak\n.treewright.lock\n").unwrap();
    ok(&git(
        d,
        &[
            "config",
            "merge.treewright-edits.name",
            "treewright override layers",
        ],
    ));
    ok(&git(
        d,
        &[
            "config",
            "merge.treewright-edits.driver",
            &format!("{BIN} merge-edits %O %A %B --path %P"),
        ],
    ));
    ok(&tw(
        d,
        &["edit", ".", "review", "aloe", "approved", "--author", "ana"],
    ));
    ok(&git(d, &["add", "-A"]));
    ok(&git(d, &["commit", "-qm", "base"]));

    // two curators on separate branches of the tree
    ok(&git(d, &["checkout", "-qb", "ana"]));
    ok(&tw(
        d,
        &[
            "edit",
            ".",
            "reparent",
            "bird-netting",
            "wildlife-gardening",
            "--author",
            "ana",
        ],
    ));
    ok(&git(d, &["commit", "-qam", "ana moves bird netting"]));
    ok(&git(d, &["checkout", "-q", "main"]));
    ok(&git(d, &["checkout", "-qb", "ben"]));
    ok(&tw(
        d,
        &[
            "edit",
            ".",
            "rename",
            "bulb-planter",
            "Bulb planting tool",
            "--author",
            "ben",
        ],
    ));
    ok(&git(d, &["commit", "-qam", "ben renames the bulb planter"]));
    ok(&git(d, &["merge", "-q", "--no-edit", "ana"]));
    let edits: serde_json::Value =
        serde_json::from_slice(&std::fs::read(d.join("overrides.json")).unwrap()).unwrap();
    let ops: Vec<&str> = edits["edits"]
        .as_array()
        .unwrap()
        .iter()
        .map(|e| e["op"].as_str().unwrap())
        .collect();
    assert_eq!(
        ops,
        ["review", "rename", "reparent"],
        "ours (ben) first, then theirs"
    );
    assert!(edits.get("conflicts").is_none());
    assert_eq!(parent_of(d, "bird-netting"), "wildlife-gardening");

    // the same node placed under different parents: the merge stops with the report
    ok(&git(d, &["checkout", "-qb", "cara"]));
    ok(&tw(
        d,
        &[
            "edit",
            ".",
            "reparent",
            "aloe",
            "houseplants",
            "--author",
            "cara",
        ],
    ));
    ok(&git(d, &["commit", "-qam", "cara moves aloe"]));
    ok(&git(d, &["checkout", "-q", "ben"]));
    ok(&tw(
        d,
        &["edit", ".", "reparent", "aloe", "shrubs", "--author", "ben"],
    ));
    ok(&git(d, &["commit", "-qam", "ben moves aloe"]));
    let m = git(d, &["merge", "--no-edit", "cara"]);
    let report = format!(
        "{}{}",
        String::from_utf8_lossy(&m.stdout),
        String::from_utf8_lossy(&m.stderr)
    );
    assert!(!m.status.success(), "{report}");
    assert!(
        report.contains("conflict c1 (placement) on aloe"),
        "{report}"
    );
    assert!(report.contains("by cara"), "{report}");
    // the conflicted file is readable JSON and the loader refuses it with a clear message
    let info = tw(d, &["apply", ".", "--out", "eff.json"]);
    assert_eq!(info.status.code(), Some(2));
    let err = String::from_utf8_lossy(&info.stderr);
    assert!(
        err.contains("unresolved merge conflict") && err.contains("c1"),
        "{err}"
    );
    let r = ok(&tw(d, &["resolve", ".", "c1", "theirs"]));
    assert!(r.contains("0 conflict(s) left"), "{r}");
    assert_eq!(parent_of(d, "aloe"), "houseplants");
    ok(&git(d, &["add", "overrides.json"]));
    ok(&git(d, &["commit", "-qm", "merge cara"]));
    assert!(ok(&git(d, &["status", "--porcelain"])).trim().is_empty());
}
