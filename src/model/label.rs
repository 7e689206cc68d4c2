//! One rule for every display label that enters the project: from `phrases.json`,
//! `users.json`, a rename, or a rename stored in the override file.
//!
//! A label is
//! - **normalised to Unicode NFC**, so that the same text typed two ways (a precomposed
//!   `é` or an `e` followed by a combining acute accent) is one label;
//! - **trimmed**: white space before and after the text is dropped (never refused), inner
//!   white space is kept as typed;
//! - **refused** when it holds a control character (tab, new line, bell, DEL, the C1 block,
//!   ...) or a line / paragraph separator (U+2028, U+2029): these would break the CSV and
//!   Turtle exports and the single-line views;
//! - **refused** when nothing is left after trimming.
//!
//! Merges bring no new text: the merged-away nodes' labels (already checked) become aliases.

use std::borrow::Cow;

use unicode_normalization::{IsNormalized, UnicodeNormalization, is_nfc_quick};

/// Why a label is refused.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
pub enum LabelError {
    /// Nothing left after trimming.
    #[error("the label is empty")]
    Empty,
    /// A control character (or line / paragraph separator) inside the label.
    #[error("the label holds the control character {code} at character {at}")]
    Control {
        /// The character as `U+XXXX`.
        code: String,
        /// Its position in the label (0-based, in characters of the label as given).
        at: usize,
    },
}

/// Whether `c` may not appear in a label.
pub fn is_forbidden(c: char) -> bool {
    c.is_control() || c == '\u{2028}' || c == '\u{2029}'
}

/// Check and normalise a label: refuse control characters and empty labels, trim surrounding
/// white space, normalise to NFC. Borrows when the label is already clean (the common case:
/// loading a large phrase table copies nothing).
pub fn clean(raw: &str) -> Result<Cow<'_, str>, LabelError> {
    if let Some((at, c)) = raw.chars().enumerate().find(|&(_, c)| is_forbidden(c)) {
        return Err(LabelError::Control {
            code: format!("U+{:04X}", c as u32),
            at,
        });
    }
    let t = raw.trim();
    if t.is_empty() {
        return Err(LabelError::Empty);
    }
    if is_nfc_quick(t.chars()) == IsNormalized::Yes {
        Ok(Cow::Borrowed(t))
    } else {
        // NFC never adds leading or trailing white space, so the result stays trimmed
        Ok(Cow::Owned(t.nfc().collect()))
    }
}

/// [`clean`] returning an owned string.
pub fn clean_owned(raw: &str) -> Result<String, LabelError> {
    clean(raw).map(Cow::into_owned)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn clean_labels_pass_unchanged_and_borrowed() {
        let c = clean("peat free compost").unwrap();
        assert!(matches!(c, Cow::Borrowed("peat free compost")));
        // inner white space is kept as typed
        assert_eq!(clean("bulbs  and  corms").unwrap(), "bulbs  and  corms");
    }

    #[test]
    fn surrounding_white_space_is_trimmed() {
        assert_eq!(clean("  seed trays \u{a0}").unwrap(), "seed trays");
    }

    #[test]
    fn control_characters_are_refused_with_their_code_and_place() {
        // tab, bell, new line, DEL, a C1 control (NEL) and the line separator
        for (s, code, at) in [
            ("gift\tideas", "U+0009", 4),
            ("gift ideas\u{7}", "U+0007", 10),
            ("a\nb", "U+000A", 1),
            ("x\u{7f}", "U+007F", 1),
            ("x\u{85}y", "U+0085", 1),
            ("x\u{2028}y", "U+2028", 1),
        ] {
            assert_eq!(
                clean(s),
                Err(LabelError::Control {
                    code: code.into(),
                    at
                }),
                "{s:?}"
            );
        }
        // a trailing tab is refused, not trimmed: it is a control character
        assert!(matches!(clean("gifts\t"), Err(LabelError::Control { .. })));
    }

    #[test]
    fn empty_after_trimming_is_refused() {
        assert_eq!(clean("   "), Err(LabelError::Empty));
        assert_eq!(clean(""), Err(LabelError::Empty));
    }

    #[test]
    fn the_two_spellings_of_an_accent_become_one_label() {
        // Unicode Standard Annex #15 (Normalization Forms): U+0065 U+0301 composes to U+00E9
        // under NFC; U+212B ANGSTROM SIGN is a singleton that NFC maps to U+00C5
        let decomposed = "cafe\u{301} seating";
        let precomposed = "caf\u{e9} seating";
        assert_ne!(decomposed, precomposed);
        assert_eq!(clean(decomposed).unwrap(), precomposed);
        assert_eq!(clean(precomposed).unwrap(), precomposed);
        assert_eq!(clean("\u{212b}").unwrap(), "\u{c5}");
    }
}
