//! The phrase table: stable string ids and display labels, indexed by [`PhraseId`].

use std::collections::HashMap;

use serde::{Deserialize, Serialize};

use super::gaussian::PhraseId;

/// One phrase as stored in `phrases.json`.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
pub struct PhraseRecord {
    /// Stable unique id; derived from the label when missing.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub id: Option<String>,
    /// Display label ("peat free compost").
    pub label: String,
}

/// Derive an id from a label: lower-case, white space runs to `-`.
pub fn id_from_label(label: &str) -> String {
    label
        .split_whitespace()
        .map(|w| w.to_lowercase())
        .collect::<Vec<_>>()
        .join("-")
}

/// Phrases in row order with a lookup from id to row.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct PhraseTable {
    ids: Vec<String>,
    labels: Vec<String>,
    index: HashMap<String, PhraseId>,
}

/// Why a phrase table could not be built.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum PhraseError {
    /// Two rows share an id.
    #[error("duplicate id \"{id}\" at rows {first} and {second}")]
    DuplicateId {
        /// The id.
        id: String,
        /// First row holding it.
        first: usize,
        /// Second row holding it.
        second: usize,
    },
    /// An id or label is empty.
    #[error("row {row}: {field} is empty")]
    Empty {
        /// The row.
        row: usize,
        /// "id" or "label".
        field: &'static str,
    },
}

impl PhraseTable {
    /// Build from records, deriving missing ids and refusing duplicates.
    pub fn from_records(records: &[PhraseRecord]) -> Result<Self, PhraseError> {
        let mut t = PhraseTable::default();
        for (row, r) in records.iter().enumerate() {
            if r.label.trim().is_empty() {
                return Err(PhraseError::Empty {
                    row,
                    field: "label",
                });
            }
            let id = match &r.id {
                Some(id) => id.clone(),
                None => id_from_label(&r.label),
            };
            if id.trim().is_empty() {
                return Err(PhraseError::Empty { row, field: "id" });
            }
            if let Some(&first) = t.index.get(&id) {
                return Err(PhraseError::DuplicateId {
                    id,
                    first: first as usize,
                    second: row,
                });
            }
            t.index.insert(id.clone(), row as PhraseId);
            t.ids.push(id);
            t.labels.push(r.label.clone());
        }
        Ok(t)
    }

    /// A table from ids alone, each labelled with its id with `-` read as a space (handy for
    /// tests and small tools).
    pub fn from_ids(ids: &[&str]) -> Result<Self, PhraseError> {
        let recs: Vec<PhraseRecord> = ids
            .iter()
            .map(|i| PhraseRecord {
                id: Some(i.to_string()),
                label: i.replace('-', " "),
            })
            .collect();
        PhraseTable::from_records(&recs)
    }

    /// Number of phrases.
    pub fn len(&self) -> usize {
        self.ids.len()
    }

    /// True when there is no phrase.
    pub fn is_empty(&self) -> bool {
        self.ids.is_empty()
    }

    /// Stable id of a phrase.
    pub fn id(&self, p: PhraseId) -> &str {
        &self.ids[p as usize]
    }

    /// Label of a phrase.
    pub fn label(&self, p: PhraseId) -> &str {
        &self.labels[p as usize]
    }

    /// Row of an id.
    pub fn get(&self, id: &str) -> Option<PhraseId> {
        self.index.get(id).copied()
    }

    /// Find a phrase by id, or else by exact label, or else by label ignoring case.
    pub fn find(&self, query: &str) -> Option<PhraseId> {
        if let Some(p) = self.get(query) {
            return Some(p);
        }
        if let Some(i) = self.labels.iter().position(|l| l == query) {
            return Some(i as PhraseId);
        }
        let q = query.to_lowercase();
        self.labels
            .iter()
            .position(|l| l.to_lowercase() == q)
            .map(|i| i as PhraseId)
    }

    /// All ids in row order.
    pub fn ids(&self) -> &[String] {
        &self.ids
    }

    /// All labels in row order.
    pub fn labels(&self) -> &[String] {
        &self.labels
    }

    /// Records for writing `phrases.json`.
    pub fn records(&self) -> Vec<PhraseRecord> {
        self.ids
            .iter()
            .zip(&self.labels)
            .map(|(id, label)| PhraseRecord {
                id: Some(id.clone()),
                label: label.clone(),
            })
            .collect()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn rec(id: Option<&str>, label: &str) -> PhraseRecord {
        PhraseRecord {
            id: id.map(str::to_string),
            label: label.to_string(),
        }
    }

    #[test]
    fn ids_are_derived_from_labels() {
        assert_eq!(id_from_label("Peat  Free compost"), "peat-free-compost");
        let t =
            PhraseTable::from_records(&[rec(None, "Shade loving"), rec(Some("x"), "y")]).unwrap();
        assert_eq!(t.id(0), "shade-loving");
        assert_eq!(t.find("Shade Loving"), Some(0));
        assert_eq!(t.find("x"), Some(1));
    }

    #[test]
    fn duplicates_are_refused() {
        let e =
            PhraseTable::from_records(&[rec(None, "a b"), rec(Some("a-b"), "other")]).unwrap_err();
        assert_eq!(
            e.to_string(),
            "duplicate id \"a-b\" at rows 0 and 1".to_string()
        );
    }
}
