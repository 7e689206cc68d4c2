//! Generated projects: the Fernhollow Garden Supply demo and synthetic nested clusters.
//!
//! Both generators are deterministic: the same seed gives byte-identical files. Random
//! numbers come from xoshiro256++ and are turned into values with plain arithmetic and
//! `sqrt` only (normal deviates are Irwin–Hall sums of twelve uniforms), so the output does
//! not depend on the platform's `ln`/`exp`/`cos`.
//!
//! All Fernhollow data is invented: the garden centre, its shop tags and its shoppers.

use std::collections::{BTreeMap, HashMap};
use std::path::{Path, PathBuf};

use rand::{Rng, SeedableRng};
use rand_xoshiro::Xoshiro256PlusPlus;

use super::gaussian::Gaussians;
use super::phrase::{PhraseRecord, PhraseTable, id_from_label};
use super::project::{MANIFEST_NAME, ProjectWriter, UserRecord};
use super::tree::TreeFile;

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

type Sub = (&'static str, &'static [&'static str]);

/// The true hierarchy of the demo: category → sub-category → leaf tags.
const CATALOGUE: &[(&str, &[Sub])] = &[
    (
        "plants",
        &[
            (
                "houseplants",
                &[
                    "trailing houseplant",
                    "pet safe houseplant",
                    "low light houseplant",
                    "air purifying plant",
                    "indoor fern",
                    "prayer plant",
                    "peace lily",
                    "spider plant",
                    "snake plant",
                    "grow lights",
                ],
            ),
            (
                "succulents and cacti",
                &[
                    "succulent",
                    "cactus",
                    "echeveria",
                    "aloe",
                    "jade plant",
                    "living stones",
                    "hardy succulent",
                    "succulent wall kit",
                ],
            ),
            (
                "shrubs",
                &[
                    "evergreen shrub",
                    "flowering shrub",
                    "hydrangea",
                    "lavender",
                    "dwarf conifer",
                    "box hedging",
                    "shrub rose",
                    "camellia",
                ],
            ),
            (
                "perennials",
                &[
                    "shade loving",
                    "drought tolerant",
                    "hosta",
                    "hardy geranium",
                    "salvia",
                    "ornamental grass",
                    "bee friendly",
                    "long flowering",
                    "slug resistant",
                ],
            ),
            (
                "climbers",
                &[
                    "clematis",
                    "climbing rose",
                    "honeysuckle",
                    "wisteria",
                    "ivy",
                    "passion flower",
                    "self clinging climber",
                ],
            ),
            (
                "fruit and vegetable plants",
                &[
                    "tomato plant",
                    "strawberry plant",
                    "blueberry bush",
                    "fruit tree",
                    "herb plant",
                    "chilli plant",
                    "seed potatoes",
                    "asparagus crowns",
                ],
            ),
            (
                "seeds and bulbs",
                &[
                    "wildflower seed mix",
                    "spring flowering bulbs",
                    "autumn planting bulbs",
                    "vegetable seeds",
                    "heirloom seeds",
                    "microgreens",
                    "lawn seed",
                    "sweet pea seeds",
                ],
            ),
        ],
    ),
    (
        "tools",
        &[
            (
                "hand tools",
                &[
                    "trowel",
                    "hand fork",
                    "dibber",
                    "pruning knife",
                    "daisy grubber",
                    "bulb planter",
                    "widger",
                ],
            ),
            (
                "cutting tools",
                &[
                    "secateurs",
                    "loppers",
                    "hedge shears",
                    "pruning saw",
                    "topiary shears",
                    "grass shears",
                ],
            ),
            (
                "digging tools",
                &[
                    "spade",
                    "border fork",
                    "soil rake",
                    "dutch hoe",
                    "edging iron",
                    "mattock",
                ],
            ),
            (
                "power tools",
                &[
                    "cordless lawnmower",
                    "hedge trimmer",
                    "leaf blower",
                    "grass trimmer",
                    "garden shredder",
                    "spare battery pack",
                ],
            ),
            (
                "tool care and storage",
                &[
                    "sharpening stone",
                    "tool oil",
                    "tool rack",
                    "potting bench",
                    "tool bag",
                    "shed wall hooks",
                ],
            ),
            (
                "gloves and workwear",
                &[
                    "gardening gloves",
                    "thorn proof gloves",
                    "foam kneeler",
                    "knee pads",
                    "wellington boots",
                    "garden apron",
                ],
            ),
        ],
    ),
    (
        "compost and soil",
        &[
            (
                "composts",
                &[
                    "peat free compost",
                    "multi purpose compost",
                    "seed and cutting compost",
                    "ericaceous compost",
                    "houseplant compost",
                    "cactus compost",
                    "container compost",
                ],
            ),
            (
                "soil improvers",
                &[
                    "well rotted manure",
                    "leaf mould",
                    "soil conditioner",
                    "screened topsoil",
                    "spent mushroom compost",
                    "biochar",
                ],
            ),
            (
                "mulches",
                &[
                    "bark mulch",
                    "slate chippings",
                    "wool mulch",
                    "gravel mulch",
                    "straw mulch",
                ],
            ),
            (
                "fertilisers",
                &[
                    "tomato feed",
                    "slow release fertiliser",
                    "liquid seaweed feed",
                    "bone meal",
                    "rose feed",
                    "organic fertiliser",
                    "lawn feed",
                ],
            ),
            (
                "home composting",
                &[
                    "compost bin",
                    "wormery",
                    "compost accelerator",
                    "kitchen caddy",
                    "hot composter",
                    "leaf sack",
                ],
            ),
            (
                "growing media additives",
                &[
                    "perlite",
                    "vermiculite",
                    "horticultural grit",
                    "coir block",
                    "sharp sand",
                ],
            ),
        ],
    ),
    (
        "pest control",
        &[
            (
                "slug and snail control",
                &[
                    "wildlife friendly slug pellets",
                    "copper tape",
                    "wool slug barrier",
                    "slug nematodes",
                    "slug collar",
                    "snail trap",
                ],
            ),
            (
                "insect control",
                &[
                    "aphid spray",
                    "yellow sticky traps",
                    "insect mesh",
                    "vine weevil treatment",
                    "ladybird larvae",
                    "ant bait station",
                ],
            ),
            (
                "animal deterrents",
                &[
                    "bird netting",
                    "cat repeller",
                    "fox deterrent",
                    "scarecrow",
                    "fruit cage",
                    "ultrasonic deterrent",
                ],
            ),
            (
                "disease control",
                &[
                    "fungicide",
                    "blight resistant",
                    "mildew treatment",
                    "plant tonic",
                    "pruning sealant",
                ],
            ),
            (
                "weed control",
                &[
                    "weed membrane",
                    "path weedkiller",
                    "flame weeder",
                    "ground cover fabric",
                    "patio knife",
                ],
            ),
            (
                "organic pest control",
                &[
                    "companion planting",
                    "natural predators",
                    "organic insecticide",
                    "garlic spray",
                    "pheromone trap",
                ],
            ),
        ],
    ),
    (
        "garden furniture",
        &[
            (
                "seating",
                &[
                    "garden bench",
                    "folding chair",
                    "sun lounger",
                    "hammock",
                    "swing seat",
                    "deck chair",
                    "rocking chair",
                ],
            ),
            (
                "tables",
                &[
                    "bistro set",
                    "dining table",
                    "coffee table",
                    "picnic bench",
                    "side table",
                ],
            ),
            (
                "parasols and shade",
                &[
                    "parasol",
                    "parasol base",
                    "gazebo",
                    "shade sail",
                    "pergola",
                    "cantilever parasol",
                    "outdoor living",
                ],
            ),
            (
                "cushions and textiles",
                &[
                    "seat cushion",
                    "outdoor rug",
                    "weatherproof cushion",
                    "throw blanket",
                    "furniture cover",
                ],
            ),
            (
                "outdoor heating and lighting",
                &[
                    "fire pit",
                    "chiminea",
                    "patio heater",
                    "solar lights",
                    "festoon lights",
                    "lanterns",
                ],
            ),
            (
                "furniture materials",
                &[
                    "teak furniture",
                    "rattan furniture",
                    "metal furniture",
                    "recycled plastic furniture",
                    "acacia wood furniture",
                ],
            ),
        ],
    ),
    (
        "watering",
        &[
            (
                "hoses and reels",
                &[
                    "garden hose",
                    "hose reel",
                    "expanding hose",
                    "hose connector",
                    "spray gun",
                    "soaker hose",
                ],
            ),
            (
                "watering cans",
                &[
                    "metal watering can",
                    "indoor watering can",
                    "watering can rose",
                    "long spout watering can",
                    "childrens watering can",
                ],
            ),
            (
                "irrigation systems",
                &[
                    "drip irrigation kit",
                    "micro sprinkler",
                    "water timer",
                    "self watering pots",
                    "irrigation stakes",
                    "capillary matting",
                ],
            ),
            (
                "sprinklers",
                &[
                    "oscillating sprinkler",
                    "rotating sprinkler",
                    "pulse sprinkler",
                    "sprinkler hose",
                ],
            ),
            (
                "water storage",
                &[
                    "water butt",
                    "rain diverter",
                    "water butt stand",
                    "rainwater tank",
                    "water butt tap",
                    "rain chain",
                ],
            ),
        ],
    ),
    (
        "seasonal",
        &[
            (
                "spring",
                &[
                    "seed sowing kit",
                    "spring bedding plants",
                    "early potatoes",
                    "propagator",
                    "lawn repair kit",
                ],
            ),
            (
                "summer",
                &[
                    "summer bedding",
                    "hanging basket",
                    "citronella candles",
                    "pond plants",
                    "sun shade netting",
                ],
            ),
            (
                "autumn",
                &[
                    "leaf rake",
                    "bulb planting kit",
                    "autumn planters",
                    "lawn scarifier",
                    "leaf grabbers",
                ],
            ),
            (
                "winter",
                &[
                    "horticultural fleece",
                    "cloche",
                    "cut christmas tree",
                    "door wreath",
                    "frost protection jacket",
                    "heated propagator",
                ],
            ),
            (
                "wildlife gardening",
                &[
                    "bird feeder",
                    "bird bath",
                    "bee hotel",
                    "hedgehog house",
                    "nest box",
                    "pond liner",
                    "wildflower turf",
                ],
            ),
            (
                "gifts",
                &[
                    "garden gift voucher",
                    "gardening gift set",
                    "engraved trowel",
                    "seed gift tin",
                    "kids growing kit",
                ],
            ),
        ],
    ),
];

/// Shopper profiles: id, label, preferred branch (phrase label).
const SHOPPERS: &[(&str, &str, &str)] = &[
    (
        "u-balcony-grower",
        "balcony grower: small pots, succulents, little space",
        "succulents and cacti",
    ),
    (
        "u-wildlife-gardener",
        "wildlife gardener: bird feeders, bee hotels, ponds",
        "wildlife gardening",
    ),
    (
        "u-shade-garden-owner",
        "shade garden owner: hostas, ferns, woodland borders",
        "perennials",
    ),
    (
        "u-allotment-veteran",
        "allotment veteran: vegetables, fruit, digging",
        "fruit and vegetable plants",
    ),
    (
        "u-new-homeowner",
        "new homeowner: furnishing a first patio",
        "garden furniture",
    ),
];

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

fn build_demo() -> Demo {
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

    let cat_labels: Vec<&str> = CATALOGUE.iter().map(|c| c.0).collect();
    let cats = add_children(&mut src, 0, &cat_labels, &mut rows);
    placed.extend(cats.iter().map(|_| Some(id_from_label(DEMO_ROOT))));
    for (ci, &(cat, subs)) in CATALOGUE.iter().enumerate() {
        let sub_labels: Vec<&str> = subs.iter().map(|s| s.0).collect();
        let sub_rows = add_children(&mut src, cats[ci], &sub_labels, &mut rows);
        placed.extend(sub_rows.iter().map(|_| Some(id_from_label(cat))));
        for (si, &(sub, leaves)) in subs.iter().enumerate() {
            let leaf_rows = add_children(&mut src, sub_rows[si], leaves, &mut rows);
            for &r in &leaf_rows {
                let id = id_from_label(&rows[r].label);
                placed.push(if unplaced.contains(&id.as_str()) {
                    None
                } else if let Some(p) = moved.get(id.as_str()) {
                    Some((*p).to_string())
                } else {
                    Some(id_from_label(sub))
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

    let users = SHOPPERS
        .iter()
        .filter_map(|&(id, label, branch)| {
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
    let demo = build_demo();
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

/// Parameters of a synthetic nested-cluster project.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct SyntheticSpec {
    /// Number of phrases n (at least 1).
    pub phrases: usize,
    /// Dimension d (at least 1).
    pub dim: usize,
    /// Children per cluster node (at least 1).
    pub branching: usize,
    /// Cluster levels below the root; the phrases left over become leaves under the
    /// deepest clusters.
    pub depth: usize,
    /// Full covariances (a random rotation of the diagonal ones) instead of diagonal.
    pub full_covariance: bool,
    /// Seed.
    pub seed: u64,
}

impl Default for SyntheticSpec {
    fn default() -> Self {
        SyntheticSpec {
            phrases: 1000,
            dim: 16,
            branching: 4,
            depth: 2,
            full_covariance: false,
            seed: 0,
        }
    }
}

/// Raw synthetic data: row-major means and diagonal variances, ids, parents.
struct SyntheticRaw {
    n: usize,
    d: usize,
    means: Vec<f64>,
    vars: Vec<f64>,
    ids: Vec<String>,
    parent: Vec<Option<usize>>,
}

fn synthetic_raw(spec: &SyntheticSpec) -> SyntheticRaw {
    let n = spec.phrases.max(1);
    let d = spec.dim.max(1);
    let b = spec.branching.max(1);
    let mut src = Source::new(spec.seed);
    let mut means = Vec::with_capacity(n * d);
    let mut vars = Vec::with_capacity(n * d);
    let mut ids = Vec::with_capacity(n);
    let mut parent = Vec::with_capacity(n);
    for _ in 0..d {
        means.push(0.0);
        vars.push(src.uniform(0.8, 1.25));
    }
    ids.push("n".to_string());
    parent.push(None);

    // cluster levels, breadth first
    let mut level = vec![0usize];
    let mut dir = vec![0.0f64; d];
    'levels: for _ in 0..spec.depth {
        let mut next = Vec::with_capacity(level.len() * b);
        for &p in &level {
            for k in 0..b {
                if ids.len() >= n {
                    break 'levels;
                }
                let row = ids.len();
                let mut norm2 = 0.0;
                for x in dir.iter_mut() {
                    *x = src.normal();
                    norm2 += *x * *x;
                }
                let scale = 3.0 / norm2.sqrt().max(1e-12);
                for j in 0..d {
                    let (pm, pv) = (means[p * d + j], vars[p * d + j]);
                    means.push(pm + scale * dir[j] * pv.sqrt());
                    vars.push(pv * 0.25 * src.uniform(0.8, 1.25));
                }
                ids.push(format!("{}.{}", ids[p], k + 1));
                parent.push(Some(p));
                next.push(row);
            }
        }
        level = next;
    }
    // leaves, dealt to the deepest clusters in turn
    let mut leaf = 0usize;
    while ids.len() < n {
        let p = level[leaf % level.len()];
        for j in 0..d {
            let (pm, pv) = (means[p * d + j], vars[p * d + j]);
            means.push(pm + 0.5 * pv.sqrt() * src.normal());
            vars.push(pv * 0.3 * src.uniform(0.8, 1.25));
        }
        leaf += 1;
        ids.push(format!("leaf-{leaf}"));
        parent.push(Some(p));
    }
    SyntheticRaw {
        n,
        d,
        means,
        vars,
        ids,
        parent,
    }
}

/// A random rotation of R^d (QR of a Gaussian matrix, column signs fixed by R's diagonal).
fn random_rotation(d: usize, seed: u64) -> nalgebra::DMatrix<f64> {
    let mut src = Source::new(seed ^ 0x005e_ed0f_f011);
    let a = nalgebra::DMatrix::from_fn(d, d, |_, _| src.normal());
    let qr = a.qr();
    let mut q = qr.q();
    let r = qr.r();
    for c in 0..d {
        if r[(c, c)] < 0.0 {
            for i in 0..d {
                q[(i, c)] = -q[(i, c)];
            }
        }
    }
    q
}

/// Rotate the raw diagonal data: returns rotated means and row-major full covariances.
fn rotate(raw: &SyntheticRaw, seed: u64) -> (Vec<f64>, Vec<f64>) {
    let (n, d) = (raw.n, raw.d);
    let q = random_rotation(d, seed);
    let mut means = vec![0.0; n * d];
    let mut covs = vec![0.0; n * d * d];
    for r in 0..n {
        let m = &raw.means[r * d..(r + 1) * d];
        let v = &raw.vars[r * d..(r + 1) * d];
        for i in 0..d {
            means[r * d + i] = (0..d).map(|k| q[(i, k)] * m[k]).sum();
        }
        let c = &mut covs[r * d * d..(r + 1) * d * d];
        for i in 0..d {
            for j in i..d {
                let s: f64 = (0..d).map(|k| q[(i, k)] * v[k] * q[(j, k)]).sum();
                c[i * d + j] = s;
                c[j * d + i] = s;
            }
        }
    }
    (means, covs)
}

fn synthetic_tables(raw: &SyntheticRaw) -> (PhraseTable, TreeFile) {
    let records: Vec<PhraseRecord> = raw
        .ids
        .iter()
        .map(|id| PhraseRecord {
            id: Some(id.clone()),
            label: format!("synthetic {id}"),
        })
        .collect();
    let phrases = PhraseTable::from_records(&records)
        .expect("synthetic ids are unique and non-empty by construction");
    let parent = raw
        .parent
        .iter()
        .enumerate()
        .filter_map(|(c, p)| p.map(|p| (raw.ids[c].clone(), raw.ids[p].clone())))
        .collect();
    let tree = TreeFile {
        root: raw.ids[0].clone(),
        parent,
    };
    (phrases, tree)
}

/// Synthetic nested clusters with their true tree, in memory.
///
/// Row 0 is the root `n`; cluster `n.2.1` is the first child of `n.2`; `leaf-K` rows are
/// leaves under the deepest clusters. Each cluster's mean is its parent's plus an offset of
/// three parent standard deviations in a random direction, its variance a quarter of the
/// parent's (jittered); leaves sit within half a standard deviation of their cluster.
pub fn synthetic_gaussians(spec: &SyntheticSpec) -> (PhraseTable, Gaussians, TreeFile) {
    let raw = synthetic_raw(spec);
    let (phrases, tree) = synthetic_tables(&raw);
    let g = if spec.full_covariance {
        let (means, covs) = rotate(&raw, spec.seed);
        Gaussians::from_full(raw.n, raw.d, means, covs, 0.0)
    } else {
        Gaussians::from_diagonal(raw.n, raw.d, raw.means.clone(), raw.vars.clone(), 0.0)
    }
    .expect("generated variances are finite and positive, rotations keep them so");
    (phrases, g, tree)
}

/// Write a synthetic project (see [`synthetic_gaussians`]) with its true tree as tree.json.
///
/// Diagonal data is written with [`ProjectWriter::write`]; full covariance with
/// [`ProjectWriter::write_full_covariance`] (`covariances.npy`, n × d × d, float64).
pub fn write_synthetic(dir: &Path, spec: &SyntheticSpec) -> std::io::Result<()> {
    let raw = synthetic_raw(spec);
    let (phrases, tree) = synthetic_tables(&raw);
    let name = format!(
        "synthetic {} x {} (branching {}, depth {}, seed {})",
        raw.n, raw.d, spec.branching, spec.depth, spec.seed
    );
    if !spec.full_covariance {
        let means: Vec<f32> = raw.means.iter().map(|&x| x as f32).collect();
        let vars: Vec<f32> = raw.vars.iter().map(|&x| x as f32).collect();
        return ProjectWriter {
            name: &name,
            phrases: &phrases,
            dim: raw.d,
            means: &means,
            variances: &vars,
            users: &[],
            tree: Some(&tree),
        }
        .write(dir);
    }
    let (means, covs) = rotate(&raw, spec.seed);
    let m32: Vec<f32> = means.iter().map(|&x| x as f32).collect();
    ProjectWriter {
        name: &name,
        phrases: &phrases,
        dim: raw.d,
        means: &m32,
        variances: &[],
        users: &[],
        tree: Some(&tree),
    }
    .write_full_covariance(dir, &covs)
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
    fn rotation_is_orthogonal() {
        let q = random_rotation(7, 3);
        let e = &q.transpose() * &q - nalgebra::DMatrix::<f64>::identity(7, 7);
        assert!(e.amax() < 1e-12);
    }

    #[test]
    fn demo_has_unique_ids_and_every_tag_placed_or_flagged() {
        let demo = build_demo();
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
    fn synthetic_tree_shape_follows_the_spec() {
        let spec = SyntheticSpec {
            phrases: 50,
            dim: 4,
            branching: 3,
            depth: 3,
            full_covariance: false,
            seed: 2,
        };
        // 1 + 3 + 9 + 27 = 40 clusters, then 10 leaves dealt to the first deepest clusters
        let raw = synthetic_raw(&spec);
        assert_eq!(raw.n, 50);
        assert_eq!(raw.ids.len(), 50);
        assert_eq!(raw.ids[1], "n.1");
        assert_eq!(raw.ids[4], "n.1.1");
        assert_eq!(raw.ids[13], "n.1.1.1");
        assert_eq!(raw.ids[40], "leaf-1");
        assert_eq!(raw.parent[40], Some(13));
        assert_eq!(raw.parent[49], Some(22));
        let cut = synthetic_raw(&SyntheticSpec {
            phrases: 20,
            ..spec.clone()
        });
        // the third cluster level is cut off at 20 rows: no leaves
        assert!(cut.ids.iter().all(|i| !i.starts_with("leaf")));
        assert_eq!(cut.parent[19], Some(6));
        let tiny = synthetic_raw(&SyntheticSpec {
            phrases: 0,
            dim: 0,
            ..spec
        });
        assert_eq!((tiny.n, tiny.d), (1, 1));
    }
}
