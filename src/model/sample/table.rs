//! The demo's data table, [`fernhollow.tsv`](FERNHOLLOW_TSV): the true hierarchy of the
//! Fernhollow shop tags and the shopper profiles, compiled in with `include_str!` and
//! parsed here. The file's header comment describes the format.

/// The demo table as compiled in.
pub(super) const FERNHOLLOW_TSV: &str = include_str!("fernhollow.tsv");

/// The file name used in parse errors.
const FILE: &str = "src/model/sample/fernhollow.tsv";

/// A category under the demo root, with its sub-categories.
#[derive(Debug, Clone, PartialEq, Eq)]
pub(super) struct Category<'a> {
    /// Its label.
    pub label: &'a str,
    /// Its sub-categories, in file order.
    pub subs: Vec<SubCategory<'a>>,
}

/// A sub-category with its leaf tags.
#[derive(Debug, Clone, PartialEq, Eq)]
pub(super) struct SubCategory<'a> {
    /// Its label.
    pub label: &'a str,
    /// Its leaf tags, in file order.
    pub tags: Vec<&'a str>,
}

/// A shopper profile centred on one tag.
#[derive(Debug, Clone, PartialEq, Eq)]
pub(super) struct Shopper<'a> {
    /// Stable id.
    pub id: &'a str,
    /// Display label.
    pub label: &'a str,
    /// Label of the tag the profile is drawn around.
    pub branch: &'a str,
}

/// The whole table.
#[derive(Debug, Clone, PartialEq, Eq)]
pub(super) struct DemoTable<'a> {
    /// Categories, in file order.
    pub categories: Vec<Category<'a>>,
    /// Shoppers, in file order.
    pub shoppers: Vec<Shopper<'a>>,
}

/// A malformed line of the demo table.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
pub(super) enum TableError {
    /// The first field is not a record kind.
    #[error(
        "{FILE}:{line}: unknown record kind \"{kind}\" (expected category, sub, tag or shopper)"
    )]
    UnknownKind {
        /// 1-based line.
        line: usize,
        /// The first field.
        kind: String,
    },
    /// Too few or too many fields.
    #[error("{FILE}:{line}: a {kind} record has {want} tab-separated fields, this one has {got}")]
    FieldCount {
        /// 1-based line.
        line: usize,
        /// The record kind.
        kind: &'static str,
        /// Fields expected, the kind included.
        want: usize,
        /// Fields found.
        got: usize,
    },
    /// An empty field.
    #[error("{FILE}:{line}: field {field} of the {kind} record is empty")]
    EmptyField {
        /// 1-based line.
        line: usize,
        /// The record kind.
        kind: &'static str,
        /// 1-based field number.
        field: usize,
    },
    /// A sub-category before any category, or a tag before any sub-category.
    #[error("{FILE}:{line}: {kind} \"{label}\" comes before any {parent} record")]
    Orphan {
        /// 1-based line.
        line: usize,
        /// The record kind.
        kind: &'static str,
        /// Its label.
        label: String,
        /// The record kind it needs above it.
        parent: &'static str,
    },
}

/// Parse the table (see the header of `fernhollow.tsv` for the format).
pub(super) fn parse(text: &str) -> Result<DemoTable<'_>, TableError> {
    let mut table = DemoTable {
        categories: Vec::new(),
        shoppers: Vec::new(),
    };
    for (i, raw) in text.lines().enumerate() {
        let line = i + 1;
        if raw.trim().is_empty() || raw.starts_with('#') {
            continue;
        }
        let fields: Vec<&str> = raw.split('\t').collect();
        let (kind, want): (&'static str, usize) = match fields[0] {
            "category" => ("category", 2),
            "sub" => ("sub", 2),
            "tag" => ("tag", 2),
            "shopper" => ("shopper", 4),
            other => {
                return Err(TableError::UnknownKind {
                    line,
                    kind: other.to_string(),
                });
            }
        };
        if fields.len() != want {
            return Err(TableError::FieldCount {
                line,
                kind,
                want,
                got: fields.len(),
            });
        }
        if let Some(field) = fields.iter().position(|f| f.trim().is_empty()) {
            return Err(TableError::EmptyField {
                line,
                kind,
                field: field + 1,
            });
        }
        let orphan = |parent: &'static str| TableError::Orphan {
            line,
            kind,
            label: fields[1].to_string(),
            parent,
        };
        match kind {
            "category" => table.categories.push(Category {
                label: fields[1],
                subs: Vec::new(),
            }),
            "sub" => table
                .categories
                .last_mut()
                .ok_or_else(|| orphan("category"))?
                .subs
                .push(SubCategory {
                    label: fields[1],
                    tags: Vec::new(),
                }),
            "tag" => table
                .categories
                .last_mut()
                .and_then(|c| c.subs.last_mut())
                .ok_or_else(|| orphan("sub"))?
                .tags
                .push(fields[1]),
            _ => table.shoppers.push(Shopper {
                id: fields[1],
                label: fields[2],
                branch: fields[3],
            }),
        }
    }
    Ok(table)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_bundled_table_parses_to_the_demo_catalogue() {
        let t = parse(FERNHOLLOW_TSV).unwrap();
        let labels: Vec<&str> = t.categories.iter().map(|c| c.label).collect();
        assert_eq!(
            labels,
            [
                "plants",
                "tools",
                "compost and soil",
                "pest control",
                "garden furniture",
                "watering",
                "seasonal"
            ]
        );
        let subs: usize = t.categories.iter().map(|c| c.subs.len()).sum();
        let tags: usize = t
            .categories
            .iter()
            .flat_map(|c| &c.subs)
            .map(|s| s.tags.len())
            .sum();
        assert_eq!((subs, tags, t.shoppers.len()), (42, 259, 5));
        assert_eq!(t.categories[0].subs[0].label, "houseplants");
        assert_eq!(t.categories[0].subs[0].tags[0], "trailing houseplant");
        assert_eq!(
            t.shoppers[0],
            Shopper {
                id: "u-balcony-grower",
                label: "balcony grower: small pots, succulents, little space",
                branch: "succulents and cacti",
            }
        );
        // the written demo is byte-identical to the committed project:
        // `sample::tests::demo_from_the_table_writes_the_committed_project` and
        // tests/sample_project.rs
    }

    #[test]
    fn malformed_lines_are_named() {
        assert_eq!(
            parse("# c\n\nsub\tx\n").unwrap_err().to_string(),
            format!("{FILE}:3: sub \"x\" comes before any category record")
        );
        assert_eq!(
            parse("category\ta\ntag\tt\n").unwrap_err().to_string(),
            format!("{FILE}:2: tag \"t\" comes before any sub record")
        );
        assert_eq!(
            parse("shopper\tu\tlabel\n").unwrap_err().to_string(),
            format!("{FILE}:1: a shopper record has 4 tab-separated fields, this one has 3")
        );
        assert_eq!(
            parse("category\t \n").unwrap_err().to_string(),
            format!("{FILE}:1: field 2 of the category record is empty")
        );
        assert!(matches!(
            parse("leaf\tx\n"),
            Err(TableError::UnknownKind { line: 1, .. })
        ));
        let t = parse("category\ta\nsub\tb\ntag\tc\ntag\td\nsub\te\n").unwrap();
        assert_eq!(t.categories[0].subs[0].tags, ["c", "d"]);
        assert!(t.categories[0].subs[1].tags.is_empty());
    }
}
