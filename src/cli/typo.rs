//! The first word on the command line: a subcommand, a project path, or a typo.
//!
//! The binary takes either a project path (to open in the workbench) or a subcommand, so a
//! mistyped subcommand would be read as a path. Before clap parses, [`check_first_word`]
//! looks at the first positional argument: when it is neither a subcommand nor an existing
//! path it is refused (exit 2) with the nearest subcommand when one is close, so
//! `treewright audti PROJECT` says `unknown command 'audti' — did you mean 'audit'?` instead
//! of a clap message about `[PROJECT]`. An existing folder or file always wins, even when
//! named like a subcommand's typo.

use std::ffi::OsString;
use std::path::Path;

use clap::CommandFactory;

use super::{Cli, CliError};

/// Options of the top-level command that take a value (their value is not the first word).
const VALUE_OPTIONS: &[&str] = &["--select"];

/// The furthest a typo may be from a subcommand name, by name length: one edit for names of
/// up to four letters, two beyond (optimal string alignment distance, so a swap of two
/// neighbouring letters counts as one edit). Common practice, no source.
fn max_distance(name: &str) -> usize {
    if name.chars().count() <= 4 { 1 } else { 2 }
}

/// Subcommand names the binary accepts (including clap's `help`).
pub fn command_names() -> Vec<String> {
    let mut names: Vec<String> = Cli::command()
        .get_subcommands()
        .map(|c| c.get_name().to_string())
        .collect();
    names.push("help".to_string());
    names
}

/// The subcommand nearest to `word` when it is close enough to be a typo of it.
pub fn nearest_command(word: &str) -> Option<String> {
    let w = word.to_lowercase();
    command_names()
        .into_iter()
        .map(|n| (strsim::osa_distance(&w, &n), n))
        .filter(|(d, n)| *d <= max_distance(n))
        .min_by(|a, b| a.0.cmp(&b.0).then_with(|| a.1.cmp(&b.1)))
        .map(|(_, n)| n)
}

/// The first positional argument (skipping options and the values of value options), or
/// `None` when there is none or `--` / `-h` / `--help` / `-V` / `--version` comes first
/// (clap answers those).
fn first_word(args: &[OsString]) -> Option<&OsString> {
    let mut it = args.iter().skip(1);
    while let Some(a) = it.next() {
        let s = a.to_string_lossy();
        if s == "--" {
            return None;
        }
        if VALUE_OPTIONS.contains(&s.as_ref()) {
            it.next();
            continue;
        }
        if s.starts_with('-') && s.len() > 1 {
            continue;
        }
        return Some(a);
    }
    None
}

/// Refuse a first word that is neither a subcommand nor an existing path. `args` is the
/// whole command line, program name first.
pub fn check_first_word(args: &[OsString]) -> Result<(), CliError> {
    let Some(word) = first_word(args) else {
        return Ok(());
    };
    if Path::new(word).exists() {
        return Ok(());
    }
    let text = word.to_string_lossy();
    if command_names().iter().any(|n| *n == text) {
        return Ok(());
    }
    Err(match nearest_command(&text) {
        Some(n) => CliError::bad_input(format!("unknown command '{text}' — did you mean '{n}'?")),
        None if text.contains(['/', '\\', '.']) => {
            CliError::bad_input(format!("{text}: no such project folder or file"))
        }
        None => CliError::bad_input(format!(
            "'{text}' is neither a command nor an existing project folder or file \
             (see treewright --help)"
        )),
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn line(words: &[&str]) -> Vec<OsString> {
        std::iter::once("treewright")
            .chain(words.iter().copied())
            .map(OsString::from)
            .collect()
    }

    #[test]
    fn typos_find_their_command() {
        assert_eq!(nearest_command("audti").as_deref(), Some("audit"));
        assert_eq!(nearest_command("exprot").as_deref(), Some("export"));
        assert_eq!(nearest_command("Verfy").as_deref(), Some("verify"));
        assert_eq!(nearest_command("dif").as_deref(), Some("diff"));
        assert_eq!(
            nearest_command("completion").as_deref(),
            Some("completions")
        );
        assert_eq!(nearest_command("fernhollow"), None);
        assert_eq!(nearest_command("xyz"), None);
    }

    #[test]
    fn the_first_word_skips_options_and_their_values() {
        let l = line(&["--select", "audti", "proj"]);
        assert_eq!(first_word(&l).unwrap(), "proj");
        let l = line(&["--select=fern", "audti"]);
        assert_eq!(first_word(&l).unwrap(), "audti");
        assert!(first_word(&line(&["--help"])).is_none());
        assert!(first_word(&line(&[])).is_none());
    }

    #[test]
    fn an_existing_path_wins_and_a_missing_one_is_refused() {
        let d = tempfile::tempdir().unwrap();
        let folder = d.path().join("audti");
        let f = folder.to_str().unwrap();
        let e = check_first_word(&line(&[f])).unwrap_err();
        assert_eq!(e.code, 2);
        assert_eq!(e.message, format!("{f}: no such project folder or file"));
        std::fs::create_dir(&folder).unwrap();
        assert!(check_first_word(&line(&[f])).is_ok());
        // the crate root has no `audti`, so the bare word is a typo
        let e = check_first_word(&line(&["audti"])).unwrap_err();
        assert_eq!(e.message, "unknown command 'audti' — did you mean 'audit'?");
    }

    #[test]
    fn commands_and_no_arguments_pass() {
        assert!(check_first_word(&line(&["audit", "x"])).is_ok());
        assert!(check_first_word(&line(&["help"])).is_ok());
        assert!(check_first_word(&line(&[])).is_ok());
        assert!(check_first_word(&line(&["--version"])).is_ok());
    }
}
