//! Setting a SKOS taxonomy as a project's tree (the workbench's File ▸ Import taxonomy…).

use std::path::Path;

use super::LoadError;
use super::load::Project;
use super::manifest::MANIFEST_NAME;
use super::skos_tree::{SkosReport, load_skos_tree};
use crate::model::fsutil;

/// The file name an imported Turtle taxonomy gets inside the project folder.
pub const TAXONOMY_FILE: &str = "taxonomy.ttl";
/// The file name an imported RDF/XML taxonomy gets inside the project folder.
pub const TAXONOMY_FILE_RDF_XML: &str = "taxonomy.rdf";

impl Project {
    /// Make the SKOS file `src` (Turtle, or RDF/XML for `.rdf`/`.owl`) the project's tree: it
    /// is read against the phrases first (nothing changes when it cannot be used), copied
    /// into the project folder as `taxonomy.ttl` or `taxonomy.rdf` (an earlier one kept as
    /// `.bak`), and named as
    /// `tree` in `project.json` (the previous manifest, which names the previous tree file,
    /// kept as `project.json.bak`; the previous tree file itself is left in place). Returns
    /// what matched. Reload the project afterwards to use the new tree.
    pub fn import_taxonomy(&mut self, src: &Path) -> Result<SkosReport, LoadError> {
        let limits = self.manifest.limits.unwrap_or_default();
        let skos = load_skos_tree(src, &self.phrases, &limits)?;
        let xml = src
            .extension()
            .is_some_and(|e| e.eq_ignore_ascii_case("rdf") || e.eq_ignore_ascii_case("owl"));
        let name = if xml {
            TAXONOMY_FILE_RDF_XML
        } else {
            TAXONOMY_FILE
        };
        let dest = self.dir.join(name);
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
        if self.manifest.tree.as_deref() != Some(name) {
            let mut manifest = self.manifest.clone();
            manifest.tree = Some(name.to_string());
            let mpath = self.dir.join(MANIFEST_NAME);
            fsutil::atomic_write(&mpath, &fsutil::to_json_pretty(&manifest), true)
                .map_err(io(&mpath.display().to_string()))?;
            self.manifest = manifest;
        }
        Ok(skos.report)
    }
}
