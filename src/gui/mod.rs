//! The desktop workbench (eframe/egui). Panels read the model and emit [`Action`]s; only
//! the app shell applies them.

use std::path::{Path, PathBuf};
use std::process::ExitCode;

pub mod app;
pub mod status_bar;
pub mod suggest_panel;
pub mod tree_panel;

pub use app::{Action, App};

/// Folder of the demo project bundled with the source tree.
pub fn bundled_demo_dir() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("sample-projects/fernhollow")
}

/// Open the workbench on `project`, or on the demo project ([`crate::model::sample::demo_dir`]).
pub fn run(project: Option<PathBuf>) -> ExitCode {
    let path = project.unwrap_or_else(crate::model::sample::demo_dir);
    let app = match App::open(&path) {
        Ok(a) => a,
        Err(e) => {
            eprintln!("treewright: {e}");
            return ExitCode::from(crate::cli::EXIT_BAD_INPUT);
        }
    };
    let options = eframe::NativeOptions {
        viewport: egui::ViewportBuilder::default()
            .with_inner_size([1280.0, 800.0])
            .with_title("treewright"),
        ..Default::default()
    };
    match eframe::run_native("treewright", options, Box::new(|_cc| Ok(Box::new(app)))) {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) => {
            eprintln!("treewright: cannot open a window: {e}");
            ExitCode::FAILURE
        }
    }
}
