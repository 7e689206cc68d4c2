//! Setting a SKOS taxonomy as a project's tree (the workbench's File ▸ Import taxonomy…).

use std::path::Path;

use super::LoadError;
use super::load::Project;
use super::manifest::MANIFEST_NAME;
use super::skos_tree::{SkosReport, load_skos_tree};
use crate::model::fsutil;

/// The file name an imported taxonomy gets inside the project folder.
pub const TAXONOMY_FILE: &str = "taxonomy.ttl";

impl Project {
    /// Make the SKOS Turtle file `src` the project's tree: it is read against the phrases
    /// first (nothing changes when it cannot be used), copied into the project folder as
    /// `taxonomy.ttl` (an earlier `taxonomy.ttl` kept as `taxonomy.ttl.bak`), and named as
    /// `tree` in `project.json` (the previous manifest, which names the previous tree file,
    /// kept as `project.json.bak`; the previous tree file itself is left in place). Returns
    /// what matched. Reload the project afterwards to use the new tree.
    pub fn import_taxonomy(&mut self, src: &Path) -> Result<SkosReport, LoadError> {
        let limits = self.manifest.limits.unwrap_or_default();
        let skos = load_skos_tree(src, &self.phrases, &limits)?;
        let dest = self.dir.join(TAXONOMY_FILE);
        let dfile = dest.display().to_string();
        let io = |file: &str| {
            let file = file.to_string();
            move |source| LoadError::Io { file, source }
        };
        let bytes = std::fs::read(src).map_err(io(&src.display().to_string()))?;
        let same = dest.exists() && std::fs::read(&dest).map_err(io(&dfile))? == bytes;
        if !same {
            fsutil::atomic_write(&dest, &bytes, true).map_err(io(&dfile))?;
        }
        if self.manifest.tree.as_deref() != Some(TAXONOMY_FILE) {
            let mut manifest = self.manifest.clone();
            manifest.tree = Some(TAXONOMY_FILE.to_string());
            let mpath = self.dir.join(MANIFEST_NAME);
            fsutil::atomic_write(&mpath, &fsutil::to_json_pretty(&manifest), true)
                .map_err(io(&mpath.display().to_string()))?;
            self.manifest = manifest;
        }
        Ok(skos.report)
    }
}
