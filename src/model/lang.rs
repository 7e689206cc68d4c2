//! Labels in several languages: language tags (BCP 47), the per-phrase labels in languages
//! other than the project's default, and the one comparison key used wherever two labels
//! are compared (NFC + Unicode case folding).
//!
//! A project without a `labels` map in `phrases.json` and without a `default_language` in
//! `project.json` is a single-language project: its labels are tagged `en` as before and no
//! output changes.

use std::collections::BTreeMap;

use oxilangtag::LanguageTag;
use unicode_normalization::UnicodeNormalization;

use super::gaussian::PhraseId;

/// The language of a single-language project's labels (what every export wrote before
/// projects could name their languages).
pub const FALLBACK_LANGUAGE: &str = "en";

/// Why a language tag is refused.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
#[error("\"{tag}\" is not a well-formed BCP 47 language tag: {message}")]
pub struct BadLanguageTag {
    /// The tag as given.
    pub tag: String,
    /// The parser's message.
    pub message: String,
}

/// Check a language tag against BCP 47 (RFC 5646) and return it in its canonical case
/// (`en`, `de-CH`, `zh-Hant-TW`, RFC 5646 §2.1.1), so `DE` and `de` name one language.
pub fn normalize_tag(tag: &str) -> Result<String, BadLanguageTag> {
    LanguageTag::parse_and_normalize(tag.trim())
        .map(LanguageTag::into_inner)
        .map_err(|e| BadLanguageTag {
            tag: tag.to_string(),
            message: e.to_string(),
        })
}

/// The comparison key of a label: Unicode canonical caseless matching (The Unicode Standard,
/// chapter 3, definition D145: NFD, full case folding, NFD again), returned in NFC. For
/// Turkish and Azerbaijani (`tr`, `az`), the Turkic entries of CaseFolding.txt (status `T`)
/// apply first: `I` folds to dotless `ı`, `İ` to `i`.
pub fn fold(label: &str, language: Option<&str>) -> String {
    let turkic = language
        .map(|l| {
            let primary = l.split('-').next().unwrap_or("").to_ascii_lowercase();
            primary == "tr" || primary == "az"
        })
        .unwrap_or(false);
    // ASCII labels (all of a synthetic million-phrase project): NFD and NFC leave them as
    // they are and full case folding maps only A–Z (to a–z) in that range
    // (CaseFolding.txt); the Turkic `I` is the one exception and takes the slow path
    if label.is_ascii() && !(turkic && label.contains('I')) {
        return label.to_ascii_lowercase();
    }
    let pre: String = if turkic {
        label
            .nfd()
            .collect::<String>()
            .replace("I\u{307}", "i")
            .replace('I', "\u{131}")
    } else {
        label.nfd().collect()
    };
    caseless::default_case_fold_str(&pre).nfd().nfc().collect()
}

/// Labels of the phrases in the languages other than the default: phrase → (language →
/// label). Sparse: only phrases that have such labels appear. Language tags are canonical
/// ([`normalize_tag`]).
pub type OtherLabels = BTreeMap<PhraseId, BTreeMap<String, String>>;

/// The languages of a project's phrase table.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct PhraseLanguages {
    /// The default language (canonical tag): the language of every phrase's main label.
    pub default: String,
    /// Labels in the other languages.
    pub other: OtherLabels,
}

impl PhraseLanguages {
    /// Every language named: the default first, then the others sorted.
    pub fn languages(&self) -> Vec<String> {
        let mut rest: Vec<String> = self
            .other
            .values()
            .flat_map(|m| m.keys().cloned())
            .filter(|l| *l != self.default)
            .collect();
        rest.sort();
        rest.dedup();
        let mut out = vec![self.default.clone()];
        out.extend(rest);
        out
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn tags_are_checked_and_put_in_canonical_case() {
        // RFC 5646 §2.1.1: language lower case, script title case, region upper case
        assert_eq!(normalize_tag("DE").unwrap(), "de");
        assert_eq!(normalize_tag("zh-hant-tw").unwrap(), "zh-Hant-TW");
        assert_eq!(normalize_tag("ja").unwrap(), "ja");
        // RFC 5646 §2.1: a primary subtag has 2–8 letters; "x-" alone and digits first fail
        for bad in ["", "e", "english language", "12", "de_DE"] {
            assert!(normalize_tag(bad).is_err(), "{bad:?}");
        }
    }

    #[test]
    fn fold_matches_case_and_canonical_equivalents() {
        // CaseFolding.txt: U+00DF ß folds to "ss" (status F); U+1E9E ẞ too
        assert_eq!(fold("Straße", None), fold("STRASSE", None));
        assert_eq!(fold("ẞ", Some("de")), "ss");
        // NFD/NFC: e + U+0301 and U+00E9 are canonically equivalent (UAX #15)
        assert_eq!(fold("Cafe\u{301}", None), fold("CAFÉ", None));
        // Greek final sigma folds to σ (CaseFolding.txt, U+03C2 status C)
        assert_eq!(fold("ΣΟΦΟΣ", None), fold("σοφος", None));
        // kana and CJK have no case: unchanged
        assert_eq!(fold("多肉植物", Some("ja")), "多肉植物");
        // Turkic entries (CaseFolding.txt status T): I → ı, İ → i
        assert_eq!(fold("KIŞ", Some("tr")), "kış");
        assert_eq!(fold("İzmir", Some("tr")), "izmir");
        assert_eq!(fold("KIŞ", Some("en")), "kiş");
    }

    #[test]
    fn ascii_fast_path_equals_the_full_fold() {
        // the full path (NFD, caseless fold, NFD, NFC) against the ASCII shortcut, for every
        // ASCII character alone and in a word; Unicode CaseFolding.txt folds only A–Z there
        fn slow(label: &str) -> String {
            caseless::default_case_fold_str(&label.nfd().collect::<String>())
                .nfd()
                .nfc()
                .collect()
        }
        for b in 0u8..128 {
            let c = b as char;
            for s in [c.to_string(), format!("Ab{c}Yz"), format!("{c}{c}")] {
                assert_eq!(fold(&s, None), slow(&s), "{s:?}");
                assert_eq!(fold(&s, Some("de")), slow(&s), "{s:?}");
                if c != 'I' {
                    assert_eq!(fold(&s, Some("tr")), slow(&s), "{s:?}");
                }
            }
        }
        // the Turkic rule still applies: I folds to dotless ı (CaseFolding.txt, status T)
        assert_eq!(fold("IRMAK", Some("tr")), "\u{131}rmak");
        assert_eq!(fold("IRMAK", None), "irmak");
    }
}
