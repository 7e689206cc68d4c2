//! Crash safety of saving edits: a child process that saves the override layer is killed
//! with SIGKILL at random moments, 100 times; afterwards the file is always the old or the
//! new version, and it loads.

use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

use rand::{Rng, SeedableRng};
use rand_xoshiro::Xoshiro256PlusPlus;
use treewright::model::overrides::OverrideLayer;

mod common;

#[test]
fn sigkill_during_saves_leaves_old_or_new_file() {
    let dir = common::project();
    let p = dir.path();
    let file = p.join("overrides.json");
    let bin = env!("CARGO_BIN_EXE_treewright");
    let mut rng = Xoshiro256PlusPlus::seed_from_u64(2026);
    let mut expected = 0usize; // edits known to be on disk
    let mut killed_mid_run = 0usize;
    for round in 0..100 {
        let label = format!("shade loving {round}");
        let mut child = Command::new(bin)
            .args(["edit"])
            .arg(p)
            .args(["rename", "shade-loving", &label, "--author", "crash-test"])
            .stdout(Stdio::null())
            .stderr(Stdio::null())
            .spawn()
            .unwrap();
        // kill somewhere inside the run (a run takes a few milliseconds)
        let wait = Duration::from_micros(rng.gen_range(0..6_000));
        let start = Instant::now();
        while start.elapsed() < wait {
            if child.try_wait().unwrap().is_some() {
                break;
            }
            std::thread::sleep(Duration::from_micros(100));
        }
        let finished = child.try_wait().unwrap().is_some();
        if !finished {
            child.kill().unwrap(); // SIGKILL on Unix
            killed_mid_run += 1;
        }
        let _ = child.wait().unwrap();
        let layer = OverrideLayer::load(&file)
            .unwrap_or_else(|e| panic!("round {round}: the override file does not load: {e}"));
        let n = layer.edits.len();
        assert!(
            n == expected || n == expected + 1,
            "round {round}: {n} edits on disk, expected {expected} or {}",
            expected + 1
        );
        if n == expected + 1 {
            // the new version is complete: its last edit is this round's rename
            let last = serde_json::to_string(&layer.edits[n - 1].edit).unwrap();
            assert!(last.contains(&label), "round {round}: {last}");
        }
        expected = n;
    }
    eprintln!("100 rounds: {killed_mid_run} killed mid-run, {expected} saves completed");
    assert!(
        killed_mid_run > 10,
        "only {killed_mid_run} runs were killed mid-way"
    );
    assert!(expected > 0, "no save ever completed");
}
