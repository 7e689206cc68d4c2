//! [`plan`]: the check of a rename edit, in the project's default language or another one.

use super::{EditRefusal, PhraseTable, Plan, View, lookup};

/// Check a rename of `node` to `label` (in `language`, the default when `None`) against the
/// layered state `s`, and say what applying it does.
pub(super) fn plan(
    s: &impl View,
    phrases: &PhraseTable,
    node: &str,
    label: &str,
    language: Option<&str>,
) -> Result<Plan, EditRefusal> {
    let own = |x: &str| x.to_string();
    let x = lookup(phrases, node)?;
    // a language other than the default: the label in that language
    let other = match language {
        None => None,
        Some(t) => {
            let t =
                crate::model::lang::normalize_tag(t).map_err(|why| EditRefusal::BadLanguage {
                    node: own(node),
                    why,
                })?;
            (t != s.languages().default).then_some(t)
        }
    };
    let label = match crate::model::label::clean(label) {
        Ok(l) => l,
        Err(crate::model::label::LabelError::Empty) => {
            return Err(EditRefusal::EmptyLabel);
        }
        Err(why) => {
            return Err(EditRefusal::BadLabel {
                node: own(node),
                why,
            });
        }
    };
    let label = label.as_ref();
    let current = match &other {
        None => Some(s.label(x)),
        Some(t) => s
            .languages()
            .other
            .get(&x)
            .and_then(|m| m.get(t))
            .map(String::as_str),
    };
    if current == Some(label) {
        return Err(EditRefusal::SameLabel {
            node: own(node),
            label: own(label),
        });
    }
    Ok(match other {
        None => Plan::Rename(x, label.to_string()),
        Some(t) => Plan::RenameIn(x, t, label.to_string()),
    })
}
