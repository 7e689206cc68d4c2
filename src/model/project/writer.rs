//! [`ProjectWriter`]: the one writer of whole projects (manifest, phrases, `.npy`
//! embeddings, users, tree), used by the demo and synthetic generators and by tests.

use std::fs;
use std::path::Path;

use ndarray::{Array2, Array3};
use ndarray_npy::WriteNpyExt;

use super::load::UserRecord;
use super::manifest::{EmbeddingsRef, FORMAT_NAME, FORMAT_VERSION, MANIFEST_NAME, Manifest, Scale};
use crate::model::fsutil;
use crate::model::phrase::PhraseTable;
use crate::model::tree::TreeFile;

/// Write a project (manifest, phrases, `.npy` embeddings, users, tree) to `dir`: diagonal
/// with [`ProjectWriter::write`], full covariance with
/// [`ProjectWriter::write_full_covariance`]. Used by the demo and synthetic generators and
/// by test helpers.
pub struct ProjectWriter<'a> {
    /// Project name.
    pub name: &'a str,
    /// Phrase table.
    pub phrases: &'a PhraseTable,
    /// Dimension.
    pub dim: usize,
    /// Row-major means.
    pub means: &'a [f32],
    /// Row-major variances (diagonal projects; not read by
    /// [`ProjectWriter::write_full_covariance`]).
    pub variances: &'a [f32],
    /// Shopper profiles.
    pub users: &'a [UserRecord],
    /// Tree, if any.
    pub tree: Option<&'a TreeFile>,
}

/// The second embedding array.
enum Spread<'a> {
    /// n × d variances, written as float32 `variances.npy`.
    Variances(&'a [f32]),
    /// n × d × d covariance matrices, written as float64 `covariances.npy`.
    Covariances(&'a [f64]),
}

impl ProjectWriter<'_> {
    /// Write a diagonal project (`means.npy`, `variances.npy`); existing files are replaced
    /// atomically.
    pub fn write(&self, dir: &Path) -> std::io::Result<()> {
        self.write_with(dir, Spread::Variances(self.variances))
    }

    /// Write a full-covariance project: `means.npy` and `covariances.npy` (n × d × d,
    /// float64, row-major) instead of `variances.npy`; existing files are replaced
    /// atomically.
    pub fn write_full_covariance(&self, dir: &Path, covariances: &[f64]) -> std::io::Result<()> {
        self.write_with(dir, Spread::Covariances(covariances))
    }

    fn write_with(&self, dir: &Path, spread: Spread) -> std::io::Result<()> {
        fs::create_dir_all(dir)?;
        let n = self.phrases.len();
        let (variances, covariances) = match spread {
            Spread::Variances(_) => (Some("variances.npy".into()), None),
            Spread::Covariances(_) => (None, Some("covariances.npy".into())),
        };
        let manifest = Manifest {
            format: FORMAT_NAME.into(),
            version: FORMAT_VERSION,
            name: self.name.into(),
            phrases: "phrases.json".into(),
            embeddings: EmbeddingsRef::Npy {
                means: "means.npy".into(),
                variances,
                covariances,
            },
            scale: Scale::Variance,
            variance_floor: None,
            users: (!self.users.is_empty()).then(|| "users.json".into()),
            tree: self.tree.map(|_| "tree.json".into()),
            overrides: Some("overrides.json".into()),
            audit: None,
            limits: None,
            signoff: None,
            weights: None,
            default_language: None,
        };
        fsutil::atomic_write(
            &dir.join(MANIFEST_NAME),
            &fsutil::to_json_pretty(&manifest),
            false,
        )?;
        fsutil::atomic_write(
            &dir.join("phrases.json"),
            &fsutil::to_json_pretty(&self.phrases.records()),
            false,
        )?;
        let means = Array2::from_shape_vec((n, self.dim), self.means.to_vec())
            .map_err(std::io::Error::other)?;
        fsutil::atomic_write(&dir.join("means.npy"), &npy_bytes(&means)?, false)?;
        drop(means);
        match spread {
            Spread::Variances(v) => {
                let arr = Array2::from_shape_vec((n, self.dim), v.to_vec())
                    .map_err(std::io::Error::other)?;
                fsutil::atomic_write(&dir.join("variances.npy"), &npy_bytes(&arr)?, false)?;
            }
            Spread::Covariances(c) => {
                let arr = Array3::from_shape_vec((n, self.dim, self.dim), c.to_vec())
                    .map_err(std::io::Error::other)?;
                fsutil::atomic_write(&dir.join("covariances.npy"), &npy_bytes(&arr)?, false)?;
            }
        }
        if !self.users.is_empty() {
            fsutil::atomic_write(
                &dir.join("users.json"),
                &fsutil::to_json_pretty(&self.users),
                false,
            )?;
        }
        if let Some(t) = self.tree {
            fsutil::atomic_write(&dir.join("tree.json"), &fsutil::to_json_pretty(t), false)?;
        }
        Ok(())
    }
}

/// The `.npy` file of an array.
fn npy_bytes<A: WriteNpyExt>(arr: &A) -> std::io::Result<Vec<u8>> {
    let mut buf = Vec::new();
    arr.write_npy(&mut buf).map_err(std::io::Error::other)?;
    Ok(buf)
}
