//! The label rule end to end: labels entering through `phrases.json`, `users.json`, a rename
//! on the command line and a rename in a hand-edited `overrides.json`; the exports are read
//! back with independent parsers (the `csv` crate, `serde_json`, oxttl's Turtle parser).

mod common;

use std::path::Path;
use std::process::{Command, Output};

use oxrdf::Term;
use oxttl::TurtleParser;

/// "café" typed with a combining acute accent (U+0065 U+0301) and precomposed (U+00E9); NFC
/// composes the first into the second (Unicode Standard Annex #15, Normalization Forms).
const DECOMPOSED: &str = "cafe\u{301} seating";
const PRECOMPOSED: &str = "caf\u{e9} seating";

fn tw(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_treewright"))
        .args(args)
        .output()
        .unwrap()
}

fn err(o: &Output) -> String {
    String::from_utf8_lossy(&o.stderr).into_owned()
}

fn ok(args: &[&str]) {
    let o = tw(args);
    assert_eq!(o.status.code(), Some(0), "{args:?}: {}", err(&o));
}

fn set_phrases(dir: &Path, json: &str) {
    std::fs::write(dir.join("phrases.json"), json).unwrap();
}

/// The label of phrase `id` in each export: CSV, SKOS (`skos:prefLabel`) and, when the node
/// was renamed, JSON (`renamed`).
fn exported_labels(dir: &Path, id: &str) -> Vec<String> {
    let p = dir.to_str().unwrap();
    let csv_path = dir.join("out.csv");
    let json_path = dir.join("out.json");
    let ttl_path = dir.join("out.ttl");
    for (f, path) in [
        ("csv", &csv_path),
        ("json", &json_path),
        ("skos", &ttl_path),
    ] {
        ok(&["export", p, "--format", f, "--out", path.to_str().unwrap()]);
    }
    let mut rd = csv::Reader::from_path(&csv_path).unwrap();
    let h = rd.headers().unwrap().clone();
    let (ci, cl) = (
        h.iter().position(|c| c == "id").unwrap(),
        h.iter().position(|c| c == "label").unwrap(),
    );
    let from_csv = rd
        .records()
        .map(Result::unwrap)
        .find(|r| &r[ci] == id)
        .map(|r| r[cl].to_string())
        .unwrap();
    let j: serde_json::Value = serde_json::from_slice(&std::fs::read(&json_path).unwrap()).unwrap();
    // the JSON export carries a label only when the node was renamed
    let from_json = j["renamed"][id].as_str().map(str::to_string);
    let ttl = std::fs::read(&ttl_path).unwrap();
    let subject = format!("<http://example.org/treewright/{id}>");
    let from_ttl = TurtleParser::new()
        .for_slice(&ttl)
        .map(Result::unwrap)
        .find(|t| {
            t.subject.to_string() == subject
                && t.predicate.as_str() == "http://www.w3.org/2004/02/skos/core#prefLabel"
        })
        .and_then(|t| match t.object {
            Term::Literal(l) => Some(l.value().to_string()),
            _ => None,
        })
        .unwrap();
    let mut v = vec![from_csv, from_ttl];
    v.extend(from_json);
    v
}

#[test]
fn phrase_labels_with_control_characters_are_refused_naming_file_row_and_phrase() {
    let d = common::project();
    set_phrases(
        d.path(),
        r#"[{"id": "plants", "label": "plants"},
            {"id": "succulent", "label": "gift\tideas\u0007"},
            {"id": "shade-loving", "label": "shade loving"}]"#,
    );
    let o = tw(&["info", d.path().to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(2));
    let e = err(&o);
    assert!(e.contains("phrases.json"), "{e}");
    assert!(e.contains("row 1 label (phrase \"succulent\")"), "{e}");
    assert!(e.contains("U+0009"), "{e}");
}

#[test]
fn user_labels_with_control_characters_are_refused() {
    let d = common::project();
    std::fs::write(
        d.path().join("users.json"),
        r#"[{"id": "u-1", "label": "balcony\ngrower", "mean": [0.5, 0.5], "variance": [1.0, 1.0]}]"#,
    )
    .unwrap();
    let o = tw(&["info", d.path().to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(2));
    let e = err(&o);
    assert!(e.contains("users.json") && e.contains("U+000A"), "{e}");
}

#[test]
fn phrase_labels_are_trimmed_and_normalised_in_every_export() {
    let d = common::project();
    set_phrases(
        d.path(),
        &format!(
            r#"[{{"id": "plants", "label": "plants"}},
                {{"id": "succulent", "label": "  {DECOMPOSED} "}},
                {{"id": "shade-loving", "label": "shade loving"}}]"#
        ),
    );
    for label in exported_labels(d.path(), "succulent") {
        assert_eq!(label, PRECOMPOSED);
    }
}

#[test]
fn renames_are_checked_trimmed_and_normalised() {
    let d = common::project();
    let p = d.path().to_str().unwrap();
    let ov = d.path().join("overrides.json");

    // the issue's example: a tab and a bell
    let o = tw(&[
        "edit",
        p,
        "rename",
        "succulent",
        "gift\tideas\u{7}",
        "--author",
        "ines",
    ]);
    assert_eq!(o.status.code(), Some(2));
    assert_eq!(
        err(&o).trim_end(),
        "treewright: refused: rename of \"succulent\": the label holds the control character \
         U+0009 at character 4"
    );
    assert!(!ov.exists(), "a refused rename wrote the override file");

    // white space trimmed, NFC stored in the override file
    let padded = format!("  {DECOMPOSED}  ");
    ok(&[
        "edit",
        p,
        "rename",
        "succulent",
        &padded,
        "--author",
        "ines",
    ]);
    let stored: serde_json::Value = serde_json::from_slice(&std::fs::read(&ov).unwrap()).unwrap();
    let last = stored["edits"].as_array().unwrap().last().unwrap().clone();
    assert_eq!(last["label"], PRECOMPOSED, "{stored}");

    // the other spelling is the same label
    let o = tw(&[
        "edit",
        p,
        "rename",
        "succulent",
        PRECOMPOSED,
        "--author",
        "ines",
    ]);
    assert_eq!(o.status.code(), Some(2), "{}", err(&o));
    assert!(err(&o).contains("already labelled"), "{}", err(&o));

    let labels = exported_labels(d.path(), "succulent");
    assert_eq!(labels.len(), 3, "the JSON export lists the rename");
    for label in labels {
        assert_eq!(label, PRECOMPOSED);
    }
}

#[test]
fn a_hand_edited_rename_with_a_control_character_is_skipped_not_exported() {
    let d = common::project();
    let p = d.path().to_str().unwrap();
    ok(&[
        "edit",
        p,
        "rename",
        "succulent",
        "cacti",
        "--author",
        "ines",
    ]);
    let ov = d.path().join("overrides.json");
    let text = std::fs::read_to_string(&ov).unwrap();
    // "cacti" -> "cac\u0007ti" inside the JSON string
    std::fs::write(&ov, text.replace("\"cacti\"", "\"cac\\u0007ti\"")).unwrap();
    let out = d.path().join("applied.json");
    let o = tw(&["apply", p, "--out", out.to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(0), "{}", err(&o));
    let said = String::from_utf8_lossy(&o.stdout);
    assert!(said.contains("skipped edit #0 (rename)"), "{said}");
    assert!(said.contains("U+0007"), "{said}");
    let labels = exported_labels(d.path(), "succulent");
    assert_eq!(
        labels,
        ["succulent", "succulent"],
        "no rename in the JSON export"
    );
}

#[test]
fn the_scheme_label_and_the_project_name_follow_the_same_rule() {
    let d = common::project();
    let p = d.path().to_str().unwrap();
    let ttl = d.path().join("out.ttl");
    let t = ttl.to_str().unwrap();
    let o = tw(&[
        "export",
        p,
        "--format",
        "skos",
        "--out",
        t,
        "--scheme-label",
        "Fern\u{7}hollow",
    ]);
    assert_eq!(o.status.code(), Some(2));
    assert!(err(&o).contains("--scheme-label: the label holds the control character U+0007"));
    assert!(!ttl.exists());
    let manifest = d.path().join("project.json");
    let text = std::fs::read_to_string(&manifest).unwrap();
    std::fs::write(
        &manifest,
        text.replace("Fernhollow test", "Fernhollow\\ttest"),
    )
    .unwrap();
    let o = tw(&["info", p]);
    assert_eq!(o.status.code(), Some(2));
    assert!(
        err(&o).contains("project.json") && err(&o).contains("U+0009"),
        "{}",
        err(&o)
    );
}
