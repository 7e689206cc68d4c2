//! The panel contract and the GUI's layering.
//!
//! * Layering: panels and dialogs import `gui::context` (and the model), never `gui::app`,
//!   and read the document only through a `ViewCtx`, never `gui::doc::Doc`. The check reads
//!   the sources of `src/gui/*.rs` and `src/gui/dialogs/*.rs`; the checker itself is tested
//!   on lines that must be flagged, so a broken checker cannot pass silently.
//! * Every `PanelKind` has a `Panel` implementation that the app holds and draws.

use std::collections::HashSet;
use std::path::{Path, PathBuf};

use egui_kittest::Harness;
use egui_kittest::kittest::Queryable;
use treewright::gui::context::{Action, Central, PanelKind};
use treewright::gui::{App, Settings};
use treewright::model::sample::write_demo;

/// Files of `src/gui` that are not panels or dialogs: the shell itself and the module root
/// that declares it.
const SHELL: [&str; 2] = ["app.rs", "mod.rs"];

/// The source without comments (line comments, doc comments, block comments) and without
/// the contents of string literals, so that prose and messages never count as imports.
fn code_only(src: &str) -> String {
    let b = src.as_bytes();
    let mut out = String::with_capacity(src.len());
    let mut i = 0;
    while i < b.len() {
        if b[i..].starts_with(b"//") {
            while i < b.len() && b[i] != b'\n' {
                i += 1;
            }
        } else if b[i..].starts_with(b"/*") {
            let mut depth = 0usize;
            while i < b.len() {
                if b[i..].starts_with(b"/*") {
                    depth += 1;
                    i += 2;
                } else if b[i..].starts_with(b"*/") {
                    depth -= 1;
                    i += 2;
                    if depth == 0 {
                        break;
                    }
                } else {
                    i += 1;
                }
            }
        } else if b[i] == b'"' {
            // skip the string, keep an empty literal
            out.push_str("\"\"");
            i += 1;
            while i < b.len() && b[i] != b'"' {
                i += if b[i] == b'\\' { 2 } else { 1 };
            }
            i += 1;
        } else if b[i] == b'\'' && i + 2 < b.len() && (b[i + 2] == b'\'' || b[i + 1] == b'\\') {
            // a char literal such as '"' or '\n' (lifetimes have no closing quote)
            out.push_str("' '");
            i += 1;
            while i < b.len() && b[i] != b'\'' {
                i += if b[i] == b'\\' { 2 } else { 1 };
            }
            i += 1;
        } else {
            let ch = src[i..].chars().next().unwrap();
            out.push(ch);
            i += ch.len_utf8();
        }
    }
    out
}

/// Identifier and `::` tokens of code, in order.
fn tokens(code: &str) -> Vec<&str> {
    let mut toks = Vec::new();
    let b = code.as_bytes();
    let mut i = 0;
    while i < b.len() {
        let c = b[i];
        if c.is_ascii_alphanumeric() || c == b'_' {
            let s = i;
            while i < b.len() && (b[i].is_ascii_alphanumeric() || b[i] == b'_') {
                i += 1;
            }
            toks.push(&code[s..i]);
        } else if code[i..].starts_with("::") {
            toks.push("::");
            i += 2;
        } else {
            let len = code[i..].chars().next().map_or(1, char::len_utf8);
            if !c.is_ascii_whitespace() {
                toks.push(&code[i..i + len]);
            }
            i += len;
        }
    }
    toks
}

/// Flatten a `use` tree (the tokens between `use` and `;`) into its full paths.
fn use_paths(toks: &[&str]) -> Vec<Vec<String>> {
    fn tree(toks: &[&str], i: &mut usize, prefix: &[String], out: &mut Vec<Vec<String>>) {
        let mut path = prefix.to_vec();
        loop {
            match toks.get(*i).copied() {
                Some("{") => {
                    *i += 1;
                    while toks.get(*i).is_some_and(|&t| t != "}") {
                        tree(toks, i, &path, out);
                        if toks.get(*i) == Some(&",") {
                            *i += 1;
                        }
                    }
                    *i += 1; // the closing brace
                    return;
                }
                Some(t) if t != "," && t != "}" && t != "::" => {
                    path.push(t.to_string());
                    *i += 1;
                    if toks.get(*i) == Some(&"as") {
                        *i += 2;
                    }
                    if toks.get(*i) == Some(&"::") {
                        *i += 1;
                        continue;
                    }
                    out.push(path);
                    return;
                }
                _ => {
                    out.push(path);
                    return;
                }
            }
        }
    }
    let mut out = Vec::new();
    let mut i = 0;
    if toks.first() == Some(&"::") {
        i = 1;
    }
    tree(toks, &mut i, &[], &mut out);
    out
}

/// Where `src` reaches the module `module` of `gui`, or the item `item` re-exported by
/// `gui`, through `super::` or `gui::` (in `use` trees, however grouped, and in paths in
/// code): one entry per use, empty when there is none.
fn reaches(src: &str, module: &str, item: &str) -> Vec<String> {
    let code = code_only(src);
    let toks = tokens(&code);
    let via = |t: &str| t == "super" || t == "gui";
    let mut hits = Vec::new();
    let mut k = 0;
    while k < toks.len() {
        if toks[k] == "use" {
            let end = (k..toks.len())
                .find(|&e| toks[e] == ";")
                .unwrap_or(toks.len());
            for path in use_paths(&toks[k + 1..end]) {
                if path
                    .windows(2)
                    .any(|w| via(&w[0]) && (w[1] == module || w[1] == item))
                {
                    hits.push(format!("use {}", path.join("::")));
                }
            }
            k = end + 1;
            continue;
        }
        // a path in code: `super::app::X`, `crate::gui::App`
        if via(toks[k]) && toks.get(k + 1) == Some(&"::") {
            match toks.get(k + 2).copied() {
                Some(t) if t == module && toks.get(k + 3) == Some(&"::") => {
                    hits.push(format!("{}::{t}::", toks[k]));
                }
                Some(t) if t == item => hits.push(format!("{}::{t}", toks[k])),
                _ => {}
            }
        }
        k += 1;
    }
    hits
}

fn gui_sources() -> Vec<(PathBuf, String)> {
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("src/gui");
    let mut files = Vec::new();
    for dir in [root.clone(), root.join("dialogs")] {
        for entry in std::fs::read_dir(&dir).unwrap() {
            let path = entry.unwrap().path();
            if path.extension().is_some_and(|e| e == "rs") {
                let text = std::fs::read_to_string(&path).unwrap();
                files.push((path, text));
            }
        }
    }
    files.sort();
    assert!(files.len() > 15, "found only {} GUI sources", files.len());
    files
}

fn is_shell(path: &Path) -> bool {
    path.parent().is_some_and(|d| d.ends_with("src/gui"))
        && SHELL.contains(&path.file_name().unwrap().to_str().unwrap())
}

#[test]
fn the_checker_flags_every_spelling_of_an_import_of_app() {
    let flagged = [
        "use super::app::{Action, ViewCtx};",
        "use super::super::app::Action;",
        "use crate::gui::app;",
        "use crate::gui::app::Settings;",
        "use super::{app, badges};",
        "use super::{badges, app::Action};",
        "use super::{badges::ORANGE, app::{Action, ViewCtx}};",
        "use super::{badges, App};",
        "fn f() -> Vec<super::app::Action> { Vec::new() }",
        "fn f(a: &crate::gui::App) {}",
        "use treewright::gui::app::Action;",
        "use super::app::{self};",
        "use super::app as shell;",
        "pub(crate) use super::super::{context::Action, app::ViewCtx};",
    ];
    for line in flagged {
        assert!(
            !reaches(line, "app", "App").is_empty(),
            "not flagged: {line}"
        );
    }
    let clean = [
        "use super::context::{Action, ViewCtx};",
        "// use super::app::Action;",
        "/// Unlike [`super::app::App`], a panel owns no document.",
        "/* super::app::Action */ use super::badges;",
        r#"let s = "super::app::Action";"#,
        "let app = 1; app.apply(x);",
        "use super::context::{AppearanceFlag};",
        "fn app_like(happy: u8) {}",
    ];
    for line in clean {
        assert!(reaches(line, "app", "App").is_empty(), "flagged: {line}");
    }
}

#[test]
fn no_panel_or_dialog_imports_the_app_shell() {
    let mut bad = Vec::new();
    for (path, text) in gui_sources() {
        if is_shell(&path) {
            continue;
        }
        for hit in reaches(&text, "app", "App") {
            bad.push(format!("{}: {hit}", path.display()));
        }
    }
    assert!(
        bad.is_empty(),
        "panels and dialogs import gui::context, never gui::app (the shell applies their \
         Actions):\n{}",
        bad.join("\n")
    );
}

#[test]
fn no_panel_or_dialog_reads_the_document_directly() {
    // autosave is the recovery file's reader and writer, not a view
    let mut bad = Vec::new();
    for (path, text) in gui_sources() {
        if is_shell(&path) || path.ends_with("autosave.rs") || path.ends_with("context.rs") {
            continue;
        }
        for hit in reaches(&text, "doc", "Doc") {
            bad.push(format!("{}: {hit}", path.display()));
        }
    }
    assert!(
        bad.is_empty(),
        "panels and dialogs read a ViewCtx, not gui::doc::Doc:\n{}",
        bad.join("\n")
    );
}

#[test]
fn the_context_module_does_not_import_the_app_shell() {
    let path = Path::new(env!("CARGO_MANIFEST_DIR")).join("src/gui/context.rs");
    let text = std::fs::read_to_string(path).unwrap();
    assert_eq!(reaches(&text, "app", "App"), Vec::<String>::new());
}

fn demo_app() -> (tempfile::TempDir, App) {
    let t = tempfile::tempdir().unwrap();
    let dir = t.path().join("fernhollow");
    write_demo(&dir).unwrap();
    let mut doc = treewright::gui::Doc::open(&dir).unwrap();
    doc.wait_for_audit();
    let settings = Settings {
        author: "tester".into(),
        ..Settings::default()
    };
    (t, App::new(doc, settings))
}

#[test]
fn every_panel_kind_has_a_panel_the_app_holds_and_draws() {
    let (_t, app) = demo_app();
    let held = app.panel_kinds();
    let held_set: HashSet<PanelKind> = held.iter().copied().collect();
    assert_eq!(held.len(), held_set.len(), "a kind held twice: {held:?}");
    for k in PanelKind::ALL {
        assert!(held_set.contains(&k), "{k:?} has no panel in the app");
    }

    // draw with every area shown, once with each centre view: every kind is drawn
    let mut h = Harness::builder()
        .with_size([1280.0, 800.0])
        .with_max_steps(12)
        .build_ui_state(|ui, app: &mut App| app.ui(ui), app);
    h.run();
    let mut drawn: HashSet<PanelKind> = h.state().drawn_panels().iter().copied().collect();
    assert_eq!(h.state().settings.central, Central::Ellipses);
    h.get_by_label("Shopper suggestions").click();
    h.run();
    assert_eq!(h.state().settings.central, Central::Suggestions);
    drawn.extend(h.state().drawn_panels().iter().copied());
    for k in PanelKind::ALL {
        assert!(drawn.contains(&k), "{k:?} is never drawn; drawn: {drawn:?}");
    }
}

#[test]
fn hiding_an_area_stops_drawing_its_panels() {
    let (_t, app) = demo_app();
    let mut h = Harness::builder()
        .with_size([1280.0, 800.0])
        .with_max_steps(12)
        .build_ui_state(|ui, app: &mut App| app.ui(ui), app);
    h.run();
    h.state_mut().apply(Action::ToggleArea(
        treewright::gui::context::Area::Inspector,
    ));
    h.run();
    let drawn = h.state().drawn_panels().to_vec();
    assert!(!drawn.contains(&PanelKind::Findings), "{drawn:?}");
    assert!(!drawn.contains(&PanelKind::Stats), "{drawn:?}");
    assert!(drawn.contains(&PanelKind::Tree), "{drawn:?}");
}

#[test]
fn author_changes_arrive_as_an_action() {
    let (_t, mut app) = demo_app();
    app.apply(Action::SetAuthor("second reviewer".into()));
    assert_eq!(app.settings.author, "second reviewer");
}

#[test]
fn the_sign_off_dialog_sets_the_author_before_its_edit() {
    let (_t, app) = demo_app();
    let mut h = Harness::builder()
        .with_size([1280.0, 800.0])
        .with_max_steps(12)
        .build_ui_state(|ui, app: &mut App| app.ui(ui), app);
    h.run();
    h.state_mut().apply(Action::Dialog(
        treewright::gui::context::DialogRequest::Signoff,
    ));
    h.run();
    h.get_by_label("Sign off the tree");
    // replace the reviewer (prefilled with the author) by a new name
    // the reviewer field (its text run carries the same value)
    h.get_all_by_value("tester").next().unwrap().click();
    h.run();
    h.event(egui::Event::Key {
        key: egui::Key::A,
        physical_key: None,
        pressed: true,
        repeat: false,
        modifiers: egui::Modifiers::COMMAND,
    });
    h.event(egui::Event::Text("second reviewer".into()));
    h.run();
    h.get_by_label("Sign off").click();
    h.run();
    h.get_by_label("SIGNED OFF");
    let app = h.state();
    assert_eq!(app.settings.author, "second reviewer");
    let last = app.doc.layer.edits.last().unwrap();
    assert!(
        matches!(&last.edit, treewright::model::edit::Edit::Signoff { reviewer, .. }
            if reviewer == "second reviewer"),
        "{:?}",
        last.edit
    );
    // the record's author is the new name: SetAuthor was applied before the edit
    assert_eq!(last.author, "second reviewer");
}
