//! Labels that collide after normalisation: two different phrases whose labels, in the same
//! language or in two different languages, are equal once compared with
//! [`crate::model::lang::fold`] (NFC + Unicode case folding).
//!
//! Such a pair is reported, never merged: `"gift"@en` (a present) and `"Gift"@de` (poison)
//! are different concepts that only look alike; two phrases both labelled "Fern" in German
//! may be a duplicate worth merging. Which it is, the curator decides.

use rayon::prelude::*;
use serde::Serialize;

use super::effective::EffectiveTree;
use super::gaussian::PhraseId;
use super::lang::fold;
use super::phrase::PhraseTable;

/// One side of a clash.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct ClashLabel {
    /// Phrase id.
    pub id: String,
    /// Language tag of the label.
    pub language: String,
    /// The label as written.
    pub label: String,
}

/// Two phrases whose labels are equal after folding.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct LabelClash {
    /// The phrase met first (lower row).
    pub a: ClashLabel,
    /// The other phrase.
    pub b: ClashLabel,
    /// Whether the two labels are in different languages.
    pub cross_language: bool,
}

/// Clashes among `(row, language, label)` triples: every pair of different phrases sharing a
/// folded key, in row order, one report per pair of phrases and languages.
fn clashes_of(
    items: Vec<(PhraseId, String, String)>,
    ids: &PhraseTable,
    same_node: &dyn Fn(PhraseId, PhraseId) -> bool,
) -> Vec<LabelClash> {
    // (folded key, item) sorted: the groups of equal keys in key order, each in item order
    // (what a map from key to items gave, without a million-entry tree of small vectors);
    // the keys are folded and sorted on the worker threads
    let mut keyed: Vec<(String, usize)> = items
        .par_iter()
        .enumerate()
        .map(|(i, (_, lang, label))| (fold(label, Some(lang)), i))
        .collect();
    keyed.par_sort_unstable();
    let mut out = Vec::new();
    for run in keyed.chunk_by(|x, y| x.0 == y.0) {
        if run.len() < 2 {
            continue;
        }
        let group: Vec<usize> = run.iter().map(|e| e.1).collect();
        for (k, &i) in group.iter().enumerate() {
            for &j in &group[k + 1..] {
                let (pa, la, sa) = &items[i];
                let (pb, lb, sb) = &items[j];
                if pa == pb || same_node(*pa, *pb) {
                    continue;
                }
                let side = |p: PhraseId, l: &str, s: &str| ClashLabel {
                    id: ids.id(p).to_string(),
                    language: l.to_string(),
                    label: s.to_string(),
                };
                let (a, b) = if (pa, la) <= (pb, lb) {
                    (side(*pa, la, sa), side(*pb, lb, sb))
                } else {
                    (side(*pb, lb, sb), side(*pa, la, sa))
                };
                out.push(LabelClash {
                    cross_language: a.language != b.language,
                    a,
                    b,
                });
            }
        }
    }
    out.sort_by(|x, y| {
        (
            ids.get(&x.a.id),
            &x.a.language,
            ids.get(&x.b.id),
            &x.b.language,
        )
            .cmp(&(
                ids.get(&y.a.id),
                &y.a.language,
                ids.get(&y.b.id),
                &y.b.language,
            ))
    });
    out.dedup();
    out
}

/// Clashes among the labels of `phrases.json` (every language).
pub fn table_clashes(phrases: &PhraseTable) -> Vec<LabelClash> {
    let default = phrases.default_language().to_string();
    let mut items = Vec::new();
    for p in 0..phrases.len() as PhraseId {
        items.push((p, default.clone(), phrases.label(p).to_string()));
        if let Some(m) = phrases.languages().and_then(|l| l.other.get(&p)) {
            for (l, s) in m {
                items.push((p, l.clone(), s.clone()));
            }
        }
    }
    clashes_of(items, phrases, &|_, _| false)
}

/// Clashes among the effective labels (renames applied) of the phrases that are not
/// excluded; a node and its own aliases do not clash with each other.
pub fn effective_clashes(eff: &EffectiveTree, phrases: &PhraseTable) -> Vec<LabelClash> {
    let mut items = Vec::new();
    for p in 0..phrases.len() as PhraseId {
        if eff.excluded[p as usize] {
            continue;
        }
        for (l, s) in eff.labels_of(p) {
            items.push((p, l.to_string(), s.to_string()));
        }
    }
    clashes_of(items, phrases, &|a, b| eff.resolve(a) == eff.resolve(b))
}

/// The clashes a label would add: phrases other than `node` with a label (any language)
/// equal to `label` in `language` after folding. For a rename's warning.
pub fn clashes_with(
    eff: &EffectiveTree,
    phrases: &PhraseTable,
    node: PhraseId,
    language: &str,
    label: &str,
) -> Vec<ClashLabel> {
    let key = fold(label, Some(language));
    let mut out = Vec::new();
    for p in 0..phrases.len() as PhraseId {
        if p == node || eff.excluded[p as usize] || eff.resolve(p) == eff.resolve(node) {
            continue;
        }
        for (l, s) in eff.labels_of(p) {
            if fold(s, Some(l)) == key {
                out.push(ClashLabel {
                    id: phrases.id(p).to_string(),
                    language: l.to_string(),
                    label: s.to_string(),
                });
            }
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::lang::PhraseLanguages;
    use crate::model::phrase::PhraseRecord;
    use crate::model::tree::Tree;
    use std::collections::BTreeMap;

    fn table() -> PhraseTable {
        let recs: Vec<PhraseRecord> = [("gifts", "gift"), ("pest-poison", "pest poison")]
            .iter()
            .map(|(i, l)| PhraseRecord {
                id: Some(i.to_string()),
                label: l.to_string(),
            })
            .collect();
        let mut t = PhraseTable::from_records(&recs).unwrap();
        let mut other = BTreeMap::new();
        other.insert(
            0,
            BTreeMap::from([("de".to_string(), "Geschenk".to_string())]),
        );
        other.insert(1, BTreeMap::from([("de".to_string(), "Gift".to_string())]));
        t.set_languages(PhraseLanguages {
            default: "en".into(),
            other,
        });
        t
    }

    #[test]
    fn a_label_equal_to_another_phrases_label_in_another_language_is_reported() {
        // "gift" (en, a present) and "Gift" (de, poison): equal after case folding
        // (CaseFolding.txt, U+0047 → U+0067), different concepts: reported, not merged
        let t = table();
        let c = table_clashes(&t);
        assert_eq!(c.len(), 1, "{c:?}");
        assert!(c[0].cross_language);
        assert_eq!(
            (c[0].a.id.as_str(), c[0].a.language.as_str()),
            ("gifts", "en")
        );
        assert_eq!(
            (c[0].b.id.as_str(), c[0].b.language.as_str()),
            ("pest-poison", "de")
        );
        let m = BTreeMap::from([("pest-poison".to_string(), "gifts".to_string())]);
        let eff = EffectiveTree::from_base(&Tree::from_id_map(&t, "gifts", &m).unwrap(), &t);
        assert_eq!(effective_clashes(&eff, &t), c);
        let w = clashes_with(&eff, &t, 1, "en", "GIFT");
        assert_eq!(w.len(), 1);
        assert_eq!(w[0].id, "gifts");
    }

    #[test]
    fn one_phrase_with_equal_labels_in_two_languages_is_no_clash() {
        // "Aloe"@de and "aloe"@en of the same phrase: one concept, nothing to report
        let recs = vec![PhraseRecord {
            id: Some("aloe".into()),
            label: "aloe".into(),
        }];
        let mut t = PhraseTable::from_records(&recs).unwrap();
        t.set_languages(PhraseLanguages {
            default: "en".into(),
            other: BTreeMap::from([(0, BTreeMap::from([("de".into(), "Aloe".into())]))]),
        });
        assert!(table_clashes(&t).is_empty());
    }
}
