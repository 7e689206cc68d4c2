//! [`Project`]: a loaded, validated project, and the shopper profiles.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::sync::Arc;

use serde::{Deserialize, Serialize};

use super::LoadError;
use super::embeddings::load_embeddings;
use super::manifest::{FORMAT_NAME, FORMAT_VERSION, Limits, MANIFEST_NAME, Manifest};
use super::phrase_langs::{PhraseFileRecord, split_languages};
use super::read::{read_json, read_json_limited, resolve_inside};
use super::tree_file::load_tree_limited;
use crate::model::fsutil;
use crate::model::gaussian::{DEFAULT_VARIANCE_FLOOR, Gaussians, OwnedGaussian};
use crate::model::label::{self, LabelError};
use crate::model::lang::PhraseLanguages;
use crate::model::phrase::{PhraseError, PhraseRecord, PhraseTable};
use crate::model::tree::Tree;

/// A shopper profile: a Gaussian in the phrase space.
#[derive(Debug, Clone, PartialEq)]
pub struct UserProfile {
    /// Stable id.
    pub id: String,
    /// Display label.
    pub label: String,
    /// The preference distribution (diagonal).
    pub gaussian: OwnedGaussian,
}

/// One record of `users.json`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct UserRecord {
    /// Stable id.
    pub id: String,
    /// Display label.
    pub label: String,
    /// Mean.
    pub mean: Vec<f64>,
    /// Diagonal variance.
    pub variance: Vec<f64>,
}

/// A loaded, validated project.
#[derive(Debug, Clone)]
pub struct Project {
    /// The project folder.
    pub dir: PathBuf,
    /// The manifest as read.
    pub manifest: Manifest,
    /// Phrases in row order.
    pub phrases: PhraseTable,
    /// One Gaussian per phrase, shared by every view.
    pub gaussians: Arc<Gaussians>,
    /// Shopper profiles (may be empty).
    pub users: Vec<UserProfile>,
    /// The machine-built tree, when the project has one.
    pub tree: Option<Tree>,
}

impl Project {
    /// Load a project from its folder (or from the path of its `project.json`).
    pub fn load(path: &Path) -> Result<Self, LoadError> {
        let (dir, manifest_path) = if path.is_dir() {
            (path.to_path_buf(), path.join(MANIFEST_NAME))
        } else {
            let dir = path
                .parent()
                .map(Path::to_path_buf)
                .filter(|p| !p.as_os_str().is_empty())
                .unwrap_or_else(|| PathBuf::from("."));
            (dir, path.to_path_buf())
        };
        let mfile = manifest_path.display().to_string();
        let mut manifest: Manifest = read_json(&manifest_path)?;
        if manifest.format != FORMAT_NAME {
            return Err(LoadError::invalid(
                &mfile,
                "format",
                format!("is \"{}\", expected \"{FORMAT_NAME}\"", manifest.format),
            ));
        }
        if manifest.version != FORMAT_VERSION {
            return Err(LoadError::invalid(
                &mfile,
                "version",
                format!(
                    "is {}, this build reads version {FORMAT_VERSION}",
                    manifest.version
                ),
            ));
        }
        // the project name is the default label of the SKOS concept scheme: same label rule
        let name = match label::clean(&manifest.name) {
            Ok(l) if l != manifest.name.as_str() => Some(l.into_owned()),
            Ok(_) | Err(LabelError::Empty) => None,
            Err(e) => return Err(LoadError::invalid(&mfile, "name", e.to_string())),
        };
        if let Some(name) = name {
            manifest.name = name;
        }
        let floor = manifest.variance_floor.unwrap_or(DEFAULT_VARIANCE_FLOOR);
        if !(floor.is_finite() && floor >= 0.0) {
            return Err(LoadError::invalid(
                &mfile,
                "variance_floor",
                format!("is {floor}; must be a finite number ≥ 0"),
            ));
        }

        let limits = manifest.limits.unwrap_or_default();

        // phrases
        let ppath = resolve_inside(&dir, &manifest.phrases, "phrases")?;
        let pfile = ppath.display().to_string();
        let default_language =
            super::phrase_langs::default_language(manifest.default_language.as_deref(), &mfile)?;
        let (records, languages) = if super::parquet::is_parquet_path(&ppath) {
            let recs: Vec<PhraseRecord> = super::parquet::phrases_for(&ppath, &manifest, &limits)?;
            let langs = default_language.map(|default| PhraseLanguages {
                default,
                other: Default::default(),
            });
            (recs, langs)
        } else {
            let rows: Vec<PhraseFileRecord> = read_json_limited(&ppath, &limits)?;
            if rows.len() > limits.max_phrases {
                return Err(LoadError::invalid(
                    &pfile,
                    "phrases",
                    format!(
                        "{} phrases exceed the limit of {} (raise limits.max_phrases in project.json)",
                        rows.len(),
                        limits.max_phrases
                    ),
                ));
            }
            split_languages(rows, default_language, &pfile)?
        };
        if records.len() > limits.max_phrases {
            return Err(LoadError::invalid(
                &pfile,
                "phrases",
                format!(
                    "{} phrases exceed the limit of {} (raise limits.max_phrases in project.json)",
                    records.len(),
                    limits.max_phrases
                ),
            ));
        }
        let records = clean_phrase_labels(records, &pfile)?;
        let mut phrases = PhraseTable::from_record_vec(records).map_err(|e| match &e {
            PhraseError::DuplicateId { id, second, .. } => {
                LoadError::invalid(&pfile, format!("row {second} id \"{id}\""), e.to_string())
            }
            PhraseError::Empty { row, field } => {
                LoadError::invalid(&pfile, format!("row {row} {field}"), e.to_string())
            }
        })?;
        if phrases.is_empty() {
            return Err(LoadError::invalid(&pfile, "phrases", "the list is empty"));
        }
        if let Some(l) = languages {
            phrases.set_languages(l);
        }

        let gaussians = load_embeddings(&dir, &manifest, &phrases, floor, &limits)?;
        let users = match &manifest.users {
            Some(u) => load_users(&resolve_inside(&dir, u, "users")?, gaussians.dim(), &limits)?,
            None => Vec::new(),
        };
        let tree = match &manifest.tree {
            Some(t) => {
                let tpath = resolve_inside(&dir, t, "tree")?;
                if tpath.exists() {
                    Some(load_tree_limited(&tpath, &phrases, &limits)?)
                } else {
                    None
                }
            }
            None => None,
        };
        if let Some(o) = &manifest.overrides {
            resolve_inside(&dir, o, "overrides")?;
        }
        if let Some(sp) = &manifest.signoff {
            resolve_inside(&dir, &sp.allowed_signers, "signoff.allowed_signers")?;
            if let Some(r) = &sp.revoked_keys {
                resolve_inside(&dir, r, "signoff.revoked_keys")?;
            }
        }
        // the parsed files and temporary tables are freed: give their pages back before
        // the caller's large steps (memtrim.rs)
        crate::model::memtrim::release_free_memory();
        Ok(Project {
            dir,
            manifest,
            phrases,
            gaussians: Arc::new(gaussians),
            users,
            tree,
        })
    }

    /// The file the tree is (or would be) stored in.
    pub fn tree_path(&self) -> PathBuf {
        self.dir
            .join(self.manifest.tree.as_deref().unwrap_or("tree.json"))
    }

    /// Make sure the manifest names a tree file: a project without one gets
    /// `"tree": "tree.json"` written into `project.json` (atomically, the previous manifest
    /// kept as `project.json.bak`), so a tree written to [`Project::tree_path`] loads next time.
    /// Returns whether the manifest was changed.
    pub fn record_tree_in_manifest(&mut self) -> std::io::Result<bool> {
        if self.manifest.tree.is_some() {
            return Ok(false);
        }
        let mut manifest = self.manifest.clone();
        manifest.tree = Some("tree.json".to_string());
        fsutil::atomic_write(
            &self.dir.join(MANIFEST_NAME),
            &fsutil::to_json_pretty(&manifest),
            true,
        )?;
        self.manifest = manifest;
        Ok(true)
    }

    /// The override layer file.
    pub fn overrides_path(&self) -> PathBuf {
        self.dir.join(
            self.manifest
                .overrides
                .as_deref()
                .unwrap_or("overrides.json"),
        )
    }
}

fn load_users(path: &Path, d: usize, limits: &Limits) -> Result<Vec<UserProfile>, LoadError> {
    let file = path.display().to_string();
    let recs: Vec<UserRecord> = read_json_limited(path, limits)?;
    let mut seen = BTreeMap::new();
    let mut out = Vec::with_capacity(recs.len());
    for (i, r) in recs.into_iter().enumerate() {
        let field = format!("user \"{}\" (row {i})", r.id);
        if let Some(first) = seen.insert(r.id.clone(), i) {
            return Err(LoadError::invalid(
                &file,
                field,
                format!("duplicate id (first at row {first})"),
            ));
        }
        if r.mean.len() != d || r.variance.len() != d {
            return Err(LoadError::invalid(
                &file,
                field,
                format!(
                    "mean has {} and variance {} values; the embeddings have dimension {d}",
                    r.mean.len(),
                    r.variance.len()
                ),
            ));
        }
        let g = OwnedGaussian::diagonal(&r.mean, &r.variance).map_err(|e| {
            LoadError::invalid(
                &file,
                field.clone(),
                e.to_string().replacen("row 0: ", "", 1),
            )
        })?;
        let label = match label::clean(&r.label) {
            Ok(l) => l.into_owned(),
            Err(e) => return Err(LoadError::invalid(&file, field, e.to_string())),
        };
        out.push(UserProfile {
            id: r.id,
            label,
            gaussian: g,
        });
    }
    Ok(out)
}

/// Apply the label rule ([`label::clean`]) to every phrase record: labels are trimmed and
/// normalised to NFC, a control character is refused naming the file, row and phrase. An
/// empty label is left for [`PhraseTable::from_record_vec`] to refuse with its own message.
fn clean_phrase_labels(
    mut records: Vec<PhraseRecord>,
    file: &str,
) -> Result<Vec<PhraseRecord>, LoadError> {
    for (row, r) in records.iter_mut().enumerate() {
        let cleaned = match label::clean(&r.label) {
            Ok(l) if l != r.label.as_str() => Some(l.into_owned()),
            Ok(_) | Err(LabelError::Empty) => None,
            Err(e) => {
                let field = match &r.id {
                    Some(id) => format!("row {row} label (phrase \"{id}\")"),
                    None => format!("row {row} label"),
                };
                return Err(LoadError::invalid(file, field, e.to_string()));
            }
        };
        if let Some(l) = cleaned {
            r.label = l;
        }
    }
    Ok(records)
}
