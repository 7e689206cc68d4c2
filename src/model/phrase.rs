//! The phrase table: stable string ids and display labels, indexed by [`PhraseId`].

use std::sync::Arc;

use serde::{Deserialize, Serialize};

use super::gaussian::PhraseId;
use super::lang::{FALLBACK_LANGUAGE, PhraseLanguages};

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
///
/// The lookup is the rows sorted by id (binary search) rather than a hash map keyed by a
/// second copy of every id: at 100 000 phrases that copy and its table cost about 7 MB, and
/// the few hundred thousand lookups made while loading a tree take milliseconds either way.
///
/// The rows never change after the table is built, so they are shared between copies: a
/// copy (the workbench hands one to its background audit) costs no million string copies.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct PhraseTable {
    ids: Arc<Vec<String>>,
    labels: Arc<Vec<String>>,
    /// Rows ordered by id.
    by_id: Arc<Vec<PhraseId>>,
    /// The project's languages, when it names any (`default_language`, `labels` maps).
    langs: Option<Box<PhraseLanguages>>,
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
        Self::from_record_vec(records.to_vec())
    }

    /// [`PhraseTable::from_records`] taking the records by value, so their strings are moved
    /// into the table instead of copied (the loader's path).
    pub fn from_record_vec(records: Vec<PhraseRecord>) -> Result<Self, PhraseError> {
        let mut ids = Vec::with_capacity(records.len());
        let mut labels = Vec::with_capacity(records.len());
        for (row, r) in records.into_iter().enumerate() {
            if r.label.trim().is_empty() {
                return Err(PhraseError::Empty {
                    row,
                    field: "label",
                });
            }
            let id = match r.id {
                Some(id) => id,
                None => id_from_label(&r.label),
            };
            if id.trim().is_empty() {
                return Err(PhraseError::Empty { row, field: "id" });
            }
            ids.push(id);
            labels.push(r.label);
        }
        let mut by_id: Vec<PhraseId> = (0..ids.len() as PhraseId).collect();
        // stable: rows sharing an id stay in row order
        by_id.sort_by(|&a, &b| ids[a as usize].cmp(&ids[b as usize]));
        // the duplicate reported is the one a row-by-row scan meets first: the group whose
        // second row comes earliest, named by its first two rows (that window always starts
        // its group, so w[0] is the group's first row)
        let dup = by_id
            .windows(2)
            .filter(|w| ids[w[0] as usize] == ids[w[1] as usize])
            .min_by_key(|w| w[1]);
        if let Some(w) = dup {
            return Err(PhraseError::DuplicateId {
                id: ids[w[1] as usize].clone(),
                first: w[0] as usize,
                second: w[1] as usize,
            });
        }
        Ok(PhraseTable {
            ids: Arc::new(ids),
            labels: Arc::new(labels),
            by_id: Arc::new(by_id),
            langs: None,
        })
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
        self.by_id
            .binary_search_by(|&r| self.ids[r as usize].as_str().cmp(id))
            .ok()
            .map(|i| self.by_id[i])
    }

    /// Row of an id, for ids looked up in increasing order (a `BTreeMap`'s keys): `from`
    /// is the position in the id order where the previous lookup ended (start at 0) and is
    /// moved past this id. Each lookup gallops forward from there, so a sorted run of `n`
    /// lookups costs O(n) comparisons instead of n binary searches over the whole table;
    /// an id before `from` falls back to [`PhraseTable::get`]. Same answers as `get`.
    pub fn get_sorted(&self, id: &str, from: &mut usize) -> Option<PhraseId> {
        let key = |i: usize| self.ids[self.by_id[i] as usize].as_str();
        let n = self.by_id.len();
        if *from >= n || key(*from) > id {
            return self.get(id);
        }
        // key(from) <= id: double the step until it passes id, then search that window
        let (mut lo, mut step) = (*from, 1usize);
        while lo + step < n && key(lo + step) <= id {
            lo += step;
            step *= 2;
        }
        let hi = (lo + step).min(n);
        match self.by_id[lo..hi].binary_search_by(|&r| self.ids[r as usize].as_str().cmp(id)) {
            Ok(i) => {
                *from = lo + i + 1;
                Some(self.by_id[lo + i])
            }
            Err(i) => {
                *from = lo + i;
                None
            }
        }
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
        if let Some(i) = self.labels.iter().position(|l| l.to_lowercase() == q) {
            return Some(i as PhraseId);
        }
        // then a label in another language, exactly or after folding
        let langs = self.langs.as_deref()?;
        let exact = langs
            .other
            .iter()
            .find(|(_, m)| m.values().any(|l| l == query))
            .map(|(&p, _)| p);
        exact.or_else(|| {
            let q = super::lang::fold(query, None);
            langs
                .other
                .iter()
                .find(|(_, m)| m.values().any(|l| super::lang::fold(l, None) == q))
                .map(|(&p, _)| p)
        })
    }

    /// The label of a phrase in `language` as given in `phrases.json` (the main label for
    /// the default language), or `None` when it has none in that language.
    pub fn label_in(&self, p: PhraseId, language: &str) -> Option<&str> {
        if language == self.default_language() {
            return Some(self.label(p));
        }
        self.langs
            .as_deref()?
            .other
            .get(&p)?
            .get(language)
            .map(String::as_str)
    }

    /// All ids in row order.
    pub fn ids(&self) -> &[String] {
        &self.ids
    }

    /// All labels in row order.
    pub fn labels(&self) -> &[String] {
        &self.labels
    }

    /// Attach the project's languages: the default language and the labels in the others.
    pub fn set_languages(&mut self, langs: PhraseLanguages) {
        self.langs = Some(Box::new(langs));
    }

    /// The project's languages, when it names any.
    pub fn languages(&self) -> Option<&PhraseLanguages> {
        self.langs.as_deref()
    }

    /// The default language: the one of [`PhraseTable::label`] (`en` when the project names
    /// none).
    pub fn default_language(&self) -> &str {
        self.langs
            .as_deref()
            .map(|l| l.default.as_str())
            .unwrap_or(FALLBACK_LANGUAGE)
    }

    /// Records for writing `phrases.json`.
    pub fn records(&self) -> Vec<PhraseRecord> {
        self.ids
            .iter()
            .zip(self.labels.iter())
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
    fn a_copy_shares_the_rows_and_compares_equal() {
        let t = PhraseTable::from_ids(&["a", "b-c"]).unwrap();
        let mut u = t.clone();
        assert!(Arc::ptr_eq(&t.ids, &u.ids) && Arc::ptr_eq(&t.labels, &u.labels));
        assert_eq!(t, u);
        // the languages are the copy's own
        u.set_languages(PhraseLanguages {
            default: "de".into(),
            other: Default::default(),
        });
        assert_eq!((t.default_language(), u.default_language()), ("en", "de"));
        assert_eq!(u.label(1), "b c");
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

    proptest::proptest! {
        /// The sorted lookup agrees with a row-by-row scan through a hash map (the obvious
        /// implementation): same rows for every id, same duplicate reported.
        #[test]
        fn lookup_and_duplicates_match_a_hash_map_scan(
            ids in proptest::collection::vec("[a-e]{1,2}", 0..40)
        ) {
            let recs: Vec<PhraseRecord> =
                ids.iter().map(|i| rec(Some(i), "label")).collect();
            let mut seen = std::collections::HashMap::new();
            let mut expected_dup = None;
            for (row, id) in ids.iter().enumerate() {
                if let Some(&first) = seen.get(id) {
                    expected_dup = Some((id.clone(), first, row));
                    break;
                }
                seen.insert(id.clone(), row);
            }
            match PhraseTable::from_records(&recs) {
                Ok(t) => {
                    proptest::prop_assert!(expected_dup.is_none());
                    for (row, id) in ids.iter().enumerate() {
                        proptest::prop_assert_eq!(t.get(id), Some(row as PhraseId));
                    }
                    proptest::prop_assert_eq!(t.get("zz"), None);
                    proptest::prop_assert_eq!(t.get(""), None);
                }
                Err(PhraseError::DuplicateId { id, first, second }) => {
                    proptest::prop_assert_eq!(expected_dup, Some((id, first, second)));
                }
                Err(e) => proptest::prop_assert!(false, "unexpected {e}"),
            }
        }
    }

    #[test]
    fn sorted_lookups_agree_with_get() {
        // common practice, no source: the galloping lookup against the binary search, for
        // every id in order, with misses between them, and out of order
        let ids: Vec<String> = (0..300).map(|i| format!("p{:03}", i * 3)).collect();
        let refs: Vec<&str> = ids.iter().map(String::as_str).collect();
        let t = PhraseTable::from_ids(&refs).unwrap();
        let mut queries: Vec<String> = (0..900).map(|i| format!("p{i:03}")).collect();
        queries.push("a".into());
        queries.push("zzz".into());
        queries.sort();
        let mut from = 0;
        for q in &queries {
            assert_eq!(t.get_sorted(q, &mut from), t.get(q), "{q}");
        }
        // out of order: still the same answers
        let mut from = 0;
        for q in queries.iter().rev().chain(queries.iter().step_by(7)) {
            assert_eq!(t.get_sorted(q, &mut from), t.get(q), "{q}");
        }
    }
}
