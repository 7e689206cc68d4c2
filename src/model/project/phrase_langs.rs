//! `phrases.json` rows with labels in several languages:
//! `{"id": "succulent", "labels": {"en": "succulent", "de": "Sukkulente", "ja": "多肉植物"}}`,
//! beside or instead of `"label"`, and the manifest's `default_language`.
//!
//! `"label"` is the label in the project's default language (`en` when the manifest names
//! none). A row without `"label"` takes `labels[default]`; a row with both must agree. Every
//! key is checked as a BCP 47 tag and stored in canonical case; every label goes through the
//! label rule ([`crate::model::label::clean`]).

use std::collections::BTreeMap;

use serde::Deserialize;

use super::LoadError;
use crate::model::gaussian::PhraseId;
use crate::model::label;
use crate::model::lang::{FALLBACK_LANGUAGE, PhraseLanguages, normalize_tag};
use crate::model::phrase::PhraseRecord;

/// One row of `phrases.json` as written in the file.
#[derive(Debug, Clone, PartialEq, Eq, Deserialize)]
pub struct PhraseFileRecord {
    /// Stable unique id; derived from the label when missing.
    #[serde(default)]
    pub id: Option<String>,
    /// Label in the default language.
    #[serde(default)]
    pub label: Option<String>,
    /// Labels by language tag.
    #[serde(default)]
    pub labels: Option<BTreeMap<String, String>>,
}

/// The manifest's `default_language`, checked (`None` when absent).
pub fn default_language(value: Option<&str>, manifest: &str) -> Result<Option<String>, LoadError> {
    value
        .map(|t| {
            normalize_tag(t)
                .map_err(|e| LoadError::invalid(manifest, "default_language", e.to_string()))
        })
        .transpose()
}

/// Split the file's rows into the phrase records (main label = default language) and the
/// labels in the other languages. Returns `None` for the languages when the manifest names no
/// default language and no row has a `labels` map (a single-language project, as before).
pub fn split_languages(
    rows: Vec<PhraseFileRecord>,
    default: Option<String>,
    file: &str,
) -> Result<(Vec<PhraseRecord>, Option<PhraseLanguages>), LoadError> {
    let any_map = rows.iter().any(|r| r.labels.is_some());
    let named = default.is_some();
    let default = default.unwrap_or_else(|| FALLBACK_LANGUAGE.to_string());
    let mut other: BTreeMap<PhraseId, BTreeMap<String, String>> = BTreeMap::new();
    let mut out = Vec::with_capacity(rows.len());
    for (row, r) in rows.into_iter().enumerate() {
        let name = match &r.id {
            Some(id) => format!("row {row} (phrase \"{id}\")"),
            None => format!("row {row}"),
        };
        let mut map: BTreeMap<String, String> = BTreeMap::new();
        for (tag, text) in r.labels.unwrap_or_default() {
            let lang = normalize_tag(&tag).map_err(|e| {
                LoadError::invalid(file, format!("{name} labels key \"{tag}\""), e.to_string())
            })?;
            let text = label::clean(&text)
                .map_err(|e| {
                    LoadError::invalid(file, format!("{name} labels.{lang}"), e.to_string())
                })?
                .into_owned();
            if map.insert(lang.clone(), text).is_some() {
                return Err(LoadError::invalid(
                    file,
                    format!("{name} labels key \"{tag}\""),
                    format!("names the language \"{lang}\" a second time"),
                ));
            }
        }
        let from_map = map.remove(&default);
        let label = match (r.label, from_map) {
            (Some(l), None) => l,
            (None, Some(m)) => m,
            (Some(l), Some(m)) => {
                // compare after the label rule, as the loader stores them
                let same = label::clean(&l).map(|c| c == m.as_str()).unwrap_or(false);
                if !same {
                    return Err(LoadError::invalid(
                        file,
                        format!("{name} labels.{default}"),
                        format!(
                            "\"{m}\" differs from \"label\" (\"{l}\"); \"label\" is the label in \
                             the default language \"{default}\""
                        ),
                    ));
                }
                l
            }
            (None, None) => {
                return Err(LoadError::invalid(
                    file,
                    format!("{name} label"),
                    format!(
                        "missing: give \"label\" or a label in the default language \
                         \"{default}\" under \"labels\""
                    ),
                ));
            }
        };
        if !map.is_empty() {
            other.insert(row as PhraseId, map);
        }
        out.push(PhraseRecord { id: r.id, label });
    }
    let langs = (named || any_map).then_some(PhraseLanguages { default, other });
    Ok((out, langs))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn rows(json: &str) -> Vec<PhraseFileRecord> {
        serde_json::from_str(json).unwrap()
    }

    #[test]
    fn single_language_rows_give_no_languages() {
        let (recs, langs) =
            split_languages(rows(r#"[{"id":"a","label":"fern"}]"#), None, "p.json").unwrap();
        assert_eq!(recs[0].label, "fern");
        assert!(langs.is_none());
    }

    #[test]
    fn labels_map_beside_or_instead_of_label() {
        let (recs, langs) = split_languages(
            rows(
                r#"[{"id":"a","label":"succulent","labels":{"DE":"Sukkulente","ja":"多肉植物"}},
                    {"id":"b","labels":{"en":"fern","de":"Farn"}}]"#,
            ),
            None,
            "p.json",
        )
        .unwrap();
        assert_eq!(recs[1].label, "fern");
        let l = langs.unwrap();
        assert_eq!(l.default, "en");
        assert_eq!(l.other[&0]["de"], "Sukkulente");
        assert_eq!(l.other[&1]["de"], "Farn");
        assert_eq!(l.languages(), vec!["en", "de", "ja"]);
    }

    #[test]
    fn default_language_picks_the_main_label() {
        let (recs, langs) = split_languages(
            rows(r#"[{"id":"a","labels":{"en":"fern","de":"Farn"}}]"#),
            Some("de".into()),
            "p.json",
        )
        .unwrap();
        assert_eq!(recs[0].label, "Farn");
        assert_eq!(langs.unwrap().other[&0]["en"], "fern");
    }

    #[test]
    fn bad_rows_name_file_row_and_field() {
        let cases = [
            (
                r#"[{"id":"a","labels":{"en_GB":"x"}}]"#,
                "labels key \"en_GB\"",
            ),
            (
                r#"[{"id":"a","labels":{"de":"x"}}]"#,
                "row 0 (phrase \"a\") label",
            ),
            (
                r#"[{"id":"a","label":"fern","labels":{"en":"ferns"}}]"#,
                "labels.en",
            ),
            (
                r#"[{"id":"a","label":"x","labels":{"de":"a\tb"}}]"#,
                "labels.de",
            ),
            (
                r#"[{"id":"a","label":"x","labels":{"de":"a","DE":"b"}}]"#,
                "a second time",
            ),
        ];
        for (json, needle) in cases {
            let e = split_languages(rows(json), None, "p.json").unwrap_err();
            let msg = e.to_string();
            assert!(msg.contains("p.json") && msg.contains(needle), "{msg}");
        }
    }
}
