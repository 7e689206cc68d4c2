//! Tree files: JSON (`{"root", "parent"}`) or a CSV edge list.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

use super::LoadError;
use super::Project;
use super::manifest::Limits;
use super::read::{read_bytes_limited, read_json_limited};
use crate::model::fsutil::to_json_pretty;
use crate::model::phrase::PhraseTable;
use crate::model::tree::{Tree, TreeFile};

/// Load a tree file: JSON (`{"root", "parent"}`) or a CSV edge list `child,parent` with a
/// header (the root is the row with an empty parent, or else the one parent that is never a
/// child).
pub fn load_tree(path: &Path, phrases: &PhraseTable) -> Result<Tree, LoadError> {
    load_tree_limited(path, phrases, &Limits::default())
}

pub(super) fn load_tree_limited(
    path: &Path,
    phrases: &PhraseTable,
    limits: &Limits,
) -> Result<Tree, LoadError> {
    let file = path.display().to_string();
    if super::skos_tree::is_skos_path(path) {
        let tf = super::skos_tree::load_skos_tree(path, phrases, limits)?.tree;
        return Tree::from_id_map(phrases, &tf.root, &tf.parent)
            .map_err(|e| LoadError::invalid(&file, "tree", e.to_string()));
    }
    let is_csv = path
        .extension()
        .is_some_and(|e| e.eq_ignore_ascii_case("csv"));
    let tf: TreeFile = if is_csv {
        parse_tree_csv(&read_bytes_limited(path, limits)?, &file)?
    } else {
        read_json_limited(path, limits)?
    };
    Tree::from_id_map(phrases, &tf.root, &tf.parent)
        .map_err(|e| LoadError::invalid(&file, "tree", e.to_string()))
}

/// Parse a CSV edge list (`child,parent` header) into the tree file form.
pub fn parse_tree_csv(bytes: &[u8], file: &str) -> Result<TreeFile, LoadError> {
    // spreadsheet programs save "CSV UTF-8" with a byte-order mark; it is not part of the
    // first column's name (CRLF line ends are handled by the csv reader)
    let bytes = bytes.strip_prefix(b"\xEF\xBB\xBF").unwrap_or(bytes);
    let mut rdr = csv::ReaderBuilder::new()
        .has_headers(true)
        .from_reader(bytes);
    let headers = rdr
        .headers()
        .map_err(|e| LoadError::invalid(file, "header", e.to_string()))?
        .clone();
    let col = |name: &str| headers.iter().position(|h| h.trim() == name);
    let (ci, pi) = match (col("child"), col("parent")) {
        (Some(c), Some(p)) => (c, p),
        _ => {
            return Err(LoadError::invalid(
                file,
                "header",
                "expected a header with columns \"child\" and \"parent\"",
            ));
        }
    };
    let mut parent = BTreeMap::new();
    let mut roots = Vec::new();
    for (i, rec) in rdr.records().enumerate() {
        let line = i + 2;
        let rec =
            rec.map_err(|e| LoadError::invalid(file, format!("line {line}"), e.to_string()))?;
        let c = rec.get(ci).unwrap_or("").trim().to_string();
        let p = rec.get(pi).unwrap_or("").trim().to_string();
        if c.is_empty() {
            return Err(LoadError::invalid(
                file,
                format!("line {line}"),
                "child is empty",
            ));
        }
        if p.is_empty() {
            roots.push(c);
        } else if let Some(prev) = parent.insert(c.clone(), p.clone())
            && prev != p
        {
            return Err(LoadError::invalid(
                file,
                format!("line {line}"),
                format!("\"{c}\" is given two parents: \"{prev}\" and \"{p}\""),
            ));
        }
    }
    if roots.is_empty() {
        let mut cand: Vec<&String> = parent
            .values()
            .filter(|p| !parent.contains_key(*p))
            .collect();
        cand.sort();
        cand.dedup();
        roots = cand.into_iter().cloned().collect();
    }
    match roots.len() {
        0 => Err(LoadError::invalid(
            file,
            "root",
            "no root: every node has a parent (a cycle?)",
        )),
        1 => Ok(TreeFile {
            root: roots.remove(0),
            parent,
        }),
        _ => Err(LoadError::invalid(
            file,
            "root",
            format!("several roots: {}", roots.join(", ")),
        )),
    }
}

/// `build-report.json` beside the project's tree file.
pub fn report_path_of(project: &Project) -> PathBuf {
    project
        .tree_path()
        .parent()
        .map(|d| d.join("build-report.json"))
        .unwrap_or_else(|| PathBuf::from("build-report.json"))
}

/// The bytes of a tree file: a `child,parent` CSV edge list when `path` ends in `.csv`,
/// else pretty JSON.
pub fn tree_bytes(file: &TreeFile, path: &Path) -> Result<Vec<u8>, std::io::Error> {
    if crate::model::project::is_skos_path(path) {
        // a hand-made SKOS taxonomy is never overwritten by a machine-built tree
        return Err(std::io::Error::other(
            "the project's tree is a SKOS taxonomy; a built tree is not written over it \
             (write it elsewhere, e.g. `build --out tree.json`, and name that file as \"tree\")",
        ));
    }
    let is_csv = path
        .extension()
        .is_some_and(|e| e.eq_ignore_ascii_case("csv"));
    if is_csv {
        tree_csv(file).map_err(std::io::Error::other)
    } else {
        Ok(to_json_pretty(file))
    }
}

/// The tree as a `child,parent` CSV edge list (the root with an empty parent first).
pub fn tree_csv(t: &TreeFile) -> Result<Vec<u8>, csv::Error> {
    let mut w = csv::Writer::from_writer(Vec::new());
    w.write_record(["child", "parent"])?;
    w.write_record([t.root.as_str(), ""])?;
    for (c, p) in &t.parent {
        w.write_record([c.as_str(), p.as_str()])?;
    }
    w.into_inner().map_err(|e| csv::Error::from(e.into_error()))
}
