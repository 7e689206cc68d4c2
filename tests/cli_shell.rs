//! The command line as a shell user meets it: typos of a subcommand, completions, the manual
//! page, and the exit-code / stream table of the README (every subcommand's failure mode is
//! run and checked against the table's row).

mod common;

use std::path::Path;
use std::process::{Command, Output};

use treewright::cli::typo::command_names;

fn tw_in(cwd: &Path, args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_treewright"))
        .current_dir(cwd)
        .args(args)
        .output()
        .unwrap()
}

fn tw(args: &[&str]) -> Output {
    tw_in(Path::new(env!("CARGO_MANIFEST_DIR")), args)
}

fn out(o: &Output) -> String {
    String::from_utf8_lossy(&o.stdout).into_owned()
}

fn err(o: &Output) -> String {
    String::from_utf8_lossy(&o.stderr).into_owned()
}

/// The subcommands as the binary defines them (not `help`).
fn verbs() -> Vec<String> {
    command_names()
        .into_iter()
        .filter(|n| n != "help")
        .collect()
}

#[test]
fn a_mistyped_subcommand_names_the_nearest_one() {
    let o = tw(&["audti", "sample-projects/fernhollow"]);
    assert_eq!(o.status.code(), Some(2));
    assert!(out(&o).is_empty());
    assert_eq!(
        err(&o).trim_end(),
        "treewright: unknown command 'audti' — did you mean 'audit'?"
    );
    // alone (clap would read it as a project path and open the window)
    let o = tw(&["exprot"]);
    assert_eq!(o.status.code(), Some(2));
    assert!(err(&o).contains("did you mean 'export'?"), "{}", err(&o));
}

#[test]
fn an_existing_folder_named_like_a_typo_is_a_project_path() {
    // a folder called `audti` exists, so `treewright audti info` is not a typo: clap then
    // refuses a project path followed by a subcommand, with its own usage error (exit 2)
    // and never the typo message. `treewright audti --help` reaches clap too.
    let tmp = tempfile::tempdir().unwrap();
    std::fs::create_dir(tmp.path().join("audti")).unwrap();
    let o = tw_in(tmp.path(), &["audti", "info"]);
    assert_eq!(o.status.code(), Some(2));
    assert!(!err(&o).contains("did you mean"), "{}", err(&o));
    assert!(err(&o).contains("cannot be used with"), "{}", err(&o));
    // and a real verb followed by that folder runs the verb on it (bad input: no project)
    let o = tw_in(tmp.path(), &["info", "audti"]);
    assert_eq!(o.status.code(), Some(2));
    assert!(err(&o).contains("project.json"), "{}", err(&o));
}

#[test]
fn a_missing_path_is_refused_before_the_window_opens() {
    let o = tw(&["no/such/project"]);
    assert_eq!(o.status.code(), Some(2));
    assert!(out(&o).is_empty());
    assert_eq!(
        err(&o).trim_end(),
        "treewright: no/such/project: no such project folder or file"
    );
    let o = tw(&["fernhollow-garden"]);
    assert_eq!(o.status.code(), Some(2));
    assert!(
        err(&o).contains("is neither a command nor an existing project folder or file"),
        "{}",
        err(&o)
    );
}

#[test]
fn completions_for_every_shell_name_every_subcommand() {
    for shell in ["bash", "zsh", "fish", "powershell", "elvish"] {
        let o = tw(&["completions", shell]);
        assert_eq!(o.status.code(), Some(0), "{shell}: {}", err(&o));
        let script = out(&o);
        assert!(script.len() > 500, "{shell}: {} bytes", script.len());
        for v in verbs() {
            assert!(script.contains(&v), "{shell} completions lack {v}");
        }
    }
    let o = tw(&["completions", "tcsh"]);
    assert_eq!(o.status.code(), Some(2));
    assert!(out(&o).is_empty());
}

#[test]
fn the_manual_page_names_every_subcommand_and_writes_one_page_each() {
    let o = tw(&["manpage"]);
    assert_eq!(o.status.code(), Some(0), "{}", err(&o));
    let page = out(&o);
    // roff: the page starts with its title macro (groff_man(7))
    assert!(page.contains(".TH treewright 1"), "{}", &page[..200]);
    for v in verbs() {
        assert!(
            // roff escapes every hyphen (groff_char(7))
            page.contains(&format!("treewright\\-{}(1)", v.replace('-', "\\-"))),
            "page lacks {v}"
        );
    }
    let tmp = tempfile::tempdir().unwrap();
    let dir = tmp.path().join("man1");
    let o = tw(&["manpage", "--dir", dir.to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(0), "{}", err(&o));
    for v in verbs() {
        let p = dir.join(format!("treewright-{v}.1"));
        let text = std::fs::read_to_string(&p).unwrap();
        assert!(
            text.contains(&format!(".TH treewright-{v} 1")),
            "{}",
            p.display()
        );
    }
    assert!(dir.join("treewright.1").is_file());
}

/// One row of the README's exit-code table, as run here: the failing command line, the exit
/// code, and whether standard output stays empty.
struct Failure {
    verb: &'static str,
    args: Vec<String>,
    code: i32,
    stdout_empty: bool,
}

#[test]
fn every_subcommand_fails_as_the_readme_table_says() {
    let tmp = tempfile::tempdir().unwrap();
    let missing = tmp.path().join("missing").display().to_string();
    // a valid small project without sign-off
    let proj = tmp.path().join("proj");
    std::fs::create_dir(&proj).unwrap();
    common::write_valid(&proj);
    let p = proj.display().to_string();
    let o_ = tmp.path().join("o").display().to_string();
    let s = |v: &[&str]| v.iter().map(|x| x.to_string()).collect::<Vec<_>>();
    let mut rows = vec![];
    // bad input (exit 2, message on standard error, nothing on standard output)
    for verb in [
        "info", "audit", "undo", "verify", "diff", "suggest", "build", "queue",
    ] {
        rows.push(Failure {
            verb,
            args: s(&[verb, &missing]),
            code: 2,
            stdout_empty: true,
        });
    }
    rows.push(Failure {
        verb: "edit",
        args: s(&[
            "edit",
            &p,
            "rename",
            "succulent",
            "gift\tideas",
            "--author",
            "i",
        ]),
        code: 2,
        stdout_empty: true,
    });
    rows.push(Failure {
        verb: "apply",
        args: s(&["apply", &missing, "--out", &o_]),
        code: 2,
        stdout_empty: true,
    });
    rows.push(Failure {
        verb: "signoff",
        args: s(&["signoff", &missing, "--reviewer", "r"]),
        code: 2,
        stdout_empty: true,
    });
    rows.push(Failure {
        verb: "export",
        args: s(&["export", &missing, "--format", "csv", "--out", &o_]),
        code: 2,
        stdout_empty: true,
    });
    rows.push(Failure {
        verb: "sample",
        args: s(&["sample", "--out", &o_, "--synthetic", "0"]),
        code: 2,
        stdout_empty: true,
    });
    rows.push(Failure {
        verb: "completions",
        args: s(&["completions", "nosuchshell"]),
        code: 2,
        stdout_empty: true,
    });
    let nofile = tmp.path().join("missing.json").display().to_string();
    rows.push(Failure {
        verb: "merge-edits",
        args: s(&["merge-edits", &nofile, &nofile, &nofile]),
        code: 2,
        stdout_empty: true,
    });
    rows.push(Failure {
        verb: "resolve",
        args: s(&["resolve", &missing, "c1", "ours"]),
        code: 2,
        stdout_empty: true,
    });
    rows.push(Failure {
        verb: "fit",
        args: s(&["fit", &format!("{missing}.parquet"), "--out", &o_]),
        code: 2,
        stdout_empty: true,
    });
    // issue 23: the history verbs (a missing project is bad input)
    for verb in ["history", "redo"] {
        rows.push(Failure {
            verb,
            args: s(&[verb, &missing]),
            code: 2,
            stdout_empty: true,
        });
    }
    // a file where the folder should be
    let file = tmp.path().join("a-file");
    std::fs::write(&file, "x").unwrap();
    rows.push(Failure {
        verb: "manpage",
        args: s(&["manpage", "--dir", &file.join("sub").display().to_string()]),
        code: 2,
        stdout_empty: true,
    });
    // a check failed (exit 1); the demo has open warnings (its README lists the planted flaws)
    let demo = tmp.path().join("demo").display().to_string();
    let o = tw(&["sample", "--out", &demo]);
    assert_eq!(o.status.code(), Some(0), "{}", err(&o));
    rows.push(Failure {
        verb: "audit",
        args: s(&["audit", &demo, "--fail-on", "warning"]),
        code: 1,
        stdout_empty: false, // the report is still written
    });
    rows.push(Failure {
        verb: "verify",
        args: s(&["verify", &p]),
        code: 1,
        stdout_empty: false, // the verification report
    });
    rows.push(Failure {
        verb: "export",
        args: s(&[
            "export",
            &p,
            "--format",
            "csv",
            "--out",
            &o_,
            "--require-signoff",
        ]),
        code: 1,
        stdout_empty: true,
    });

    for r in &rows {
        let args: Vec<&str> = r.args.iter().map(String::as_str).collect();
        let o = tw(&args);
        assert_eq!(o.status.code(), Some(r.code), "{args:?}: {}", err(&o));
        assert_eq!(out(&o).is_empty(), r.stdout_empty, "{args:?}: {}", out(&o));
        if r.code == 2 {
            assert!(!err(&o).trim().is_empty(), "{args:?}: no message");
        }
    }
    // a usage error (clap) is exit 2 on standard error too
    let o = tw(&["info"]);
    assert_eq!(o.status.code(), Some(2));
    assert!(out(&o).is_empty() && !err(&o).is_empty());

    // every subcommand has a failure mode run above and a row in the README's table
    let readme =
        std::fs::read_to_string(Path::new(env!("CARGO_MANIFEST_DIR")).join("README.md")).unwrap();
    for v in verbs() {
        assert!(rows.iter().any(|r| r.verb == v), "no failure run for {v}");
        assert!(
            readme.contains(&format!("| `{v}` |")),
            "README's exit-code table has no row for {v}"
        );
    }
}
