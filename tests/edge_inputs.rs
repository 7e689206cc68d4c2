//! Inputs users bring that had never been tried (issue 17, part 4): a `tree.csv` with a
//! byte-order mark and CRLF line ends, paths escaping through symbolic links, CSV export of
//! labels with commas and quotes (read back with the `csv` crate's generic reader),
//! dimension above 64, variances at the floor and near-singular full covariances.

use std::fs;
use std::path::Path;
use std::process::Command;

use treewright::model::gaussian::{
    Gaussians, OwnedGaussian, bhattacharyya_distance, hellinger, kl, wasserstein2,
};
use treewright::model::{Project, Workspace};

mod common;

fn bin() -> Command {
    Command::new(env!("CARGO_BIN_EXE_treewright"))
}

fn set_manifest(dir: &Path, from: &str, to: &str) {
    let m = dir.join("project.json");
    let text = fs::read_to_string(&m).unwrap();
    assert!(text.contains(from), "{text}");
    fs::write(&m, text.replace(from, to)).unwrap();
}

fn parent_of(p: &Project, child: &str) -> String {
    let t = p.tree.as_ref().unwrap();
    let c = p.phrases.find(child).unwrap();
    p.phrases.id(t.parent(c).unwrap()).to_string()
}

#[test]
fn tree_csv_with_a_byte_order_mark_and_crlf_loads() {
    let d = common::project();
    set_manifest(d.path(), "\"tree.json\"", "\"tree.csv\"");
    // as a spreadsheet program saves "CSV UTF-8": BOM, CRLF, a quoted field
    fs::write(
        d.path().join("tree.csv"),
        "\u{feff}child,parent\r\nsucculent,plants\r\n\"shade-loving\",plants\r\nplants,\r\n",
    )
    .unwrap();
    let p = Project::load(d.path()).unwrap_or_else(|e| panic!("{e}"));
    assert_eq!(parent_of(&p, "succulent"), "plants");
    assert_eq!(parent_of(&p, "shade-loving"), "plants");
    let t = p.tree.as_ref().unwrap();
    assert_eq!(p.phrases.id(t.root()), "plants");
    // CRLF alone (no BOM) as well
    fs::write(
        d.path().join("tree.csv"),
        "child,parent\r\nsucculent,plants\r\nshade-loving,succulent\r\n",
    )
    .unwrap();
    let p = Project::load(d.path()).unwrap_or_else(|e| panic!("{e}"));
    assert_eq!(parent_of(&p, "shade-loving"), "succulent");
}

#[cfg(unix)]
#[test]
fn paths_escaping_through_symbolic_links_are_refused() {
    use std::os::unix::fs::symlink;
    let outside = tempfile::tempdir().unwrap();
    fs::copy(
        common::project().path().join("means.npy"),
        outside.path().join("means.npy"),
    )
    .unwrap();
    // a file link pointing outside the project
    let d = common::project();
    fs::remove_file(d.path().join("means.npy")).unwrap();
    symlink(outside.path().join("means.npy"), d.path().join("means.npy")).unwrap();
    let e = Project::load(d.path()).unwrap_err().to_string();
    assert!(
        e.contains("\"means.npy\" resolves outside the project folder")
            && e.contains("project.json"),
        "{e}"
    );
    // a folder link pointing outside, with an innocent-looking relative path through it
    let d = common::project();
    symlink(outside.path(), d.path().join("data")).unwrap();
    set_manifest(d.path(), "\"means.npy\"", "\"data/means.npy\"");
    let e = Project::load(d.path()).unwrap_err().to_string();
    assert!(
        e.contains("\"data/means.npy\" resolves outside the project folder"),
        "{e}"
    );
    // the CLI refuses it too, with the input-error exit code
    let out = bin().arg("info").arg(d.path()).output().unwrap();
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("resolves outside"));
    // a link that stays inside the folder is fine
    let d = common::project();
    fs::create_dir(d.path().join("arrays")).unwrap();
    fs::rename(d.path().join("means.npy"), d.path().join("arrays/m.npy")).unwrap();
    symlink("arrays/m.npy", d.path().join("means.npy")).unwrap();
    Project::load(d.path()).unwrap_or_else(|e| panic!("{e}"));
}

/// Labels with commas, double quotes, semicolons and non-ASCII text survive CSV export: the
/// file is read back with the `csv` crate's generic reader (not the project's own parser)
/// and every field is compared. A newline cannot enter a label (refused with the position),
/// so the export never has to carry one.
#[test]
fn csv_export_of_awkward_labels_reads_back_with_the_csv_crate() {
    let d = common::project();
    let awkward = [
        ("succulent", "pots, \"terracotta\" and glazed"),
        ("shade-loving", "seed;trays \"deep\", 40 cm — frost-proof"),
    ];
    let mut ws = Workspace::open(d.path()).unwrap();
    for (id, label) in awkward {
        ws.append(
            treewright::model::edit::Edit::Rename {
                node: id.into(),
                label: label.into(),
                language: None,
            },
            "t",
            None,
        )
        .unwrap();
    }
    let out_file = d.path().join("out.csv");
    let out = bin()
        .arg("export")
        .arg(d.path())
        .args(["--format", "csv", "--out"])
        .arg(&out_file)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let mut rd = csv::ReaderBuilder::new()
        .has_headers(true)
        .from_path(&out_file)
        .unwrap();
    let headers: Vec<String> = rd.headers().unwrap().iter().map(String::from).collect();
    assert_eq!(
        headers,
        ["id", "label", "parent", "depth", "aliases", "status"]
    );
    let rows: Vec<csv::StringRecord> = rd.records().map(|r| r.unwrap()).collect();
    assert_eq!(rows.len(), 3);
    for (id, label) in awkward {
        let r = rows.iter().find(|r| &r[0] == id).unwrap();
        assert_eq!(&r[1], label);
        assert_eq!(&r[2], "plants");
        assert_eq!(&r[3], "1");
        assert_eq!(r.len(), 6);
    }
    // a newline in a label is refused, naming the character
    let out = bin()
        .arg("edit")
        .arg(d.path())
        .args(["rename", "succulent", "two\nlines", "--author", "t"])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
    assert!(
        String::from_utf8_lossy(&out.stderr).contains("control character U+000A"),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
}

/// Per-dimension closed form of KL between diagonal Gaussians (Kullback 1959; the sum over
/// independent dimensions, common practice), written out here in plain f64.
fn kl_diag_reference(mp: &[f64], vp: &[f64], mq: &[f64], vq: &[f64]) -> f64 {
    (0..mp.len())
        .map(|k| {
            let r = vp[k] / vq[k];
            0.5 * (r + (mq[k] - mp[k]).powi(2) / vq[k] - 1.0 - r.ln())
        })
        .sum()
}

#[test]
fn dimension_above_64_loads_audits_and_builds() {
    let t = tempfile::tempdir().unwrap();
    let dir = t.path().join("wide");
    let out = bin()
        .args([
            "sample",
            "--synthetic",
            "400",
            "--dim",
            "130",
            "--depth",
            "2",
        ])
        .arg("--out")
        .arg(&dir)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let p = Project::load(&dir).unwrap();
    assert_eq!(p.gaussians.dim(), 130);
    // KL over 130 dimensions against the per-dimension sum written out here
    for (a, b) in [(0usize, 1usize), (5, 300), (399, 17)] {
        let f = |i: usize| -> (Vec<f64>, Vec<f64>) {
            (
                p.gaussians.mean(i).iter().map(|&x| x as f64).collect(),
                p.gaussians.variances(i).iter().map(|&x| x as f64).collect(),
            )
        };
        let ((ma, va), (mb, vb)) = (f(a), f(b));
        let want = kl_diag_reference(&ma, &va, &mb, &vb);
        let got = kl(&p.gaussians.get(a), &p.gaussians.get(b));
        assert!(
            (got - want).abs() <= 1e-9 * want.abs().max(1.0),
            "{a}-{b}: {got} vs {want}"
        );
    }
    for verb in [["audit"].as_slice(), &["build", "--max-depth", "2"]] {
        let out = bin().args(verb).arg(&dir).output().unwrap();
        assert!(
            matches!(out.status.code(), Some(0) | Some(1)),
            "{verb:?}: {}",
            String::from_utf8_lossy(&out.stderr)
        );
    }
    let out = bin()
        .args(["audit", "--format", "json"])
        .arg(&dir)
        .output()
        .unwrap();
    let text = String::from_utf8_lossy(&out.stdout);
    let v: serde_json::Value = serde_json::from_str(&text).unwrap();
    assert!(v.is_object());
}

#[test]
fn variances_at_and_below_the_floor() {
    // default floor 1e-6: one row exactly at it, one below it (raised), one far above
    let g = Gaussians::from_diagonal(
        3,
        2,
        vec![0.0, 0.0, 0.0, 0.0, 0.0, 0.0],
        vec![1e-6, 1e-6, 1e-9, 1e-12, 1.0, 1.0],
        1e-6,
    )
    .unwrap();
    assert_eq!(g.variances(0), g.variances(1), "raised to the floor");
    for i in 0..3 {
        assert!(g.log_det(i).is_finite() && g.entropy(i).is_finite());
    }
    let (a, c) = (g.get(0), g.get(2));
    // KL(a ‖ c) and KL(c ‖ a) against the per-dimension closed form
    let v0 = g.variances(0)[0] as f64;
    let want_ac = kl_diag_reference(&[0.0, 0.0], &[v0, v0], &[0.0, 0.0], &[1.0, 1.0]);
    let want_ca = kl_diag_reference(&[0.0, 0.0], &[1.0, 1.0], &[0.0, 0.0], &[v0, v0]);
    assert!(
        (kl(&a, &c) - want_ac).abs() <= 1e-9 * want_ac,
        "{}",
        kl(&a, &c)
    );
    assert!(
        (kl(&c, &a) - want_ca).abs() <= 1e-9 * want_ca,
        "{}",
        kl(&c, &a)
    );
    assert!(
        want_ca > 9.0e5,
        "a broad phrase never fits in a floored one"
    );
    for x in [
        bhattacharyya_distance(&a, &c),
        hellinger(&a, &c),
        wasserstein2(&a, &c),
    ] {
        assert!(x.is_finite() && x >= 0.0, "{x}");
    }
    // zero is an error, not floored
    let e = Gaussians::from_diagonal(1, 2, vec![0.0, 0.0], vec![0.0, 1.0], 1e-6).unwrap_err();
    assert!(e.to_string().contains("row 0"), "{e}");
}

#[test]
fn near_singular_full_covariances() {
    // correlation 1 − 1e-9: positive definite, condition number ≈ 2e9
    let eps = 1e-9;
    let near = OwnedGaussian::full(&[0.0, 0.0], &[1.0, 1.0 - eps, 1.0 - eps, 1.0]).unwrap();
    let unit = OwnedGaussian::full(&[0.0, 0.0], &[1.0, 0.0, 0.0, 1.0]).unwrap();
    // ln det = ln(1 − (1 − ε)²) = ln(2ε − ε²), written out (from memory: det of [[1, r], [r, 1]])
    let want_ld = (2.0 * eps - eps * eps).ln();
    assert!(
        (near.log_det - want_ld).abs() < 1e-4,
        "{} vs {want_ld}",
        near.log_det
    );
    let (n, u) = (near.view(), unit.view());
    // KL(near ‖ unit) = ½ (tr Σ − 2 − ln det Σ) = ½ (−ln det Σ) here (trace 2)
    let want = 0.5 * (2.0 - 2.0 - want_ld);
    assert!((kl(&n, &u) - want).abs() < 1e-4, "{} vs {want}", kl(&n, &u));
    // KL(unit ‖ near) = ½ (tr Σ⁻¹ − 2 + ln det Σ); tr Σ⁻¹ = 2 / det Σ
    let det = want_ld.exp();
    let want_rev = 0.5 * (2.0 / det - 2.0 + want_ld);
    let got_rev = kl(&u, &n);
    assert!(
        got_rev.is_finite() && (got_rev - want_rev).abs() <= 1e-3 * want_rev,
        "{got_rev} vs {want_rev}"
    );
    for x in [
        bhattacharyya_distance(&n, &u),
        hellinger(&n, &u),
        wasserstein2(&n, &u),
    ] {
        assert!(x.is_finite() && x >= 0.0, "{x}");
    }
    // exactly singular: refused with the row and the pivot, not a NaN later
    let e = Gaussians::from_full(1, 2, vec![0.0, 0.0], vec![1.0, 1.0, 1.0, 1.0], 1e-6)
        .unwrap_err()
        .to_string();
    assert!(e.contains("row 0") && e.contains("pivot"), "{e}");
}
