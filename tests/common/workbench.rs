//! The workbench under egui_kittest, as the GUI tests open it.

use std::path::{Path, PathBuf};

use egui_kittest::Harness;
use treewright::gui::{App, Settings};
use treewright::model::sample::write_demo;

/// A fresh copy of the Fernhollow demo in a temporary folder (keep the `TempDir` alive).
pub fn demo_dir() -> (tempfile::TempDir, PathBuf) {
    let t = tempfile::tempdir().unwrap();
    let dir = t.path().join("fernhollow");
    write_demo(&dir).unwrap();
    (t, dir)
}

/// Open the project at `dir` in the workbench (author "tester") once its first audit is
/// done, in a window of `size` points, and draw the first frames.
pub fn open_workbench(dir: &Path, size: [f32; 2]) -> Harness<'static, App> {
    let mut doc = treewright::gui::Doc::open(dir).unwrap();
    doc.wait_for_audit();
    let settings = Settings {
        author: "tester".into(),
        ..Settings::default()
    };
    let app = App::new(doc, settings);
    let mut h = Harness::builder()
        .with_size(size)
        .with_max_steps(12)
        .build_ui_state(|ui, app: &mut App| app.ui(ui), app);
    h.run();
    h
}
