//! Parquet tables (as pandas and pyarrow write them): one row per phrase, a string id
//! column and list-of-float columns (float32 or float64, variable- or fixed-size lists),
//! read with the `parquet` crate's row reader.
//!
//! Rows are matched to phrases by id, not by position. The same table can also supply the
//! phrases themselves (its id and label columns).

use std::collections::HashMap;
use std::path::Path;

use parquet::file::reader::{FileReader, SerializedFileReader};
use parquet::record::{Field, Row};

use super::LoadError;
use super::manifest::Limits;
use super::quiet_panic::Progress;
use super::quiet_panic::guard;
use super::read::open_limited;
use crate::model::phrase::PhraseRecord;

/// The default id column.
pub const DEFAULT_ID_COLUMN: &str = "phrase_id";
/// The default label column (used when the table supplies the phrases).
pub const DEFAULT_LABEL_COLUMN: &str = "label";

/// Whether `path` names a Parquet file (by extension: `.parquet` or `.pq`).
pub fn is_parquet_path(path: &Path) -> bool {
    path.extension()
        .is_some_and(|e| e.eq_ignore_ascii_case("parquet") || e.eq_ignore_ascii_case("pq"))
}

/// Columns read from a Parquet table, row by row: string columns and float-list columns.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct ParquetColumns {
    /// Rows read.
    pub rows: usize,
    /// Each requested string column, one value per row.
    pub strings: Vec<Vec<String>>,
    /// Each requested list column, flattened row-major, with its (common) list length.
    pub lists: Vec<(usize, Vec<f64>)>,
}

/// Open a Parquet file within the size limits and check its declared row count.
fn open(path: &Path, limits: &Limits) -> Result<SerializedFileReader<std::fs::File>, LoadError> {
    let file = path.display().to_string();
    let (f, _) = open_limited(path, limits)?;
    SerializedFileReader::new(f).map_err(|e| {
        LoadError::invalid(&file, "parquet", format!("not a usable Parquet file: {e}"))
    })
}

/// Read `strings` (string columns) and `lists` (float-list columns) from the Parquet file
/// at `path`. Every list in a column must have the same length, at most `limits.max_dim`;
/// at most `limits.max_phrases` rows (or `max_rows` when given).
pub fn read_parquet_columns(
    path: &Path,
    strings: &[&str],
    lists: &[&str],
    limits: &Limits,
    max_rows: Option<usize>,
) -> Result<ParquetColumns, LoadError> {
    let file = path.display().to_string();
    guard(&file, |at| {
        let reader = open(path, limits)?;
        columns_from(&reader, &file, strings, lists, limits, max_rows, at)
    })
}

/// Parse Parquet bytes (for tests and fuzzing).
pub fn parse_parquet_columns(
    bytes: Vec<u8>,
    file: &str,
    strings: &[&str],
    lists: &[&str],
    limits: &Limits,
) -> Result<ParquetColumns, LoadError> {
    guard(file, |at| {
        let reader = SerializedFileReader::new(bytes::Bytes::from(bytes)).map_err(|e| {
            LoadError::invalid(file, "parquet", format!("not a usable Parquet file: {e}"))
        })?;
        columns_from(&reader, file, strings, lists, limits, None, at)
    })
}

fn columns_from<R: FileReader>(
    reader: &R,
    file: &str,
    strings: &[&str],
    lists: &[&str],
    limits: &Limits,
    max_rows: Option<usize>,
    at: &Progress,
) -> Result<ParquetColumns, LoadError> {
    let max_rows = max_rows.unwrap_or(limits.max_phrases);
    let declared = reader.metadata().file_metadata().num_rows();
    if declared < 0 || declared as u64 > max_rows as u64 {
        return Err(LoadError::invalid(
            file,
            "rows",
            format!(
                "the table declares {declared} rows; the limit is {max_rows} (raise limits.max_phrases in project.json)"
            ),
        ));
    }
    let schema = reader.metadata().file_metadata().schema_descr();
    let names: Vec<String> = schema
        .root_schema()
        .get_fields()
        .iter()
        .map(|f| f.name().to_string())
        .collect();
    for want in strings.iter().chain(lists) {
        if !names.iter().any(|n| n == want) {
            return Err(LoadError::invalid(
                file,
                format!("column \"{want}\""),
                format!("no such column (the table has: {})", names.join(", ")),
            ));
        }
    }
    let mut out = ParquetColumns {
        rows: 0,
        strings: vec![Vec::new(); strings.len()],
        lists: vec![(0, Vec::new()); lists.len()],
    };
    at.row(0);
    let rows = reader
        .get_row_iter(None)
        .map_err(|e| LoadError::invalid(file, "parquet", e.to_string()))?;
    for (r, row) in rows.enumerate() {
        let row = row.map_err(|e| LoadError::invalid(file, format!("row {r}"), e.to_string()))?;
        if r >= max_rows {
            return Err(LoadError::invalid(
                file,
                "rows",
                format!("more than {max_rows} rows"),
            ));
        }
        let cells = cells(&row);
        for (k, name) in strings.iter().enumerate() {
            let v = match cells.get(name) {
                Some(Field::Str(s)) => s.clone(),
                Some(Field::Null) | None => String::new(),
                Some(Field::Long(x)) => x.to_string(),
                Some(Field::Int(x)) => x.to_string(),
                Some(other) => {
                    return Err(LoadError::invalid(
                        file,
                        format!("row {r} column \"{name}\""),
                        format!("expected a string, found {other}"),
                    ));
                }
            };
            out.strings[k].push(v);
        }
        for (k, name) in lists.iter().enumerate() {
            let at = || format!("row {r} column \"{name}\"");
            let elems = match cells.get(name) {
                Some(Field::ListInternal(l)) => l.elements(),
                Some(other) => {
                    return Err(LoadError::invalid(
                        file,
                        at(),
                        format!("expected a list of floats, found {other}"),
                    ));
                }
                None => return Err(LoadError::invalid(file, at(), "is missing")),
            };
            let (d, vals) = &mut out.lists[k];
            if r == 0 {
                if elems.is_empty() || elems.len() > limits.max_dim {
                    return Err(LoadError::invalid(
                        file,
                        at(),
                        format!(
                            "list length {} is not in 1..={} (limits.max_dim)",
                            elems.len(),
                            limits.max_dim
                        ),
                    ));
                }
                *d = elems.len();
            } else if elems.len() != *d {
                return Err(LoadError::invalid(
                    file,
                    at(),
                    format!("has {} values, expected {d}", elems.len()),
                ));
            }
            for (j, e) in elems.iter().enumerate() {
                vals.push(match e {
                    Field::Float(x) => f64::from(*x),
                    Field::Double(x) => *x,
                    other => {
                        return Err(LoadError::invalid(
                            file,
                            format!("{}[{j}]", at()),
                            format!("expected a float, found {other}"),
                        ));
                    }
                });
            }
        }
        out.rows += 1;
        // a panic while decoding the next row names it
        at.row(r + 1);
    }
    Ok(out)
}

fn cells(row: &Row) -> HashMap<&str, &Field> {
    row.get_column_iter()
        .map(|(n, f)| (n.as_str(), f))
        .collect()
}

/// The phrase records when `phrases` names a Parquet table: its id and label columns (named
/// as in the manifest's Parquet embeddings, else the defaults).
pub(super) fn phrases_for(
    path: &Path,
    manifest: &super::manifest::Manifest,
    limits: &Limits,
) -> Result<Vec<PhraseRecord>, LoadError> {
    let (id, label) = match &manifest.embeddings {
        super::manifest::EmbeddingsRef::Parquet { id, label, .. } => {
            (id.as_deref(), label.as_deref())
        }
        _ => (None, None),
    };
    phrase_records(
        path,
        id.unwrap_or(DEFAULT_ID_COLUMN),
        label.unwrap_or(DEFAULT_LABEL_COLUMN),
        limits,
    )
}

/// The phrase records a Parquet table supplies: its id and label columns, in row order.
pub(super) fn phrase_records(
    path: &Path,
    id: &str,
    label: &str,
    limits: &Limits,
) -> Result<Vec<PhraseRecord>, LoadError> {
    let c = read_parquet_columns(path, &[id, label], &[], limits, None)?;
    let mut it = c.strings.into_iter();
    let ids = it.next().unwrap_or_default();
    let labels = it.next().unwrap_or_default();
    Ok(ids
        .into_iter()
        .zip(labels)
        .map(|(i, l)| PhraseRecord {
            id: (!i.is_empty()).then_some(i),
            label: l,
        })
        .collect())
}

/// Means and (optionally) variances from a Parquet table, reordered from table rows to
/// phrase rows by id: `(d, means, variances)`, each `n × d` row-major in phrase order.
pub(super) fn embeddings_by_id(
    path: &Path,
    id: &str,
    means: &str,
    variances: &str,
    phrases: &crate::model::phrase::PhraseTable,
    limits: &Limits,
) -> Result<(usize, Vec<f64>, Vec<f64>), LoadError> {
    let file = path.display().to_string();
    let c = read_parquet_columns(path, &[id], &[means, variances], limits, None)?;
    let ids = &c.strings[0];
    let (d, m) = &c.lists[0];
    let (vd, v) = &c.lists[1];
    if d != vd && c.rows > 0 {
        return Err(LoadError::invalid(
            &file,
            format!("column \"{variances}\""),
            format!("lists have {vd} values but \"{means}\" lists have {d}"),
        ));
    }
    let n = phrases.len();
    let d = *d;
    let mut row_of: Vec<Option<usize>> = vec![None; n];
    for (r, pid) in ids.iter().enumerate() {
        let Some(p) = phrases.get(pid) else {
            return Err(LoadError::invalid(
                &file,
                format!("row {r} column \"{id}\""),
                format!("\"{pid}\" is not a phrase id"),
            ));
        };
        if let Some(first) = row_of[p as usize].replace(r) {
            return Err(LoadError::invalid(
                &file,
                format!("row {r} column \"{id}\""),
                format!("\"{pid}\" repeats row {first}"),
            ));
        }
    }
    let mut mo = Vec::with_capacity(n * d);
    let mut vo = Vec::with_capacity(n * d);
    for (p, r) in row_of.iter().enumerate() {
        let Some(r) = r else {
            return Err(LoadError::invalid(
                &file,
                format!("phrase \"{}\"", phrases.id(p as u32)),
                format!("has no row in the table (column \"{id}\")"),
            ));
        };
        mo.extend_from_slice(&m[r * d..(r + 1) * d]);
        vo.extend_from_slice(&v[r * d..(r + 1) * d]);
    }
    Ok((d, mo, vo))
}
