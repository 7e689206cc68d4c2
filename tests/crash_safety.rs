//! Crash safety of every save: real `treewright edit`, `signoff` and `build` processes are
//! killed with SIGKILL at random moments; afterwards every file they write is the old or the
//! new version, never a torn one, and it loads.
//!
//! How the test is made able to fail (issue 17, part 1):
//! - The kill window follows the measured run time: a few runs are timed to completion
//!   first, and every kill falls at a uniform random point in [0, 1.5 × median run time],
//!   the median being updated with every run that finishes. On a loaded machine the window
//!   grows with the runs, so the rounds still split between killed and finished runs.
//! - The projects are made so that writing dominates a run: the edit and sign-off projects
//!   carry a large override file (a few MB of notes), the build project a tree of many
//!   phrases, so a kill lands inside a write often.
//! - Rounds continue until enough runs were killed mid-way *and* enough saves completed (not
//!   a fixed count that a slow machine may not reach), up to a cap.
//! - The broken twin: built with the `test-broken-writer` feature (refused at compile time
//!   unless `TREEWRIGHT_ALLOW_BROKEN_WRITER=1`; see `fsutil::broken_writer`), the binary
//!   writes in place (truncate, write, no fsync, no rename) when `TREEWRIGHT_BROKEN_WRITER=1`.
//!   `the_broken_writer_is_caught` (compiled only with that feature) runs the same rounds
//!   against it and asserts that a torn file is found; CI runs it:
//!   `TREEWRIGHT_ALLOW_BROKEN_WRITER=1 cargo test --release --locked --features
//!   test-broken-writer --test crash_safety`.

use std::ffi::OsString;
use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

use rand::{Rng, SeedableRng};
use rand_xoshiro::Xoshiro256PlusPlus;
use sha2::{Digest, Sha256};
use treewright::model::edit::Edit;
use treewright::model::overrides::{OverrideLayer, record};

mod common;

/// Runs killed mid-way that a passing scenario needs.
const WANT_KILLED: usize = 30;
/// Runs killed mid-way after which a run against the in-place writer gives up looking for
/// a torn file (it stops at the first one; a tear needs the kill to land inside a write,
/// which only a share of the kill moments do).
const BROKEN_KILLS: usize = 400;
/// Saves seen on disk (calibration runs included) that a passing scenario needs.
const WANT_SAVED: usize = 10;
/// Rounds after which a scenario gives up.
const MAX_ROUNDS: usize = 400;
/// Runs timed to completion before the first kill.
const CALIBRATION: usize = 5;

fn bin() -> PathBuf {
    PathBuf::from(env!("CARGO_BIN_EXE_treewright"))
}

/// What a scenario saw.
#[derive(Debug, Default)]
struct Tally {
    rounds: usize,
    killed: usize,
    finished: usize,
    saved: usize,
    median_ms: f64,
}

fn median(v: &[Duration]) -> Duration {
    let mut s = v.to_vec();
    s.sort();
    s[s.len() / 2]
}

/// Run `args_of(round)` as a child process, round after round, killing most of them at a
/// random point of [0, 1.5 × median run time]. After every round `check(round)` looks at the
/// files: `Ok(true)` when the new version is there, `Ok(false)` when the old one is, `Err`
/// for anything else (a torn or unreadable file). Returns the first such error.
fn crash_rounds(
    name: &str,
    broken: bool,
    seed: u64,
    args_of: &dyn Fn(usize) -> Vec<OsString>,
    check: &mut dyn FnMut(usize) -> Result<bool, String>,
) -> Result<Tally, String> {
    let mut rng = Xoshiro256PlusPlus::seed_from_u64(seed);
    let mut runs: Vec<Duration> = Vec::new();
    let mut t = Tally::default();
    let (want_killed, max_rounds) = if broken {
        (BROKEN_KILLS, 2 * BROKEN_KILLS)
    } else {
        (WANT_KILLED, MAX_ROUNDS)
    };
    for round in 0..max_rounds {
        let mut cmd = Command::new(bin());
        cmd.args(args_of(round))
            .env("TREEWRIGHT_LOCK_WAIT", "60")
            .stdout(Stdio::null())
            .stderr(Stdio::piped());
        if broken {
            cmd.env("TREEWRIGHT_BROKEN_WRITER", "1");
        } else {
            cmd.env_remove("TREEWRIGHT_BROKEN_WRITER");
        }
        let calibrating = round < CALIBRATION;
        let wait = if calibrating {
            Duration::from_secs(3600)
        } else {
            let window = median(&runs).mul_f64(1.5);
            window.mul_f64(rng.r#gen::<f64>())
        };
        let start = Instant::now();
        let mut child = cmd.spawn().unwrap();
        let finished = loop {
            if let Some(status) = child.try_wait().unwrap() {
                break Some(status);
            }
            if start.elapsed() >= wait {
                break None;
            }
            std::thread::sleep(Duration::from_micros(50));
        };
        match finished {
            Some(status) => {
                runs.push(start.elapsed());
                t.finished += 1;
                let mut err = String::new();
                use std::io::Read;
                child
                    .stderr
                    .take()
                    .unwrap()
                    .read_to_string(&mut err)
                    .unwrap();
                if !status.success() {
                    return Err(format!("{name} round {round}: the run failed: {err}"));
                }
            }
            None => {
                child.kill().unwrap(); // SIGKILL on Unix
                let _ = child.wait().unwrap();
                t.killed += 1;
            }
        }
        t.rounds = round + 1;
        match check(round) {
            Ok(new) => t.saved += new as usize,
            Err(e) => {
                return Err(format!(
                    "{name} round {round} ({} killed mid-run so far): {e}",
                    t.killed
                ));
            }
        }
        if calibrating && t.saved != round + 1 {
            return Err(format!("{name}: a run that finished saved nothing"));
        }
        if t.killed >= want_killed && t.saved >= WANT_SAVED {
            break;
        }
    }
    t.median_ms = median(&runs).as_secs_f64() * 1e3;
    eprintln!(
        "{name}{}: {} rounds, {} killed mid-run, {} finished, {} saves on disk, median run {:.1} ms",
        if broken { " (broken writer)" } else { "" },
        t.rounds,
        t.killed,
        t.finished,
        t.saved,
        t.median_ms
    );
    if t.killed < WANT_KILLED || t.saved < WANT_SAVED {
        return Err(format!(
            "{name}: only {} killed mid-run and {} saves in {} rounds",
            t.killed, t.saved, t.rounds
        ));
    }
    Ok(t)
}

/// The demo-shaped test project with an override file of `notes` edits carrying 16 KiB of
/// note each, so that loading and saving it dominate a run.
fn project_with_big_overrides(notes: usize) -> tempfile::TempDir {
    let dir = common::project();
    let mut layer = OverrideLayer::new();
    let note: String = "compost ".repeat(2048);
    for i in 0..notes {
        layer.push(record(
            Edit::Rename {
                node: "succulent".into(),
                label: format!("succulent {i}"),
                language: None,
            },
            "seed",
            Some(note.clone()),
        ));
    }
    layer.save(&dir.path().join("overrides.json")).unwrap();
    dir
}

fn os(v: &[&str]) -> Vec<OsString> {
    v.iter().map(OsString::from).collect()
}

/// `edit rename` rounds: the override file holds the old edits, or those plus this round's.
fn edit_rounds(broken: bool) -> Result<Tally, String> {
    let dir = project_with_big_overrides(1200);
    let p = dir.path().to_path_buf();
    let file = p.join("overrides.json");
    let mut expected = OverrideLayer::load(&file).unwrap().edits.len();
    let args_of = |round: usize| {
        let mut a = vec![OsString::from("edit"), p.clone().into()];
        let label = format!("shade loving {round}");
        a.extend(os(&[
            "rename",
            "shade-loving",
            &label,
            "--author",
            "crash-test",
        ]));
        a
    };
    let mut check = |round: usize| -> Result<bool, String> {
        let layer = OverrideLayer::load(&file)
            .map_err(|e| format!("the override file does not load: {e}"))?;
        let n = layer.edits.len();
        if n != expected && n != expected + 1 {
            return Err(format!(
                "{n} edits on disk, expected {expected} or {}",
                expected + 1
            ));
        }
        let new = n == expected + 1;
        if new {
            let last = serde_json::to_string(&layer.edits[n - 1].edit).unwrap();
            let label = format!("shade loving {round}");
            if !last.contains(&label) {
                return Err(format!("the new last edit is not this round's: {last}"));
            }
        }
        expected = n;
        Ok(new)
    };
    crash_rounds("edit", broken, 2026, &args_of, &mut check)
}

/// Every sign-off snapshot in `signoffs/` has the SHA-256 its name says, and every base
/// note parses.
fn check_snapshots(dir: &Path) -> Result<(), String> {
    let folder = dir.join("signoffs");
    let Ok(entries) = std::fs::read_dir(&folder) else {
        return Ok(());
    };
    for e in entries {
        let e = e.unwrap();
        let name = e.file_name().to_string_lossy().into_owned();
        if name.starts_with('.') {
            continue; // a temporary file of a killed writer: never read by anyone
        }
        let bytes = std::fs::read(e.path()).unwrap();
        if let Some(hash) = name.strip_suffix(".base.json") {
            serde_json::from_slice::<serde_json::Value>(&bytes)
                .map_err(|err| format!("signoffs/{name} ({hash}) is torn: {err}"))?;
        } else if let Some(hash) = name.strip_suffix(".json") {
            let got = hex(&Sha256::digest(&bytes));
            if got != hash {
                return Err(format!("signoffs/{name} is torn: its SHA-256 is {got}"));
            }
        }
    }
    Ok(())
}

fn hex(b: &[u8]) -> String {
    b.iter().map(|x| format!("{x:02x}")).collect()
}

/// `signoff` rounds: the override file holds the old edits or one more sign-off, and every
/// snapshot written under `signoffs/` is whole.
fn signoff_rounds(broken: bool) -> Result<Tally, String> {
    let dir = project_with_big_overrides(200);
    let p = dir.path().to_path_buf();
    let file = p.join("overrides.json");
    let mut expected = OverrideLayer::load(&file).unwrap().edits.len();
    let args_of = |_round: usize| {
        let mut a = vec![OsString::from("signoff"), p.clone().into()];
        a.extend(os(&["--reviewer", "crash-test"]));
        a
    };
    let mut check = |_round: usize| -> Result<bool, String> {
        let layer = OverrideLayer::load(&file)
            .map_err(|e| format!("the override file does not load: {e}"))?;
        let n = layer.edits.len();
        if n != expected && n != expected + 1 {
            return Err(format!(
                "{n} edits on disk, expected {expected} or {}",
                expected + 1
            ));
        }
        let new = n == expected + 1;
        if new && !matches!(layer.edits[n - 1].edit, Edit::Signoff { .. }) {
            return Err("the new last edit is not a sign-off".into());
        }
        check_snapshots(&p)?;
        expected = n;
        Ok(new)
    };
    crash_rounds("signoff", broken, 2027, &args_of, &mut check)
}

/// A synthetic project of 5 000 phrases (2-d) whose ids are padded to about 1 500
/// characters: building it is quick, but its tree file is about 15 MB, so writing the tree
/// (and its `.bak`) is a good share of a `build` run.
fn build_project(out: &Path) {
    let st = Command::new(bin())
        .args(["sample", "--synthetic", "5000", "--dim", "2"])
        .args(["--branching", "4", "--depth", "2", "--out"])
        .arg(out)
        .output()
        .unwrap();
    assert!(
        st.status.success(),
        "{}",
        String::from_utf8_lossy(&st.stderr)
    );
    let pad = format!("-{}", "compost".repeat(214));
    let read = |name: &str| -> serde_json::Value {
        serde_json::from_slice(&std::fs::read(out.join(name)).unwrap()).unwrap()
    };
    let mut phrases = read("phrases.json");
    for p in phrases.as_array_mut().unwrap() {
        let id = match p.get("id").and_then(|v| v.as_str()) {
            Some(id) => id.to_string(),
            None => p["label"]
                .as_str()
                .unwrap()
                .to_lowercase()
                .replace(' ', "-"),
        };
        p["id"] = format!("{id}{pad}").into();
    }
    let tree = read("tree.json");
    let mut parent = serde_json::Map::new();
    for (k, v) in tree["parent"].as_object().unwrap() {
        parent.insert(
            format!("{k}{pad}"),
            format!("{}{pad}", v.as_str().unwrap()).into(),
        );
    }
    let tree = serde_json::json!({
        "root": format!("{}{pad}", tree["root"].as_str().unwrap()),
        "parent": parent,
    });
    std::fs::write(
        out.join("phrases.json"),
        serde_json::to_vec(&phrases).unwrap(),
    )
    .unwrap();
    std::fs::write(out.join("tree.json"), serde_json::to_vec(&tree).unwrap()).unwrap();
}

fn copy_flat(from: &Path, to: &Path) {
    std::fs::create_dir_all(to).unwrap();
    for e in std::fs::read_dir(from).unwrap() {
        let e = e.unwrap();
        if e.file_type().unwrap().is_file() {
            std::fs::copy(e.path(), to.join(e.file_name())).unwrap();
        }
    }
}

/// `build` rounds (maximum depth 1 and 2 in turn) on a project with a large tree file: the
/// tree file is the one before the round or the tree of this round's depth (as a run that
/// is not killed writes it), its `.bak` is one of the trees, the build report parses.
fn build_rounds(broken: bool) -> Result<Tally, String> {
    let t = tempfile::tempdir().unwrap();
    let p = t.path().join("crash");
    build_project(&p);
    let args_of = |round: usize| {
        let mut a = vec![OsString::from("build"), p.clone().into()];
        a.extend(os(&["--max-depth", &(1 + round % 2).to_string()]));
        a
    };
    // the tree each depth builds, from runs that are not killed (real writer) on copies
    let tree_name = "tree.json";
    let mut trees: Vec<Vec<u8>> = Vec::new();
    for depth in 1..=2 {
        let q = t.path().join(format!("ref{depth}"));
        copy_flat(&p, &q);
        let out = Command::new(bin())
            .arg("build")
            .arg(&q)
            .args(["--max-depth", &depth.to_string()])
            .env_remove("TREEWRIGHT_BROKEN_WRITER")
            .output()
            .unwrap();
        assert!(
            out.status.success(),
            "{}",
            String::from_utf8_lossy(&out.stderr)
        );
        trees.push(std::fs::read(q.join(tree_name)).unwrap());
    }
    assert!(trees[0] != trees[1], "depths 1 and 2 build different trees");
    let original = std::fs::read(p.join(tree_name)).unwrap();
    let mut old = original.clone();
    let mut check = |round: usize| -> Result<bool, String> {
        let now = std::fs::read(p.join(tree_name)).map_err(|e| format!("tree: {e}"))?;
        let new_tree = &trees[round % 2];
        let new = now == *new_tree && now != old;
        if now != old && now != *new_tree {
            return Err(format!(
                "the tree file is neither the old nor the new tree ({} bytes)",
                now.len()
            ));
        }
        if let Ok(bak) = std::fs::read(p.join(format!("{tree_name}.bak")))
            && bak != original
            && !trees.contains(&bak)
        {
            return Err(format!("{tree_name}.bak is torn ({} bytes)", bak.len()));
        }
        if let Ok(rep) = std::fs::read(p.join("build-report.json")) {
            serde_json::from_slice::<serde_json::Value>(&rep)
                .map_err(|e| format!("build-report.json is torn: {e}"))?;
        }
        let manifest = std::fs::read(p.join("project.json")).unwrap();
        serde_json::from_slice::<serde_json::Value>(&manifest)
            .map_err(|e| format!("project.json is torn: {e}"))?;
        // a build that rewrote the same tree (killed after writing it) counts as new too
        let saved = new || (now == *new_tree && now == old);
        old = now;
        Ok(saved)
    };
    crash_rounds("build", broken, 2028, &args_of, &mut check)
}

#[test]
fn sigkill_during_edit_leaves_old_or_new_override_file() {
    edit_rounds(false).unwrap();
}

#[test]
fn sigkill_during_signoff_leaves_old_or_new_files() {
    signoff_rounds(false).unwrap();
}

#[test]
fn sigkill_during_build_leaves_old_or_new_files() {
    build_rounds(false).unwrap();
}

/// The same rounds against the in-place writer must find a torn file (see the module
/// comment). Compiled only with `--features test-broken-writer`.
#[cfg(feature = "test-broken-writer")]
#[test]
fn the_broken_writer_is_caught() {
    for (name, run) in [
        ("edit", edit_rounds as fn(bool) -> Result<Tally, String>),
        ("signoff", signoff_rounds),
        ("build", build_rounds),
    ] {
        match run(true) {
            Ok(t) => panic!("{name}: the in-place writer was not caught: {t:?}"),
            Err(e) => {
                assert!(
                    e.contains("torn")
                        || e.contains("does not load")
                        || e.contains("edits on disk")
                        || e.contains("neither the old nor the new"),
                    "{name}: failed for another reason: {e}"
                );
                eprintln!("{name}: caught the in-place writer: {e}");
            }
        }
    }
}
