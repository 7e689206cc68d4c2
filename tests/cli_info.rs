//! `treewright info` end to end through the built binary.

use std::process::Command;

mod common;

fn treewright() -> Command {
    Command::new(env!("CARGO_BIN_EXE_treewright"))
}

#[test]
fn info_json_has_the_documented_keys() {
    let d = common::project();
    let out = treewright()
        .arg("info")
        .arg(d.path())
        .arg("--json")
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(v["phrases"], 3);
    assert_eq!(v["dim"], 2);
    assert_eq!(v["covariance"], "diagonal");
    assert_eq!(v["tree"]["nodes"], 3);
    assert_eq!(v["tree"]["depth"], 1);
    assert_eq!(v["tree"]["root"], "plants");
    assert_eq!(v["unplaced"], serde_json::json!([]));
    // generality = ln det Σ: plants ln 16, succulent ln 0.2, shade-loving ln 0.18
    let g = &v["generality"];
    assert!((g["max"].as_f64().unwrap() - 16f64.ln()).abs() < 1e-5);
    assert!((g["median"].as_f64().unwrap() - 0.2f64.ln()).abs() < 1e-5);
    assert!((g["min"].as_f64().unwrap() - 0.18f64.ln()).abs() < 1e-5);
}

#[test]
fn info_text_and_bad_input_exit_code() {
    let d = common::project();
    let out = treewright().arg("info").arg(d.path()).output().unwrap();
    assert!(out.status.success());
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(
        text.contains("phrases     3") && text.contains("root plants"),
        "{text}"
    );

    std::fs::write(
        d.path().join("tree.json"),
        r#"{"root": "plants", "parent": {"succulent": "nope"}}"#,
    )
    .unwrap();
    let out = treewright().arg("info").arg(d.path()).output().unwrap();
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(
        err.contains("tree.json") && err.contains("\"nope\""),
        "{err}"
    );
    assert!(out.stdout.is_empty());
}
