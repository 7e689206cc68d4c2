//! Tree files: JSON (`{"root", "parent"}`) or a CSV edge list.

use std::collections::BTreeMap;
use std::path::Path;

use super::LoadError;
use super::manifest::Limits;
use super::read::{read_bytes_limited, read_json_limited};
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
