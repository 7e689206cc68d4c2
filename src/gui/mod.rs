//! The desktop workbench (eframe/egui). Panels implement [`Panel`]: they read a [`ViewCtx`]
//! and return [`Action`]s; only the app shell (`app.rs`) applies them, and edits go through
//! the override layer. Panels and dialogs import [`context`], never `app`.

use std::path::{Path, PathBuf};
use std::process::ExitCode;

pub mod app;
pub mod autosave;
pub mod badges;
pub mod context;
pub mod dialogs;
pub mod doc;
pub mod ellipse_panel;
pub mod findings_panel;
pub mod fonts;
pub mod menu_bar;
pub mod queue_panel;
pub mod shortcuts;
pub mod stats_panel;
pub mod status_bar;
pub mod suggest_panel;
pub mod tree_panel;
pub mod two_parent_plot;

pub use app::App;
pub use context::{Action, Panel, PanelKind, Settings, ViewCtx};
pub use doc::Doc;

/// Application id (window class and the folder of the persisted settings).
pub const APP_ID: &str = "treewright";

/// Folder of the demo project bundled with the source tree.
pub fn bundled_demo_dir() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("sample-projects/fernhollow")
}

/// Open the workbench on `project`, or on the demo project ([`crate::model::sample::demo_dir`]);
/// `select` preselects a phrase by id or label.
pub fn run(project: Option<PathBuf>, select: Option<String>) -> ExitCode {
    let path = project.unwrap_or_else(crate::model::sample::demo_dir);
    let doc = match Doc::open(&path) {
        Ok(d) => d,
        Err(e) => {
            eprintln!("treewright: {e}");
            return ExitCode::from(crate::cli::EXIT_BAD_INPUT);
        }
    };
    let options = eframe::NativeOptions {
        viewport: egui::ViewportBuilder::default()
            .with_inner_size([1280.0, 800.0])
            .with_min_inner_size([900.0, 560.0])
            .with_app_id(APP_ID)
            .with_title("treewright"),
        persist_window: true,
        ..Default::default()
    };
    let result = eframe::run_native(
        APP_ID,
        options,
        Box::new(move |cc| {
            let settings: Settings = cc
                .storage
                .and_then(|s| eframe::get_value(s, context::SETTINGS_KEY))
                .unwrap_or_default();
            let fonts = fonts::install(&cc.egui_ctx);
            let mut app = App::new(doc, settings);
            if let Some(line) = fonts.status_line() {
                app.message = Some((line, false));
            }
            if let Some(id) = select
                && let Err(e) = app.preselect(&id)
            {
                eprintln!("treewright: {e}");
            }
            Ok(Box::new(app))
        }),
    );
    match result {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) => {
            eprintln!("treewright: cannot open a window: {e}");
            ExitCode::FAILURE
        }
    }
}
