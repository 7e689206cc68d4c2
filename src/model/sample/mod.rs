//! Generated projects: the Fernhollow Garden Supply demo and synthetic nested clusters.
//!
//! Both generators are deterministic: the same seed gives byte-identical files. Random
//! numbers come from xoshiro256++ and are turned into values with plain arithmetic and
//! `sqrt` only (normal deviates are Irwin–Hall sums of twelve uniforms), so the output does
//! not depend on the platform's `ln`/`exp`/`cos`.
//!
//! All Fernhollow data is invented: the garden centre, its shop tags and its shoppers. The
//! tags and shoppers are a data table, `fernhollow.tsv` beside this file (parsed by
//! `table`); the code here turns it into Gaussians and plants the flaws.

use std::collections::{BTreeMap, HashMap};
use std::path::{Path, PathBuf};

use rand::{Rng, SeedableRng};
use rand_xoshiro::Xoshiro256PlusPlus;

use super::phrase::{PhraseRecord, PhraseTable, id_from_label};
use super::project::{MANIFEST_NAME, ProjectWriter, UserRecord};
use super::tree::TreeFile;

mod synthetic;
mod table;

pub use synthetic::{SyntheticSpec, synthetic_gaussians, write_synthetic};
use table::{DemoTable, FERNHOLLOW_TSV};

/// Dimension of the demo embeddings.
pub const DEMO_DIM: usize = 32;
/// Seed of the demo generator.
pub const DEMO_SEED: u64 = 0x00fe_2b01_1047;
/// Display name of the demo project.
pub const DEMO_NAME: &str = "Fernhollow Garden Supply";
/// Label of the demo root tag.
pub const DEMO_ROOT: &str = "garden supplies";

/// A flaw planted in the demo tree for the audit to find.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct PlantedFlaw {
    /// "near-duplicate", "wrong-parent", "inverted-generality", "coverage-gap" or "unplaced".
    pub kind: &'static str,
    /// The phrase id the flaw is about.
    pub node: &'static str,
    /// The partner: duplicate partner, true parent, or the parent it is broader than.
    pub other: Option<&'static str>,
    /// One sentence for people.
    pub what: &'static str,
}

/// The flaws planted in the demo project (see `sample-projects/fernhollow/README.md`).
pub fn planted_flaws() -> Vec<PlantedFlaw> {
    vec![
        PlantedFlaw {
            kind: "near-duplicate",
            node: "drought-resistant",
            other: Some("drought-tolerant"),
            what: "\"drought resistant\" has nearly the same Gaussian as \"drought tolerant\" \
                   but sits directly under \"plants\" instead of beside it under \"perennials\"",
        },
        PlantedFlaw {
            kind: "wrong-parent",
            node: "bird-netting",
            other: Some("animal-deterrents"),
            what: "\"bird netting\" belongs under \"animal deterrents\" (pest control) but was \
                   placed under \"cushions and textiles\" (garden furniture)",
        },
        PlantedFlaw {
            kind: "inverted-generality",
            node: "outdoor-living",
            other: Some("parasols-and-shade"),
            what: "\"outdoor living\" is broader than its parent \"parasols and shade\"",
        },
        PlantedFlaw {
            kind: "coverage-gap",
            node: "gifts",
            other: None,
            what: "the children of \"gifts\" are narrow and leave most of its mass uncovered",
        },
        PlantedFlaw {
            kind: "unplaced",
            node: "hedgehog-house",
            other: None,
            what: "\"hedgehog house\" is a phrase but not in tree.json",
        },
        PlantedFlaw {
            kind: "unplaced",
            node: "rain-chain",
            other: None,
            what: "\"rain chain\" is a phrase but not in tree.json",
        },
        PlantedFlaw {
            kind: "unplaced",
            node: "grow-lights",
            other: None,
            what: "\"grow lights\" is a phrase but not in tree.json",
        },
    ]
}

/// Deterministic random source with arithmetic-only normal deviates.
struct Source(Xoshiro256PlusPlus);

impl Source {
    fn new(seed: u64) -> Self {
        Source(Xoshiro256PlusPlus::seed_from_u64(seed))
    }

    /// Uniform on [lo, hi).
    fn uniform(&mut self, lo: f64, hi: f64) -> f64 {
        lo + (hi - lo) * self.0.r#gen::<f64>()
    }

    /// Approximately standard normal: Irwin–Hall sum of twelve uniforms minus six
    /// (mean 0, variance 1, support ±6).
    fn normal(&mut self) -> f64 {
        let mut s = 0.0;
        for _ in 0..12 {
            s += self.0.r#gen::<f64>();
        }
        s - 6.0
    }

    /// A uniformly random permutation of 0..n (Fisher–Yates).
    fn permutation(&mut self, n: usize) -> Vec<usize> {
        let mut p: Vec<usize> = (0..n).collect();
        for i in (1..n).rev() {
            let j = self.0.gen_range(0..=i);
            p.swap(i, j);
        }
        p
    }
}

/// How a demo tag's Gaussian is drawn from its true parent's.
#[derive(Clone, Copy, PartialEq)]
enum Recipe {
    /// Offset along one signature axis, narrowed there, slightly narrowed elsewhere.
    Child,
    /// Like `Child` but much narrower everywhere (children of the coverage-gap parent).
    Narrow,
    /// Offset along its signature axis but broader than the parent in every axis.
    Broader,
}

/// One generated demo row.
struct DemoRow {
    label: String,
    mean: Vec<f64>,
    var: Vec<f64>,
}

/// Draw a child of (`mean`, `var`) with signature axis `axis` and sign `sign`.
fn demo_child(
    src: &mut Source,
    mean: &[f64],
    var: &[f64],
    axis: usize,
    sign: f64,
    recipe: Recipe,
) -> (Vec<f64>, Vec<f64>) {
    let d = mean.len();
    let (lo, hi) = match recipe {
        Recipe::Child => (0.90, 0.97),
        Recipe::Narrow => (0.62, 0.67),
        Recipe::Broader => (1.10, 1.14),
    };
    let shrink = src.uniform(lo, hi);
    let mut m = Vec::with_capacity(d);
    let mut v = Vec::with_capacity(d);
    for j in 0..d {
        let sd = var[j].sqrt();
        if j == axis {
            let along = src.uniform(1.7, 2.0);
            let narrow = match recipe {
                Recipe::Broader => shrink,
                _ => src.uniform(0.25, 0.35),
            };
            m.push(mean[j] + sign * along * sd);
            v.push(var[j] * narrow);
        } else {
            let jitter = src.uniform(0.95, 1.05);
            m.push(mean[j] + 0.1 * sd * src.normal());
            v.push(var[j] * shrink * jitter);
        }
    }
    (m, v)
}

/// Everything the demo consists of, in memory.
struct Demo {
    rows: Vec<DemoRow>,
    /// Placed parent id per row (None for the root and the unplaced tags).
    placed: Vec<Option<String>>,
    users: Vec<UserRecord>,
}

/// Draw the demo from its table.
fn build_demo(table: &DemoTable) -> Demo {
    let d = DEMO_DIM;
    let mut src = Source::new(DEMO_SEED);
    let mut rows: Vec<DemoRow> = Vec::new();
    let mut placed: Vec<Option<String>> = Vec::new();
    let root_mean: Vec<f64> = (0..d).map(|_| 0.3 * src.normal()).collect();
    let root_var: Vec<f64> = (0..d).map(|_| src.uniform(0.8, 1.25)).collect();
    rows.push(DemoRow {
        label: DEMO_ROOT.into(),
        mean: root_mean,
        var: root_var,
    });
    placed.push(None);

    let flaws = planted_flaws();
    let unplaced: Vec<&str> = flaws
        .iter()
        .filter(|f| f.kind == "unplaced")
        .map(|f| f.node)
        .collect();
    let moved: HashMap<&str, &str> = [("bird-netting", "cushions-and-textiles")].into();
    let gap_parent = "gifts";
    let broader = "outdoor-living";

    // children of one parent: distinct signature axes, alternating signs
    let add_children =
        |src: &mut Source, parent: usize, labels: &[&str], rows: &mut Vec<DemoRow>| {
            let axes = src.permutation(d);
            let parent_id = id_from_label(&rows[parent].label);
            let mut out = Vec::with_capacity(labels.len());
            for (k, label) in labels.iter().enumerate() {
                let id = id_from_label(label);
                let recipe = if id == broader {
                    Recipe::Broader
                } else if parent_id == gap_parent {
                    Recipe::Narrow
                } else {
                    Recipe::Child
                };
                let sign = if src.uniform(0.0, 1.0) < 0.5 {
                    -1.0
                } else {
                    1.0
                };
                let (m, v) = demo_child(
                    src,
                    &rows[parent].mean,
                    &rows[parent].var,
                    axes[k % d],
                    sign,
                    recipe,
                );
                rows.push(DemoRow {
                    label: (*label).into(),
                    mean: m,
                    var: v,
                });
                out.push(rows.len() - 1);
            }
            out
        };

    let cat_labels: Vec<&str> = table.categories.iter().map(|c| c.label).collect();
    let cats = add_children(&mut src, 0, &cat_labels, &mut rows);
    placed.extend(cats.iter().map(|_| Some(id_from_label(DEMO_ROOT))));
    for (ci, cat) in table.categories.iter().enumerate() {
        let sub_labels: Vec<&str> = cat.subs.iter().map(|s| s.label).collect();
        let sub_rows = add_children(&mut src, cats[ci], &sub_labels, &mut rows);
        placed.extend(sub_rows.iter().map(|_| Some(id_from_label(cat.label))));
        for (si, sub) in cat.subs.iter().enumerate() {
            let leaf_rows = add_children(&mut src, sub_rows[si], &sub.tags, &mut rows);
            for &r in &leaf_rows {
                let id = id_from_label(&rows[r].label);
                placed.push(if unplaced.contains(&id.as_str()) {
                    None
                } else if let Some(p) = moved.get(id.as_str()) {
                    Some((*p).to_string())
                } else {
                    Some(id_from_label(sub.label))
                });
            }
        }
    }

    // the near-duplicate: a jittered copy of "drought tolerant", placed one level higher
    let twin = rows
        .iter()
        .position(|r| r.label == "drought tolerant")
        .map(|i| (rows[i].mean.clone(), rows[i].var.clone()));
    if let Some((m0, v0)) = twin {
        let m = m0
            .iter()
            .zip(&v0)
            .map(|(m, v)| m + 0.05 * v.sqrt() * src.normal())
            .collect();
        let v = v0.iter().map(|v| v * src.uniform(0.97, 1.03)).collect();
        rows.push(DemoRow {
            label: "drought resistant".into(),
            mean: m,
            var: v,
        });
        placed.push(Some("plants".into()));
    }

    let users = table
        .shoppers
        .iter()
        .filter_map(|&table::Shopper { id, label, branch }| {
            let b = rows.iter().find(|r| r.label == branch)?;
            let mean = b
                .mean
                .iter()
                .zip(&b.var)
                .map(|(m, v)| f32_round(m + 0.15 * v.sqrt() * src.normal()))
                .collect();
            let variance = b
                .var
                .iter()
                .map(|v| f32_round(v * src.uniform(0.75, 0.9)))
                .collect();
            Some(UserRecord {
                id: id.into(),
                label: label.into(),
                mean,
                variance,
            })
        })
        .collect();
    Demo {
        rows,
        placed,
        users,
    }
}

/// Round through f32 so users.json carries the same precision as the embeddings.
fn f32_round(x: f64) -> f64 {
    x as f32 as f64
}

fn demo_tables(demo: &Demo) -> std::io::Result<(PhraseTable, Vec<f32>, Vec<f32>, TreeFile)> {
    let records: Vec<PhraseRecord> = demo
        .rows
        .iter()
        .map(|r| PhraseRecord {
            id: Some(id_from_label(&r.label)),
            label: r.label.clone(),
        })
        .collect();
    let phrases = PhraseTable::from_records(&records).map_err(std::io::Error::other)?;
    let means: Vec<f32> = demo
        .rows
        .iter()
        .flat_map(|r| r.mean.iter().map(|&x| x as f32))
        .collect();
    let vars: Vec<f32> = demo
        .rows
        .iter()
        .flat_map(|r| r.var.iter().map(|&x| x as f32))
        .collect();
    let mut parent = BTreeMap::new();
    for (r, p) in demo.rows.iter().zip(&demo.placed) {
        if let Some(p) = p {
            parent.insert(id_from_label(&r.label), p.clone());
        }
    }
    let tree = TreeFile {
        root: id_from_label(DEMO_ROOT),
        parent,
    };
    Ok((phrases, means, vars, tree))
}

/// Write the Fernhollow Garden Supply demo project into `dir` (created if missing).
///
/// The manifest names `overrides.json` but the file is not written: a fresh project has
/// an empty override layer.
pub fn write_demo(dir: &Path) -> std::io::Result<()> {
    let table = table::parse(FERNHOLLOW_TSV).map_err(std::io::Error::other)?;
    let demo = build_demo(&table);
    let (phrases, means, vars, tree) = demo_tables(&demo)?;
    ProjectWriter {
        name: DEMO_NAME,
        phrases: &phrases,
        dim: DEMO_DIM,
        means: &means,
        variances: &vars,
        users: &demo.users,
        tree: Some(&tree),
    }
    .write(dir)
}

/// The demo project folder the workbench opens: a working copy written once into
/// `$XDG_DATA_HOME/treewright/demo` (or `~/.local/share/treewright/demo`), so that a user's
/// saved edits never change the committed `sample-projects/fernhollow`. An existing copy is
/// left alone (it holds the user's override layer).
///
/// When no data folder can be found or written, the repository's folder is returned.
pub fn demo_dir() -> PathBuf {
    let bundled = Path::new(env!("CARGO_MANIFEST_DIR")).join("sample-projects/fernhollow");
    let base = std::env::var_os("XDG_DATA_HOME")
        .map(PathBuf::from)
        .filter(|p| p.is_absolute())
        .or_else(|| std::env::var_os("HOME").map(|h| PathBuf::from(h).join(".local/share")));
    demo_dir_from(bundled, base)
}

/// [`demo_dir`] with the repository folder and the data folder given.
fn demo_dir_from(bundled: PathBuf, data_home: Option<PathBuf>) -> PathBuf {
    let Some(base) = data_home else {
        return bundled;
    };
    let dir = base.join("treewright/demo");
    if dir.join(MANIFEST_NAME).is_file() || write_demo(&dir).is_ok() {
        dir
    } else {
        bundled
    }
}

#[cfg(test)]
mod tests {
    use std::fs;

    use super::*;
    use crate::model::Project;

    #[test]
    fn irwin_hall_normal_has_unit_moments() {
        // Irwin–Hall distribution of twelve uniforms minus six: mean 0, variance 12/12 = 1,
        // fourth central moment 3 − 6/(5·12) = 2.9 (standard result for sums of uniforms,
        // e.g. Johnson, Kotz & Balakrishnan, Continuous Univariate Distributions, vol. 2;
        // the kurtosis value is from memory of that formula)
        let mut src = Source::new(1);
        let n = 200_000;
        let xs: Vec<f64> = (0..n).map(|_| src.normal()).collect();
        let mean = xs.iter().sum::<f64>() / n as f64;
        let var = xs.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / n as f64;
        let m4 = xs.iter().map(|x| (x - mean).powi(4)).sum::<f64>() / n as f64;
        assert!(mean.abs() < 0.01, "{mean}");
        assert!((var - 1.0).abs() < 0.01, "{var}");
        assert!((m4 - 2.9).abs() < 0.06, "{m4}");
        assert!(xs.iter().all(|x| x.abs() <= 6.0));
    }

    #[test]
    fn permutation_is_a_permutation() {
        let mut src = Source::new(9);
        let mut p = src.permutation(32);
        p.sort_unstable();
        assert_eq!(p, (0..32).collect::<Vec<_>>());
    }

    #[test]
    fn demo_has_unique_ids_and_every_tag_placed_or_flagged() {
        let demo = build_demo(&table::parse(FERNHOLLOW_TSV).unwrap());
        let (phrases, means, vars, tree) = demo_tables(&demo).unwrap();
        assert_eq!(means.len(), phrases.len() * DEMO_DIM);
        assert_eq!(vars.len(), phrases.len() * DEMO_DIM);
        assert!(vars.iter().all(|&v| v > 0.0 && v.is_finite()));
        let flagged = planted_flaws()
            .iter()
            .filter(|f| f.kind == "unplaced")
            .count();
        assert_eq!(tree.parent.len() + 1 + flagged, phrases.len());
        for (c, p) in &tree.parent {
            assert!(
                phrases.get(c).is_some() && phrases.get(p).is_some(),
                "{c} -> {p}"
            );
        }
    }

    #[test]
    fn demo_dir_writes_a_working_copy_once() {
        let repo = tempfile::tempdir().unwrap();
        let data = tempfile::tempdir().unwrap();
        // the demo is written into the data folder (even when the repository has one) and loads
        fs::write(repo.path().join(MANIFEST_NAME), b"{}").unwrap();
        let missing = repo.path().to_path_buf();
        let got = demo_dir_from(missing.clone(), Some(data.path().to_path_buf()));
        assert_eq!(got, data.path().join("treewright/demo"));
        Project::load(&got).unwrap();
        // a second call finds it and leaves it alone
        let stamp = fs::metadata(got.join("means.npy"))
            .unwrap()
            .modified()
            .unwrap();
        let again = demo_dir_from(missing.clone(), Some(data.path().to_path_buf()));
        assert_eq!(again, got);
        let stamp2 = fs::metadata(got.join("means.npy"))
            .unwrap()
            .modified()
            .unwrap();
        assert_eq!(stamp, stamp2);
        // the working copy keeps the user's edits: an override file there is not touched
        fs::write(got.join("overrides.json"), b"kept").unwrap();
        demo_dir_from(missing.clone(), Some(data.path().to_path_buf()));
        assert_eq!(fs::read(got.join("overrides.json")).unwrap(), b"kept");
        // no data folder at all: falls back to the repository path
        assert_eq!(demo_dir_from(missing.clone(), None), missing);
    }

    #[test]
    fn demo_from_the_table_writes_the_committed_project() {
        // fernhollow.tsv, parsed, gives the same demo as before it became a data file: the
        // written project equals the committed one byte for byte
        let dir = tempfile::tempdir().unwrap();
        write_demo(dir.path()).unwrap();
        let committed = Path::new(env!("CARGO_MANIFEST_DIR")).join("sample-projects/fernhollow");
        for f in [
            "project.json",
            "phrases.json",
            "means.npy",
            "variances.npy",
            "users.json",
            "tree.json",
        ] {
            assert!(
                fs::read(dir.path().join(f)).unwrap() == fs::read(committed.join(f)).unwrap(),
                "{f} differs from sample-projects/fernhollow"
            );
        }
    }
}
