//! Issue 23, append-only history and hash chain, end to end through the command line: undo
//! appends a revert (the file only grows, every earlier record stays byte for byte), a
//! sign-off is reverted only with a reason and the revert shows in `verify` and the audit
//! report, and a history changed by hand (an edit deleted, reordered, changed or added) is
//! refused on load with the edit named.
//!
//! Each safety check is also run against a deliberately broken twin to show that it can
//! fail: the old undo (drop the last record), and a chain that hashes records one by one
//! without linking them.

use std::path::{Path, PathBuf};
use std::process::{Command, Output};

use serde_json::Value;
use treewright::model::edit::Edit;
use treewright::model::history::{self, StoredRecord};
use treewright::model::overrides::{OverrideLayer, parse_overrides, serialize_overrides};
use treewright::model::signoff::sha256_hex;

fn tw(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_treewright"))
        .args(args)
        .env("USER", "tester")
        .output()
        .unwrap()
}

fn ok(args: &[&str]) -> String {
    let o = tw(args);
    assert_eq!(
        o.status.code(),
        Some(0),
        "{args:?}: {}",
        String::from_utf8_lossy(&o.stderr)
    );
    String::from_utf8_lossy(&o.stdout).into_owned()
}

fn demo(t: &tempfile::TempDir) -> (PathBuf, String) {
    let dir = t.path().join("demo");
    treewright::model::sample::write_demo(&dir).unwrap();
    let p = dir.display().to_string();
    (dir, p)
}

fn overrides(dir: &Path) -> Value {
    serde_json::from_slice(&std::fs::read(dir.join("overrides.json")).unwrap()).unwrap()
}

fn records(dir: &Path) -> Vec<Value> {
    overrides(dir)["edits"].as_array().unwrap().clone()
}

fn effective(p: &str, out: &Path) -> Vec<u8> {
    ok(&["apply", p, "--out", out.to_str().unwrap()]);
    std::fs::read(out).unwrap()
}

/// The append-only property: every record of `before` is still there, unchanged, at the
/// same place in `after`, and `after` is longer.
fn only_grew(before: &[Value], after: &[Value]) -> Result<(), String> {
    if after.len() <= before.len() {
        return Err(format!("{} records became {}", before.len(), after.len()));
    }
    match before.iter().zip(after).position(|(a, b)| a != b) {
        Some(i) => Err(format!("record #{i} changed")),
        None => Ok(()),
    }
}

#[test]
fn undo_appends_a_revert_and_redo_a_revert_of_it() {
    let t = tempfile::tempdir().unwrap();
    let (dir, p) = demo(&t);
    let base = effective(&p, &t.path().join("base.json"));
    ok(&["edit", &p, "exclude", "hosta", "--author", "ines"]);
    let excluded = effective(&p, &t.path().join("ex.json"));
    assert_ne!(base, excluded);
    let before = records(&dir);
    let out = ok(&["undo", &p]);
    assert!(
        out.starts_with("reverted edit #0: exclude hosta (by ines, "),
        "{out}"
    );
    assert!(out.trim_end().ends_with("appended revert #1"), "{out}");
    let after = records(&dir);
    only_grew(&before, &after).unwrap();
    assert_eq!(after[1]["op"], "revert");
    assert_eq!(after[1]["edit"], 0);
    assert_eq!(after[1]["author"], "tester");
    assert_eq!(overrides(&dir)["version"], 2);
    // the effective tree is the base tree again
    assert_eq!(effective(&p, &t.path().join("u.json")), base);
    // redo appends a revert of the revert: the exclusion is back
    let out = ok(&["redo", &p]);
    assert!(out.contains("appended revert #2"), "{out}");
    let again = records(&dir);
    only_grew(&after, &again).unwrap();
    assert_eq!(again[2]["edit"], 1);
    assert_eq!(effective(&p, &t.path().join("r.json")), excluded);
    // nothing left to redo (exit 2, file unchanged)
    let o = tw(&["redo", &p]);
    assert_eq!(o.status.code(), Some(2));
    assert_eq!(records(&dir), again);

    // broken twin: the old undo dropped the last record; the check above catches it
    let mut dropped = before.clone();
    dropped.pop();
    assert!(only_grew(&before, &dropped).is_err());
}

#[test]
fn a_sign_off_is_reverted_only_with_a_reason_and_the_revert_is_shown() {
    let t = tempfile::tempdir().unwrap();
    let (dir, p) = demo(&t);
    ok(&["signoff", &p, "--reviewer", "rowan"]);
    assert_eq!(tw(&["verify", &p]).status.code(), Some(0));
    let bytes = std::fs::read(dir.join("overrides.json")).unwrap();
    let o = tw(&["undo", &p]);
    assert_eq!(o.status.code(), Some(2));
    let e = String::from_utf8_lossy(&o.stderr);
    assert!(
        e.contains("edit #0 is a sign-off by rowan; reverting it needs a reason (--reason TEXT)"),
        "{e}"
    );
    assert_eq!(std::fs::read(dir.join("overrides.json")).unwrap(), bytes);

    ok(&[
        "undo",
        &p,
        "--reason",
        "signed the autumn range by mistake",
        "--author",
        "ines",
    ]);
    let o = tw(&["verify", &p]);
    assert_eq!(o.status.code(), Some(1), "no sign-off is in force any more");
    let text = String::from_utf8_lossy(&o.stdout);
    assert!(
        text.contains("sign-off by rowan (edit #0, ")
            && text.contains("was reverted by ines at ")
            && text.contains("(edit #1): signed the autumn range by mistake"),
        "{text}"
    );
    let o = tw(&["verify", &p, "--json"]);
    let v: Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(v["state"], "no-signoff");
    assert_eq!(v["reverted_signoffs"].as_array().unwrap().len(), 1);
    let md = t.path().join("audit.md");
    tw(&["audit", &p, "--format", "md", "--out", md.to_str().unwrap()]);
    let report = std::fs::read_to_string(&md).unwrap();
    assert!(
        report.contains("- Reverted sign-off: sign-off by rowan (edit #0"),
        "{report}"
    );
    // history shows both, the sign-off marked as reverted
    let h = ok(&["history", &p]);
    assert!(
        h.contains("signoff by rowan [reverted by #1] [unsigned]"),
        "{h}"
    );
    assert!(
        h.contains("revert #0 (signoff by rowan): signed the autumn range by mistake"),
        "{h}"
    );
}

/// Write edit records as a version-2 file with their links computed by `link` (the real
/// chain, or a broken twin).
fn write_records(dir: &Path, recs: &[Value]) {
    let v = serde_json::json!({
        "format": "treewright-overrides",
        "version": 2,
        "edits": recs,
    });
    std::fs::write(
        dir.join("overrides.json"),
        serde_json::to_vec_pretty(&v).unwrap(),
    )
    .unwrap();
}

fn load_err(p: &str) -> String {
    let o = tw(&["history", p]);
    assert_eq!(
        o.status.code(),
        Some(2),
        "{}",
        String::from_utf8_lossy(&o.stdout)
    );
    String::from_utf8_lossy(&o.stderr).into_owned()
}

#[test]
fn a_changed_history_is_refused_naming_the_edit() {
    let t = tempfile::tempdir().unwrap();
    let (dir, p) = demo(&t);
    for (op, node) in [
        ("exclude", "hosta"),
        ("exclude", "lavender"),
        ("exclude", "ivy"),
    ] {
        ok(&["edit", &p, op, node, "--author", "ines"]);
    }
    ok(&["signoff", &p, "--reviewer", "rowan"]);
    let good = records(&dir);
    assert_eq!(good.len(), 4);
    ok(&["history", &p]);

    // deleted
    let mut r = good.clone();
    r.remove(1);
    write_records(&dir, &r);
    assert!(
        load_err(&p).contains("edit #1 does not follow #0: history was changed"),
        "{}",
        load_err(&p)
    );
    // the first deleted
    write_records(&dir, &good[1..]);
    assert!(load_err(&p).contains("edit #0 does not follow the file header: history was changed"));
    // reordered
    let mut r = good.clone();
    r.swap(1, 2);
    write_records(&dir, &r);
    assert!(load_err(&p).contains("edit #1 does not follow #0: history was changed"));
    // changed (another author), every loader refuses it: verify and export too
    let mut r = good.clone();
    r[1]["author"] = "mallory".into();
    write_records(&dir, &r);
    assert!(load_err(&p).contains("edit #2 does not follow #1: history was changed"));
    for args in [
        vec!["verify", p.as_str()],
        vec![
            "export",
            &p,
            "--format",
            "csv",
            "--out",
            "/dev/null",
            "--require-signoff",
        ],
    ] {
        let o = tw(&args);
        assert_eq!(o.status.code(), Some(2), "{args:?}");
        assert!(String::from_utf8_lossy(&o.stderr).contains("edit #2 does not follow #1"));
    }
    // a hand-added sign-off without a link, and one with a made-up link
    let mut r = good.clone();
    let mut forged = good[3].clone();
    forged.as_object_mut().unwrap().remove("prev");
    r.push(forged.clone());
    write_records(&dir, &r);
    assert!(load_err(&p).contains("edit #4 does not follow #3: history was changed"));
    forged["prev"] = sha256_hex(b"anything").into();
    r[4] = forged;
    write_records(&dir, &r);
    assert!(load_err(&p).contains("edit #4 does not follow #3: history was changed"));
    // a version-1 file cannot carry links (no downgrade with the links kept)
    let v = serde_json::json!({"format": "treewright-overrides", "version": 1, "edits": good});
    std::fs::write(dir.join("overrides.json"), v.to_string()).unwrap();
    assert!(load_err(&p).contains("edit #0: prev: version-1 files have no hash chain"));

    // broken twin: records hashed one by one (no link to the one before) do not see a
    // reordering; the real chain does
    let solo = |recs: &[Value]| -> Vec<String> {
        recs.iter()
            .map(|r| {
                let mut r = r.clone();
                r.as_object_mut().unwrap().remove("prev");
                sha256_hex(r.to_string().as_bytes())
            })
            .collect::<Vec<_>>()
    };
    let mut swapped = good.clone();
    swapped.swap(1, 2);
    let mut a = solo(&good);
    let mut b = solo(&swapped);
    a.sort();
    b.sort();
    assert_eq!(
        a, b,
        "the twin cannot tell the reordered history from the real one"
    );
    let stored: Vec<StoredRecord> = swapped
        .iter()
        .map(|v| serde_json::from_value(v.clone()).unwrap())
        .collect();
    assert!(history::check_chain(&stored).is_err());
}

#[test]
fn a_version_1_file_loads_and_the_next_save_writes_version_2() {
    let t = tempfile::tempdir().unwrap();
    let (dir, p) = demo(&t);
    std::fs::write(
        dir.join("overrides.json"),
        r#"{"format": "treewright-overrides", "version": 1, "edits": [
  {"op": "exclude", "node": "hosta", "author": "ines", "time": "2026-12-02T09:14:03Z"}
]}"#,
    )
    .unwrap();
    assert!(ok(&["history", &p]).contains("exclude hosta"));
    ok(&["edit", &p, "exclude", "ivy", "--author", "ines"]);
    let v = overrides(&dir);
    assert_eq!(v["version"], 2);
    let e = v["edits"].as_array().unwrap();
    assert_eq!(e[0]["prev"], history::header_sha256());
    assert_eq!(
        e[0]["time"], "2026-12-02T09:14:03Z",
        "the old record is kept as it was"
    );
    // the layer reads back the same records, and writing them again gives the same bytes
    let layer = OverrideLayer::load(&dir.join("overrides.json")).unwrap();
    assert_eq!(
        serialize_overrides(&layer.edits),
        std::fs::read(dir.join("overrides.json")).unwrap()
    );
    // history --json: the links as stored, and the head a next edit would carry
    let j: Value = serde_json::from_str(&ok(&["history", &p, "--json"])).unwrap();
    assert_eq!(j["edits"][1]["prev"], e[1]["prev"]);
    assert_eq!(j["head"], history::head(&layer.edits));
    assert_eq!(j["edits"][0]["author"], "ines");
}

#[test]
fn merged_edits_get_a_valid_chain_and_reverts_find_their_edit() {
    use treewright::model::merge::merge;
    use treewright::model::{Workspace, edit::EditRecord};
    let t = tempfile::tempdir().unwrap();
    let (dir, p) = demo(&t);
    ok(&["edit", &p, "exclude", "hosta", "--author", "ines"]);
    let base = OverrideLayer::load(&dir.join("overrides.json"))
        .unwrap()
        .edits;
    let rec = |e: Edit, who: &str| EditRecord {
        edit: e,
        author: who.into(),
        time: "2026-12-04T12:00:00Z".into(),
        note: None,
    };
    let mut ours = base.clone();
    ours.push(rec(Edit::Exclude { node: "ivy".into() }, "ines"));
    let mut theirs = base.clone();
    theirs.push(rec(
        Edit::Exclude {
            node: "lavender".into(),
        },
        "ben",
    ));
    theirs.push(rec(history::revert_of(&theirs, 1, ""), "ben"));
    let ws = Workspace::open(&dir).unwrap();
    let m = merge(
        ws.base().unwrap(),
        &ws.project.phrases,
        &base,
        &ours,
        &theirs,
    );
    assert!(m.is_clean(), "{:?}", m.conflicts);
    // ours first, then theirs: their revert moved from #2 to #3 and names #2 now
    assert_eq!(m.edits.len(), 4);
    assert!(matches!(m.edits[3].edit, Edit::Revert { edit: 2, .. }));
    assert_eq!(history::reverted_by(&m.edits)[2], Some(3));
    let bytes = serialize_overrides(&m.edits);
    assert_eq!(parse_overrides(&bytes, "merged").unwrap(), m.edits);
}
