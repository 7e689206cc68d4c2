//! Synthetic nested-cluster projects of any size, with their true tree.

use std::path::Path;

use super::Source;
use crate::model::gaussian::Gaussians;
use crate::model::phrase::{PhraseRecord, PhraseTable};
use crate::model::project::ProjectWriter;
use crate::model::tree::TreeFile;

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
    use super::*;

    #[test]
    fn rotation_is_orthogonal() {
        let q = random_rotation(7, 3);
        let e = &q.transpose() * &q - nalgebra::DMatrix::<f64>::identity(7, 7);
        assert!(e.amax() < 1e-12);
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
