//! A hand-made taxonomy in SKOS (Turtle or RDF/XML) read as the project's tree.
//!
//! Concepts are matched to phrases by `skos:notation` (the phrase id), then by
//! `skos:prefLabel`, then by `skos:altLabel` (labels compared ignoring case and runs of white
//! space). `skos:broader` and `skos:narrower` are both read; a concept with several broader
//! concepts keeps the first in document order (reported). A concept that matches no phrase is
//! left out and its narrower concepts hang from its nearest matched broader concept. Cycles
//! among the concepts are refused.

use std::collections::{BTreeMap, HashMap};
use std::path::Path;

use oxrdf::{NamedOrBlankNode, Term};
use oxttl::TurtleParser;
use serde::Serialize;

use super::LoadError;
use super::manifest::Limits;
use super::read::read_bytes_limited;
use crate::model::export::skos;
use crate::model::gaussian::PhraseId;
use crate::model::phrase::PhraseTable;
use crate::model::tree::TreeFile;

/// Notations, preferred labels and alternative labels of one subject, in document order.
type ConceptLabels = (
    Vec<String>,
    Vec<String>,
    Vec<String>,
    Vec<(bool, String, String)>,
);

/// Whether `path` names a SKOS file this build reads (by extension: `.ttl` for Turtle,
/// `.rdf` or `.owl` for RDF/XML).
pub fn is_skos_path(path: &Path) -> bool {
    path.extension().is_some_and(|e| {
        ["ttl", "rdf", "owl"]
            .iter()
            .any(|x| e.eq_ignore_ascii_case(x))
    })
}

/// Whether `file` is read as RDF/XML (by extension `.rdf` or `.owl`; otherwise Turtle).
fn is_rdf_xml(file: &str) -> bool {
    Path::new(file)
        .extension()
        .is_some_and(|e| e.eq_ignore_ascii_case("rdf") || e.eq_ignore_ascii_case("owl"))
}

/// What reading a SKOS taxonomy against the phrase table found.
#[derive(Debug, Clone, Default, PartialEq, Eq, Serialize)]
pub struct SkosReport {
    /// Concepts in the file.
    pub concepts: usize,
    /// Concepts matched to a phrase.
    pub matched: usize,
    /// Concepts that match no phrase: `IRI ("label")`, in document order.
    pub unmatched_concepts: Vec<String>,
    /// Phrase ids that no concept matches (they stay unplaced), in row order.
    pub unmatched_phrases: Vec<String>,
    /// Concepts with several broader concepts: which one was kept and which were ignored.
    pub several_broader: Vec<String>,
    /// Concepts that match a phrase an earlier concept already matched (left out).
    pub duplicate_matches: Vec<String>,
}

/// A SKOS taxonomy read as a tree over the project's phrases.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct SkosTree {
    /// The tree in the tree-file form (phrase ids).
    pub tree: TreeFile,
    /// What matched and what did not.
    pub report: SkosReport,
}

/// One concept as read.
#[derive(Default)]
struct Concept {
    key: String,
    notations: Vec<String>,
    pref: Vec<String>,
    alt: Vec<String>,
    /// Language-tagged labels: (is a prefLabel, language in lower case, value).
    tagged: Vec<(bool, String, String)>,
}

/// Runs of white space made one space, ends trimmed, then NFC and Unicode case folding
/// ([`crate::model::lang::fold`]), so a label matches in any case and either normal form.
fn norm(s: &str) -> String {
    crate::model::lang::fold(&s.split_whitespace().collect::<Vec<_>>().join(" "), None)
}

fn subject_key(s: &NamedOrBlankNode) -> String {
    match s {
        NamedOrBlankNode::NamedNode(n) => n.as_str().to_string(),
        other => other.to_string(),
    }
}

fn term_key(t: &Term) -> Option<String> {
    match t {
        Term::NamedNode(n) => Some(n.as_str().to_string()),
        Term::BlankNode(b) => Some(b.to_string()),
        _ => None,
    }
}

/// Read a SKOS Turtle file as a tree over `phrases`.
pub fn load_skos_tree(
    path: &Path,
    phrases: &PhraseTable,
    limits: &Limits,
) -> Result<SkosTree, LoadError> {
    let bytes = read_bytes_limited(path, limits)?;
    parse_skos_tree(&bytes, &path.display().to_string(), phrases)
}

/// Parse SKOS bytes (naming `file` in errors) as a tree over `phrases`: RDF/XML when
/// `file` ends in `.rdf` or `.owl`, Turtle otherwise.
pub fn parse_skos_tree(
    bytes: &[u8],
    file: &str,
    phrases: &PhraseTable,
) -> Result<SkosTree, LoadError> {
    let mut concepts: Vec<Concept> = Vec::new();
    let mut index: HashMap<String, usize> = HashMap::new();
    let mut intern = |key: String, concepts: &mut Vec<Concept>| -> usize {
        *index.entry(key.clone()).or_insert_with(|| {
            concepts.push(Concept {
                key,
                ..Concept::default()
            });
            concepts.len() - 1
        })
    };
    // labels of any subject, attached to concepts afterwards
    let mut props: HashMap<String, ConceptLabels> = HashMap::new();
    let mut edges: Vec<(usize, usize)> = Vec::new(); // (narrower, broader), document order
    let triples: Box<dyn Iterator<Item = Result<oxrdf::Triple, String>>> = if is_rdf_xml(file) {
        Box::new(
            oxrdfxml::RdfXmlParser::new()
                .for_slice(bytes)
                .map(|t| t.map_err(|e| e.to_string())),
        )
    } else {
        Box::new(
            TurtleParser::new()
                .for_slice(bytes)
                .map(|t| t.map_err(|e| e.to_string())),
        )
    };
    let syntax = if is_rdf_xml(file) {
        "rdf/xml"
    } else {
        "turtle"
    };
    for t in triples {
        let t = t.map_err(|e| LoadError::invalid(file, syntax, e))?;
        let s = subject_key(&t.subject);
        let p = t.predicate.as_ref();
        if p == oxrdf::vocab::rdf::TYPE && t.object == Term::from(skos::CONCEPT.into_owned()) {
            intern(s, &mut concepts);
        } else if p == skos::BROADER || p == skos::NARROWER {
            let Some(o) = term_key(&t.object) else {
                return Err(LoadError::invalid(
                    file,
                    format!("concept <{s}>"),
                    "skos:broader/skos:narrower must point at a concept, not a literal",
                ));
            };
            let a = intern(s, &mut concepts);
            let b = intern(o, &mut concepts);
            edges.push(if p == skos::BROADER { (a, b) } else { (b, a) });
        } else if let (true, Term::Literal(l)) = (
            p == skos::NOTATION || p == skos::PREF_LABEL || p == skos::ALT_LABEL,
            &t.object,
        ) {
            let e = props.entry(s).or_default();
            let v = l.value().to_string();
            if let Some(lang) = l.language().filter(|_| p != skos::NOTATION) {
                e.3.push((p == skos::PREF_LABEL, lang.to_ascii_lowercase(), v.clone()));
            }
            if p == skos::NOTATION {
                e.0.push(v)
            } else if p == skos::PREF_LABEL {
                e.1.push(v)
            } else {
                e.2.push(v)
            }
        }
    }
    for c in &mut concepts {
        if let Some((n, pl, al, tg)) = props.remove(&c.key) {
            c.notations = n;
            c.pref = pl;
            c.alt = al;
            c.tagged = tg;
        }
    }
    let nc = concepts.len();
    let label_of = |c: &Concept| {
        c.pref
            .first()
            .map(|l| format!("<{}> (\"{l}\")", c.key))
            .unwrap_or_else(|| format!("<{}>", c.key))
    };
    let mut report = SkosReport {
        concepts: nc,
        ..SkosReport::default()
    };

    // broader: the first in document order
    let mut parent: Vec<Option<usize>> = vec![None; nc];
    let mut ignored: BTreeMap<usize, Vec<usize>> = BTreeMap::new();
    for &(c, b) in &edges {
        if c == b {
            return Err(LoadError::invalid(
                file,
                format!("concept {}", label_of(&concepts[c])),
                "is its own broader concept",
            ));
        }
        match parent[c] {
            None => parent[c] = Some(b),
            Some(first) if first == b => {}
            Some(_) => {
                let v = ignored.entry(c).or_default();
                if !v.contains(&b) {
                    v.push(b);
                }
            }
        }
    }
    for (c, v) in &ignored {
        let kept = parent[*c]
            .map(|p| label_of(&concepts[p]))
            .unwrap_or_default();
        let rest: Vec<String> = v.iter().map(|&b| label_of(&concepts[b])).collect();
        report.several_broader.push(format!(
            "{}: kept {kept}, ignored {}",
            label_of(&concepts[*c]),
            rest.join(", ")
        ));
    }
    // cycles: colour walk (0 unseen, 1 on the current path, 2 done)
    let mut state = vec![0u8; nc];
    for start in 0..nc {
        let mut path = Vec::new();
        let mut x = Some(start);
        while let Some(c) = x {
            match state[c] {
                2 => break,
                1 => {
                    let at = path.iter().position(|&p| p == c).unwrap_or(0);
                    let names: Vec<String> =
                        path[at..].iter().map(|&p| label_of(&concepts[p])).collect();
                    return Err(LoadError::invalid(
                        file,
                        "skos:broader",
                        format!("cycle: {} → back to the first", names.join(" → ")),
                    ));
                }
                _ => {
                    state[c] = 1;
                    path.push(c);
                    x = parent[c];
                }
            }
        }
        for p in path {
            state[p] = 2;
        }
    }

    // match concepts to phrases
    let mut by_label: HashMap<String, PhraseId> = HashMap::new();
    for (i, l) in phrases.labels().iter().enumerate() {
        by_label.entry(norm(l)).or_insert(i as PhraseId);
    }
    // then the labels in the project's other languages (a default-language label wins)
    // and, for language-tagged literals, the labels by language: "Gift"@de finds the phrase
    // whose German label is "Gift" before any phrase whose English label is "gift"
    let mut by_lang: HashMap<(String, String), PhraseId> = HashMap::new();
    if let Some(langs) = phrases.languages() {
        let default = langs.default.to_ascii_lowercase();
        for (i, l) in phrases.labels().iter().enumerate() {
            by_lang
                .entry((default.clone(), norm(l)))
                .or_insert(i as PhraseId);
        }
        for (&p, m) in &langs.other {
            for (lang, l) in m {
                by_label.entry(norm(l)).or_insert(p);
                by_lang
                    .entry((lang.to_ascii_lowercase(), norm(l)))
                    .or_insert(p);
            }
        }
    }
    let tagged = |c: &Concept, pref: bool| {
        c.tagged
            .iter()
            .filter(|(is_pref, _, _)| *is_pref == pref)
            .find_map(|(_, lang, v)| by_lang.get(&(lang.clone(), norm(v))).copied())
    };
    let mut phrase_of: Vec<Option<PhraseId>> = vec![None; nc];
    let mut taken: Vec<Option<usize>> = vec![None; phrases.len()];
    for (ci, c) in concepts.iter().enumerate() {
        let found = c
            .notations
            .iter()
            .find_map(|n| phrases.get(n.trim()))
            .or_else(|| tagged(c, true))
            .or_else(|| c.pref.iter().find_map(|l| by_label.get(&norm(l)).copied()))
            .or_else(|| tagged(c, false))
            .or_else(|| c.alt.iter().find_map(|l| by_label.get(&norm(l)).copied()));
        match found {
            None => report.unmatched_concepts.push(label_of(c)),
            Some(p) => match taken[p as usize] {
                Some(first) => report.duplicate_matches.push(format!(
                    "{} matches phrase \"{}\" already matched by {}",
                    label_of(c),
                    phrases.id(p),
                    label_of(&concepts[first])
                )),
                None => {
                    taken[p as usize] = Some(ci);
                    phrase_of[ci] = Some(p);
                }
            },
        }
    }
    report.matched = phrase_of.iter().flatten().count();
    for (i, t) in taken.iter().enumerate() {
        if t.is_none() {
            report
                .unmatched_phrases
                .push(phrases.id(i as PhraseId).to_string());
        }
    }

    // nearest matched broader concept, memoised (the graph is acyclic here)
    let mut up: Vec<Option<Option<usize>>> = vec![None; nc];
    let mut edges_out = BTreeMap::new();
    let mut roots = Vec::new();
    for ci in 0..nc {
        let Some(p) = phrase_of[ci] else { continue };
        let mut path = Vec::new();
        let mut x = parent[ci];
        let anc = loop {
            match x {
                None => break None,
                Some(a) if phrase_of[a].is_some() => break Some(a),
                Some(a) => {
                    if let Some(known) = up[a] {
                        break known;
                    }
                    path.push(a);
                    x = parent[a];
                }
            }
        };
        for a in path {
            up[a] = Some(anc);
        }
        match anc {
            Some(a) => {
                edges_out.insert(
                    phrases.id(p).to_string(),
                    phrases.id(phrase_of[a].unwrap_or_default()).to_string(),
                );
            }
            None => roots.push(ci),
        }
    }
    match roots.len() {
        0 => Err(LoadError::invalid(
            file,
            "concepts",
            format!(
                "none of the {nc} concepts matches a phrase (by skos:notation = phrase id, or by label)"
            ),
        )),
        1 => Ok(SkosTree {
            tree: TreeFile {
                root: phrases
                    .id(phrase_of[roots[0]].unwrap_or_default())
                    .to_string(),
                parent: edges_out,
            },
            report,
        }),
        _ => {
            let names: Vec<String> = roots.iter().map(|&r| label_of(&concepts[r])).collect();
            Err(LoadError::invalid(
                file,
                "skos:broader",
                format!(
                    "several top concepts match phrases ({}); the tree needs one root: give them a common broader concept",
                    names.join(", ")
                ),
            ))
        }
    }
}
