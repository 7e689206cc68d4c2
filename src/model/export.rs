//! Exports of the effective tree: W3C SKOS in Turtle, CSV and JSON.
//!
//! Every export holds the deployed tree only: excluded phrases are left out, merged-away
//! phrases appear as alternative labels of the node they were merged into. Nodes are written
//! in pre-order (children by row), so the same project gives byte-identical files.

use std::collections::BTreeMap;

use oxrdf::vocab::rdf;
use oxrdf::{Literal, NamedNode, NamedNodeRef, TripleRef};
use oxttl::TurtleSerializer;
use serde::Serialize;

use super::effective::EffectiveTree;
use super::gaussian::PhraseId;
use super::phrase::PhraseTable;

/// The SKOS core namespace (W3C SKOS Reference, 2009).
pub const SKOS_NS: &str = "http://www.w3.org/2004/02/skos/core#";
/// Language tag of every label of a single-language project.
pub const LABEL_LANGUAGE: &str = crate::model::lang::FALLBACK_LANGUAGE;
/// Base IRI used when none is given (example.org is reserved for examples, RFC 2606).
pub const DEFAULT_BASE_IRI: &str = "http://example.org/treewright/";

/// SKOS terms used by the export.
pub mod skos {
    use oxrdf::NamedNodeRef;

    /// `skos:Concept`.
    pub const CONCEPT: NamedNodeRef<'_> =
        NamedNodeRef::new_unchecked("http://www.w3.org/2004/02/skos/core#Concept");
    /// `skos:ConceptScheme`.
    pub const CONCEPT_SCHEME: NamedNodeRef<'_> =
        NamedNodeRef::new_unchecked("http://www.w3.org/2004/02/skos/core#ConceptScheme");
    /// `skos:inScheme`.
    pub const IN_SCHEME: NamedNodeRef<'_> =
        NamedNodeRef::new_unchecked("http://www.w3.org/2004/02/skos/core#inScheme");
    /// `skos:hasTopConcept`.
    pub const HAS_TOP_CONCEPT: NamedNodeRef<'_> =
        NamedNodeRef::new_unchecked("http://www.w3.org/2004/02/skos/core#hasTopConcept");
    /// `skos:topConceptOf`.
    pub const TOP_CONCEPT_OF: NamedNodeRef<'_> =
        NamedNodeRef::new_unchecked("http://www.w3.org/2004/02/skos/core#topConceptOf");
    /// `skos:prefLabel`.
    pub const PREF_LABEL: NamedNodeRef<'_> =
        NamedNodeRef::new_unchecked("http://www.w3.org/2004/02/skos/core#prefLabel");
    /// `skos:altLabel`.
    pub const ALT_LABEL: NamedNodeRef<'_> =
        NamedNodeRef::new_unchecked("http://www.w3.org/2004/02/skos/core#altLabel");
    /// `skos:broader`.
    pub const BROADER: NamedNodeRef<'_> =
        NamedNodeRef::new_unchecked("http://www.w3.org/2004/02/skos/core#broader");
    /// `skos:narrower`.
    pub const NARROWER: NamedNodeRef<'_> =
        NamedNodeRef::new_unchecked("http://www.w3.org/2004/02/skos/core#narrower");
    /// `skos:notation` (carries the stable phrase id).
    pub const NOTATION: NamedNodeRef<'_> =
        NamedNodeRef::new_unchecked("http://www.w3.org/2004/02/skos/core#notation");
}

/// Why an export could not be produced.
#[derive(Debug, thiserror::Error)]
pub enum ExportError {
    /// The base IRI (or an IRI built from it) is not a valid IRI.
    #[error("--base-iri: \"{iri}\" is not a valid absolute IRI: {message}")]
    BadIri {
        /// The offending IRI.
        iri: String,
        /// The parser's message.
        message: String,
    },
    /// The serialiser failed.
    #[error("writing Turtle: {0}")]
    Write(#[from] std::io::Error),
}

/// The export formats: one enum for every front end (the CLI's `--format` and the
/// workbench's export dialog).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum Format {
    /// W3C SKOS concept scheme in Turtle.
    Skos,
    /// One row per node: `id,label,parent,depth,aliases,status`.
    Csv,
    /// The `tree.json` schema plus aliases and exclusions.
    Json,
}

/// Why a format name was not understood.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
#[error("unknown export format \"{0}\" (expected skos, csv or json)")]
pub struct UnknownFormat(pub String);

impl Format {
    /// Every format, in the order menus list them.
    pub const ALL: [Format; 3] = [Format::Skos, Format::Csv, Format::Json];

    /// The name used on the command line.
    pub fn name(self) -> &'static str {
        match self {
            Format::Skos => "skos",
            Format::Csv => "csv",
            Format::Json => "json",
        }
    }

    /// File extension (without the dot).
    pub fn extension(self) -> &'static str {
        match self {
            Format::Skos => "ttl",
            Format::Csv => "csv",
            Format::Json => "json",
        }
    }

    /// Render the effective tree in this format. `base_iri` and `scheme_label` are used by
    /// SKOS only.
    pub fn render(
        self,
        eff: &EffectiveTree,
        phrases: &PhraseTable,
        base_iri: &str,
        scheme_label: &str,
    ) -> Result<String, ExportError> {
        Ok(match self {
            Format::Skos => export_skos(eff, phrases, base_iri, scheme_label)?,
            Format::Csv => export_csv(eff, phrases),
            Format::Json => export_json(eff, phrases),
        })
    }
}

impl std::fmt::Display for Format {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(self.name())
    }
}

impl std::str::FromStr for Format {
    type Err = UnknownFormat;

    fn from_str(s: &str) -> Result<Self, Self::Err> {
        Format::ALL
            .into_iter()
            .find(|f| f.name().eq_ignore_ascii_case(s.trim()))
            .ok_or_else(|| UnknownFormat(s.to_string()))
    }
}

/// Percent-encode every byte outside RFC 3986's unreserved set.
fn iri_escape(id: &str) -> String {
    let mut s = String::with_capacity(id.len());
    for b in id.bytes() {
        if b.is_ascii_alphanumeric() || matches!(b, b'-' | b'.' | b'_' | b'~') {
            s.push(b as char);
        } else {
            s.push_str(&format!("%{b:02X}"));
        }
    }
    s
}

/// The concept IRI prefix and the scheme IRI for a base IRI: concepts are
/// `<prefix><escaped id>`, the scheme is the prefix without its final `/` or `#`.
pub fn iris_for_base(base_iri: &str) -> (String, String) {
    let prefix = if base_iri.ends_with('/') || base_iri.ends_with('#') {
        base_iri.to_string()
    } else {
        format!("{base_iri}/")
    };
    let scheme = prefix[..prefix.len() - 1].to_string();
    (prefix, scheme)
}

/// IRI of the concept for phrase id `id` under `base_iri`.
pub fn concept_iri(base_iri: &str, id: &str) -> String {
    format!("{}{}", iris_for_base(base_iri).0, iri_escape(id))
}

fn named(iri: String) -> Result<NamedNode, ExportError> {
    NamedNode::new(iri.clone()).map_err(|e| ExportError::BadIri {
        iri,
        message: e.to_string(),
    })
}

fn lang(label: &str, tag: &str) -> Literal {
    // every tag was checked as BCP 47 (and put in canonical case) when it entered the
    // project, so the checked constructor is not needed
    Literal::new_language_tagged_literal_unchecked(label, tag)
}

/// Alternative labels of a node: the labels of its aliases, without duplicates and without
/// its preferred label (SKOS Reference S13: prefLabel and altLabel are disjoint).
pub fn alt_labels(eff: &EffectiveTree, p: PhraseId) -> Vec<&str> {
    alt_labels_in(eff, p, &eff.languages.default)
}

/// [`alt_labels`] in one language: the aliases' labels in `language` (aliases without one
/// in it give none), without duplicates and without the node's preferred label in it.
pub fn alt_labels_in<'a>(eff: &'a EffectiveTree, p: PhraseId, language: &str) -> Vec<&'a str> {
    let pref = eff.label_in_opt(p, language);
    let mut out: Vec<&str> = Vec::new();
    for &a in &eff.aliases[p as usize] {
        let Some(l) = eff.label_in_opt(a, language) else {
            continue;
        };
        if Some(l) != pref && !out.contains(&l) {
            out.push(l);
        }
    }
    out
}

/// The effective tree as a SKOS concept scheme in Turtle: one `skos:ConceptScheme` labelled
/// `scheme_label`, the root as its top concept (`skos:hasTopConcept`/`skos:topConceptOf`),
/// one `skos:Concept` per node with `skos:prefLabel`, `skos:notation` (the phrase id),
/// `skos:altLabel` per merged alias, `skos:broader`/`skos:narrower`; excluded phrases are
/// left out.
pub fn export_skos(
    eff: &EffectiveTree,
    phrases: &PhraseTable,
    base_iri: &str,
    scheme_label: &str,
) -> Result<String, ExportError> {
    let (_, scheme_iri) = iris_for_base(base_iri);
    let scheme = named(scheme_iri)?;
    let order = eff.tree.preorder();
    let mut iri: BTreeMap<PhraseId, NamedNode> = BTreeMap::new();
    for &p in &order {
        iri.insert(p, named(concept_iri(base_iri, phrases.id(p)))?);
    }
    let mut w = TurtleSerializer::new()
        .with_prefix("skos", SKOS_NS)
        .map_err(|e| ExportError::BadIri {
            iri: SKOS_NS.into(),
            message: e.to_string(),
        })?
        .for_writer(Vec::new());
    let root = eff.tree.root();
    let s = scheme.as_ref();
    w.serialize_triple(TripleRef::new(s, rdf::TYPE, skos::CONCEPT_SCHEME))?;
    let default = eff.languages.default.as_str();
    let languages = eff.languages.languages();
    w.serialize_triple(TripleRef::new(
        s,
        skos::PREF_LABEL,
        lang(scheme_label, default).as_ref(),
    ))?;
    w.serialize_triple(TripleRef::new(
        s,
        skos::HAS_TOP_CONCEPT,
        iri[&root].as_ref(),
    ))?;
    for &p in &order {
        let c: NamedNodeRef = iri[&p].as_ref();
        w.serialize_triple(TripleRef::new(c, rdf::TYPE, skos::CONCEPT))?;
        w.serialize_triple(TripleRef::new(c, skos::IN_SCHEME, s))?;
        if p == root {
            w.serialize_triple(TripleRef::new(c, skos::TOP_CONCEPT_OF, s))?;
        }
        // SKOS Reference S14: at most one prefLabel per language tag
        for (tag, label) in eff.labels_of(p) {
            w.serialize_triple(TripleRef::new(
                c,
                skos::PREF_LABEL,
                lang(label, tag).as_ref(),
            ))?;
        }
        let notation = Literal::new_simple_literal(phrases.id(p));
        w.serialize_triple(TripleRef::new(c, skos::NOTATION, notation.as_ref()))?;
        for tag in &languages {
            for a in alt_labels_in(eff, p, tag) {
                w.serialize_triple(TripleRef::new(c, skos::ALT_LABEL, lang(a, tag).as_ref()))?;
            }
        }
        if let Some(par) = eff.tree.parent(p) {
            w.serialize_triple(TripleRef::new(c, skos::BROADER, iri[&par].as_ref()))?;
        }
        for ch in eff.tree.children(p) {
            w.serialize_triple(TripleRef::new(c, skos::NARROWER, iri[ch].as_ref()))?;
        }
    }
    let bytes = w.finish()?;
    String::from_utf8(bytes).map_err(|e| ExportError::Write(std::io::Error::other(e)))
}

/// The effective tree as CSV with the header `id,label,parent,depth,aliases,status`: one row
/// per node in pre-order; `parent` is empty for the root, `depth` is 0 at the root,
/// `aliases` holds the alias labels joined by `|`, `status` the review state.
pub fn export_csv(eff: &EffectiveTree, phrases: &PhraseTable) -> String {
    let depths = eff.tree.depths();
    let mut w = csv::WriterBuilder::new()
        .terminator(csv::Terminator::Any(b'\n'))
        .from_writer(Vec::new());
    // one `label@<tag>` column per language beyond the default (none in a single-language
    // project, whose file is unchanged)
    let others: Vec<String> = eff.languages.languages().into_iter().skip(1).collect();
    let mut header: Vec<String> = ["id", "label", "parent", "depth", "aliases", "status"]
        .iter()
        .map(|s| s.to_string())
        .collect();
    header.extend(others.iter().map(|t| format!("label@{t}")));
    let mut rows: Vec<Vec<String>> = vec![header];
    for p in eff.tree.preorder() {
        let i = p as usize;
        let aliases: Vec<&str> = eff.aliases[i].iter().map(|&a| eff.label(a)).collect();
        let mut row = vec![
            phrases.id(p).to_string(),
            eff.label(p).to_string(),
            eff.tree
                .parent(p)
                .map(|x| phrases.id(x).to_string())
                .unwrap_or_default(),
            depths[i].to_string(),
            aliases.join("|"),
            eff.review[i].as_str().to_string(),
        ];
        row.extend(
            others
                .iter()
                .map(|t| eff.label_in_opt(p, t).unwrap_or_default().to_string()),
        );
        rows.push(row);
    }
    for r in &rows {
        // writing to an in-memory buffer does not fail
        let _ = w.write_record(r);
    }
    let bytes = w.into_inner().unwrap_or_default();
    String::from_utf8(bytes).unwrap_or_default()
}

/// The JSON export: the `tree.json` schema (`root`, `parent`) plus `aliases`, `excluded`
/// and `renamed`.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, serde::Deserialize)]
#[serde(deny_unknown_fields)]
pub struct EffectiveTreeFile {
    /// Root id.
    pub root: String,
    /// Child id → parent id.
    pub parent: BTreeMap<String, String>,
    /// Node id → ids of the phrases merged into it (nodes with aliases only).
    pub aliases: BTreeMap<String, Vec<String>>,
    /// Excluded phrase ids, sorted.
    pub excluded: Vec<String>,
    /// Node or alias id → effective label, where it differs from `phrases.json`.
    #[serde(default, skip_serializing_if = "BTreeMap::is_empty")]
    pub renamed: BTreeMap<String, String>,
    /// The default language, in a project that names its languages.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub default_language: Option<String>,
    /// Node or alias id → language → effective label, for every phrase with a label in a
    /// language other than the default (the default-language label included).
    #[serde(default, skip_serializing_if = "BTreeMap::is_empty")]
    pub labels: BTreeMap<String, BTreeMap<String, String>>,
}

/// Build the JSON export's value.
pub fn effective_tree_file(eff: &EffectiveTree, phrases: &PhraseTable) -> EffectiveTreeFile {
    let tf = eff.tree.to_file(phrases);
    let mut aliases = BTreeMap::new();
    let mut renamed = BTreeMap::new();
    let mut labels = BTreeMap::new();
    let mut excluded = Vec::new();
    for p in 0..phrases.len() as PhraseId {
        let i = p as usize;
        if eff.tree.is_placed(p) && !eff.aliases[i].is_empty() {
            let mut v: Vec<String> = eff.aliases[i]
                .iter()
                .map(|&a| phrases.id(a).to_string())
                .collect();
            v.sort();
            aliases.insert(phrases.id(p).to_string(), v);
        }
        if eff.excluded[i] {
            excluded.push(phrases.id(p).to_string());
        } else if eff.tree.is_placed(p) || eff.alias_of[i].is_some() {
            if eff.label(p) != phrases.label(p) {
                renamed.insert(phrases.id(p).to_string(), eff.label(p).to_string());
            }
            if eff.languages.other.get(&p).is_some_and(|m| !m.is_empty()) {
                let m = eff
                    .labels_of(p)
                    .into_iter()
                    .map(|(t, l)| (t.to_string(), l.to_string()))
                    .collect();
                labels.insert(phrases.id(p).to_string(), m);
            }
        }
    }
    excluded.sort();
    EffectiveTreeFile {
        root: tf.root,
        parent: tf.parent,
        aliases,
        excluded,
        renamed,
        default_language: (phrases.languages().is_some() || !eff.languages.other.is_empty())
            .then(|| eff.languages.default.clone()),
        labels,
    }
}

/// The JSON export as pretty text with a trailing newline.
pub fn export_json(eff: &EffectiveTree, phrases: &PhraseTable) -> String {
    let bytes = super::fsutil::to_json_pretty(&effective_tree_file(eff, phrases));
    String::from_utf8(bytes).unwrap_or_default()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::edit::{Edit, EditRecord};
    use crate::model::overrides::apply;
    use crate::model::phrase::PhraseRecord;
    use crate::model::tree::Tree;

    fn setup() -> (PhraseTable, EffectiveTree) {
        let recs: Vec<PhraseRecord> = [
            "plants",
            "peat free compost",
            "compost",
            "fern",
            "slug resistant",
        ]
        .iter()
        .map(|l| PhraseRecord {
            id: None,
            label: l.to_string(),
        })
        .collect();
        let t = PhraseTable::from_records(&recs).unwrap();
        let m = [
            ("peat-free-compost", "plants"),
            ("compost", "plants"),
            ("fern", "plants"),
            ("slug-resistant", "fern"),
        ]
        .iter()
        .map(|(a, b)| (a.to_string(), b.to_string()))
        .collect();
        let base = Tree::from_id_map(&t, "plants", &m).unwrap();
        let r = |edit| EditRecord {
            edit,
            author: "ines".into(),
            time: "2026-12-02T10:00:00Z".into(),
            note: None,
        };
        let (eff, p) = apply(
            &base,
            &t,
            &[
                r(Edit::Merge {
                    sources: vec!["compost".into()],
                    into: "peat-free-compost".into(),
                }),
                r(Edit::Exclude {
                    node: "fern".into(),
                }),
            ],
        );
        assert!(p.is_empty());
        (t, eff)
    }

    #[test]
    fn csv_has_the_documented_columns() {
        let (t, eff) = setup();
        let csv = export_csv(&eff, &t);
        assert_eq!(
            csv,
            "id,label,parent,depth,aliases,status\n\
             plants,plants,,0,,unreviewed\n\
             peat-free-compost,peat free compost,plants,1,compost,unreviewed\n\
             slug-resistant,slug resistant,plants,1,,unreviewed\n"
        );
    }

    #[test]
    fn json_has_tree_schema_plus_aliases_and_excluded() {
        let (t, eff) = setup();
        let v: serde_json::Value = serde_json::from_str(&export_json(&eff, &t)).unwrap();
        assert_eq!(v["root"], "plants");
        assert_eq!(v["parent"]["slug-resistant"], "plants");
        assert_eq!(v["aliases"]["peat-free-compost"][0], "compost");
        assert_eq!(v["excluded"][0], "fern");
        assert!(v["parent"].get("fern").is_none());
    }

    #[test]
    fn iris_and_bad_base() {
        assert_eq!(
            concept_iri("http://example.org/t", "peat free/x"),
            "http://example.org/t/peat%20free%2Fx"
        );
        assert_eq!(
            iris_for_base("http://example.org/t#").1,
            "http://example.org/t"
        );
        let (t, eff) = setup();
        let e = export_skos(&eff, &t, "not an iri", "x").unwrap_err();
        assert!(matches!(e, ExportError::BadIri { .. }), "{e}");
        let a = export_skos(&eff, &t, DEFAULT_BASE_IRI, "Fernhollow tags").unwrap();
        let b = export_skos(&eff, &t, DEFAULT_BASE_IRI, "Fernhollow tags").unwrap();
        assert_eq!(a, b);
        assert!(a.contains("@prefix skos:"));
        assert!(!a.contains("/fern>"));
    }
}
