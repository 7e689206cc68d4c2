//! Occurrence vectors streamed into a [`FitAccumulator`], so `treewright fit` holds one
//! batch of rows at a time, never the whole table: a Parquet table read row group by row
//! group and batch by batch with the `parquet` crate's typed column readers, or an `.npy`
//! matrix read in row chunks with its ids streamed from a JSON list.
//!
//! Memory: one batch of [`BATCH_ROWS`] rows, the accumulator (per phrase: `2d` sums, or
//! `d² + 4d` for the full covariance) and, for `.npy` input, one 4-byte phrase index per
//! row (the ids file is a JSON list, so it is read before the matrix).

use std::io::{BufReader, Read};
use std::path::Path;

use parquet::basic::Type as Physical;
use parquet::column::reader::ColumnReader;
use parquet::data_type::ByteArray;
use parquet::file::reader::{FileReader, SerializedFileReader};

use super::LoadError;
use super::manifest::Limits;
use crate::model::fit::{FitAccumulator, FitOptions};

/// Rows decoded per batch.
pub const BATCH_ROWS: usize = 8192;

fn io_err(file: &str) -> impl Fn(std::io::Error) -> LoadError + '_ {
    move |source| LoadError::Io {
        file: file.to_string(),
        source,
    }
}

fn fit_err(file: &str, field: &str, e: crate::model::fit::FitError) -> LoadError {
    LoadError::invalid(file, field, e.to_string())
}

/// Stream the Parquet table at `path` (string or integer `id` column, float32/float64 list
/// column `vector`) into a new accumulator.
pub fn fit_parquet(
    path: &Path,
    id: &str,
    vector: &str,
    opt: &FitOptions,
) -> Result<FitAccumulator, LoadError> {
    let file = path.display().to_string();
    super::quiet_panic::guard(&file, |at| {
        let f = std::fs::File::open(path).map_err(io_err(&file))?;
        let reader = SerializedFileReader::new(f).map_err(|e| {
            LoadError::invalid(&file, "parquet", format!("not a usable Parquet file: {e}"))
        })?;
        stream_parquet(&reader, &file, id, vector, opt, BATCH_ROWS, at)
    })
}

/// [`fit_parquet`] on bytes, decoding `batch` rows at a time (tests and fuzzing).
pub fn fit_parquet_bytes(
    bytes: Vec<u8>,
    file: &str,
    id: &str,
    vector: &str,
    opt: &FitOptions,
    batch: usize,
) -> Result<FitAccumulator, LoadError> {
    super::quiet_panic::guard(file, |at| {
        let reader = SerializedFileReader::new(bytes::Bytes::from(bytes)).map_err(|e| {
            LoadError::invalid(file, "parquet", format!("not a usable Parquet file: {e}"))
        })?;
        stream_parquet(&reader, file, id, vector, opt, batch.max(1), at)
    })
}

/// The id column's reader, by physical type.
enum IdReader {
    Bytes(parquet::column::reader::ColumnReaderImpl<parquet::data_type::ByteArrayType>),
    I32(parquet::column::reader::ColumnReaderImpl<parquet::data_type::Int32Type>),
    I64(parquet::column::reader::ColumnReaderImpl<parquet::data_type::Int64Type>),
}

/// The vector column's reader, by physical type.
enum VecReader {
    F32(parquet::column::reader::ColumnReaderImpl<parquet::data_type::FloatType>),
    F64(parquet::column::reader::ColumnReaderImpl<parquet::data_type::DoubleType>),
}

fn stream_parquet<R: FileReader>(
    reader: &R,
    file: &str,
    id: &str,
    vector: &str,
    opt: &FitOptions,
    batch: usize,
    progress: &super::quiet_panic::Progress,
) -> Result<FitAccumulator, LoadError> {
    let schema = reader.metadata().file_metadata().schema_descr();
    let names: Vec<String> = schema
        .root_schema()
        .get_fields()
        .iter()
        .map(|f| f.name().to_string())
        .collect();
    let missing = |want: &str| {
        LoadError::invalid(
            file,
            format!("column \"{want}\""),
            format!("no such column (the table has: {})", names.join(", ")),
        )
    };
    let leaves = |want: &str| -> Vec<usize> {
        (0..schema.num_columns())
            .filter(|&i| schema.column(i).path().parts().first().map(String::as_str) == Some(want))
            .collect()
    };
    let id_col = match leaves(id).as_slice() {
        [] => return Err(missing(id)),
        &[i] if schema.column(i).max_rep_level() == 0
            && matches!(
                schema.column(i).physical_type(),
                Physical::BYTE_ARRAY | Physical::INT32 | Physical::INT64
            ) =>
        {
            i
        }
        _ => {
            return Err(LoadError::invalid(
                file,
                format!("column \"{id}\""),
                "expected a string or integer column",
            ));
        }
    };
    let vec_col = match leaves(vector).as_slice() {
        [] => return Err(missing(vector)),
        &[i] if schema.column(i).max_rep_level() == 1
            && matches!(
                schema.column(i).physical_type(),
                Physical::FLOAT | Physical::DOUBLE
            ) =>
        {
            i
        }
        _ => {
            return Err(LoadError::invalid(
                file,
                format!("column \"{vector}\""),
                "expected a list of float32 or float64 values",
            ));
        }
    };
    let id_def = schema.column(id_col).max_def_level();
    let vec_def = schema.column(vec_col).max_def_level();
    let max_dim = Limits::default().max_dim;
    let mut acc: Option<FitAccumulator> = None;
    let mut row = 0usize;
    let (mut defs, mut reps) = (Vec::new(), Vec::new());
    let (mut id_bytes, mut id_i32, mut id_i64) = (Vec::<ByteArray>::new(), Vec::new(), Vec::new());
    let (mut v32, mut v64) = (Vec::<f32>::new(), Vec::<f64>::new());
    let mut ids: Vec<String> = Vec::new();
    let mut x: Vec<f64> = Vec::new();
    let perr = |field: String| {
        move |e: parquet::errors::ParquetError| {
            LoadError::invalid(file, field.clone(), e.to_string())
        }
    };
    for g in 0..reader.num_row_groups() {
        progress.field(format!("row group {g}"));
        let rg = reader
            .get_row_group(g)
            .map_err(perr(format!("row group {g}")))?;
        let mut idr = match rg
            .get_column_reader(id_col)
            .map_err(perr(format!("column \"{id}\"")))?
        {
            ColumnReader::ByteArrayColumnReader(r) => IdReader::Bytes(r),
            ColumnReader::Int32ColumnReader(r) => IdReader::I32(r),
            ColumnReader::Int64ColumnReader(r) => IdReader::I64(r),
            _ => unreachable!("physical type checked above"),
        };
        let mut vr = match rg
            .get_column_reader(vec_col)
            .map_err(perr(format!("column \"{vector}\"")))?
        {
            ColumnReader::FloatColumnReader(r) => VecReader::F32(r),
            ColumnReader::DoubleColumnReader(r) => VecReader::F64(r),
            _ => unreachable!("physical type checked above"),
        };
        loop {
            progress.row(row);
            // ids of the next batch
            defs.clear();
            ids.clear();
            let at = |r: usize, c: &str| format!("row {r} column \"{c}\"");
            let (n_ids, n_vals) = match &mut idr {
                IdReader::Bytes(r) => {
                    id_bytes.clear();
                    let (n, v, _) = r
                        .read_records(batch, Some(&mut defs), None, &mut id_bytes)
                        .map_err(perr(at(row, id)))?;
                    for (k, b) in id_bytes.iter().enumerate() {
                        let s = std::str::from_utf8(b.data()).map_err(|_| {
                            LoadError::invalid(file, at(row + k, id), "is not UTF-8 text")
                        })?;
                        ids.push(s.to_string());
                    }
                    (n, v)
                }
                IdReader::I32(r) => {
                    id_i32.clear();
                    let (n, v, _) = r
                        .read_records(batch, Some(&mut defs), None, &mut id_i32)
                        .map_err(perr(at(row, id)))?;
                    ids.extend(id_i32.iter().map(i32::to_string));
                    (n, v)
                }
                IdReader::I64(r) => {
                    id_i64.clear();
                    let (n, v, _) = r
                        .read_records(batch, Some(&mut defs), None, &mut id_i64)
                        .map_err(perr(at(row, id)))?;
                    ids.extend(id_i64.iter().map(i64::to_string));
                    (n, v)
                }
            };
            if n_vals < n_ids {
                let k = defs.iter().position(|&l| l < id_def).unwrap_or(0);
                return Err(LoadError::invalid(file, at(row + k, id), "is null"));
            }
            // vectors of the same rows
            defs.clear();
            reps.clear();
            let (n_vecs, _, n_levels) = match &mut vr {
                VecReader::F32(r) => {
                    v32.clear();
                    r.read_records(n_ids.max(1), Some(&mut defs), Some(&mut reps), &mut v32)
                }
                VecReader::F64(r) => {
                    v64.clear();
                    r.read_records(n_ids.max(1), Some(&mut defs), Some(&mut reps), &mut v64)
                }
            }
            .map_err(perr(at(row, vector)))?;
            if n_vecs != n_ids {
                return Err(LoadError::invalid(
                    file,
                    format!("row group {g}"),
                    format!(
                        "columns \"{id}\" and \"{vector}\" disagree: {n_ids} and {n_vecs} rows"
                    ),
                ));
            }
            if n_ids == 0 {
                break;
            }
            // walk the levels record by record
            let mut value = 0usize;
            let mut k = 0usize; // record within the batch
            let mut level = 0usize;
            while level < n_levels {
                let start = level;
                level += 1;
                while level < n_levels && reps[level] != 0 {
                    level += 1;
                }
                let r = row + k;
                if defs[start..level].iter().any(|&l| l < vec_def) {
                    return Err(LoadError::invalid(
                        file,
                        at(r, vector),
                        "is null or empty, or holds a null value",
                    ));
                }
                let len = level - start;
                x.clear();
                match &vr {
                    VecReader::F32(_) => {
                        x.extend(v32[value..value + len].iter().map(|&v| f64::from(v)))
                    }
                    VecReader::F64(_) => x.extend_from_slice(&v64[value..value + len]),
                }
                value += len;
                if acc.is_none() {
                    if len == 0 || len > max_dim {
                        return Err(LoadError::invalid(
                            file,
                            at(r, vector),
                            format!("list length {len} is not in 1..={max_dim}"),
                        ));
                    }
                    acc = Some(
                        FitAccumulator::new(len, opt)
                            .map_err(|e| fit_err(file, &format!("column \"{vector}\""), e))?,
                    );
                }
                let Some(a) = acc.as_mut() else {
                    unreachable!("set above")
                };
                if len != a.dim() {
                    return Err(LoadError::invalid(
                        file,
                        at(r, vector),
                        format!("has {len} values, expected {}", a.dim()),
                    ));
                }
                let p = a.phrase(&ids[k]);
                a.push(p, &x)
                    .map_err(|e| fit_err(file, &format!("column \"{vector}\""), e))?;
                k += 1;
            }
            row += n_ids;
        }
    }
    acc.ok_or_else(|| LoadError::invalid(file, "rows", "the table has no rows"))
}

/// The header of a 2-D float `.npy`: rows, columns, bytes per value, big-endian, and the
/// offset of the data.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
struct NpyHeader {
    rows: usize,
    cols: usize,
    item: usize,
    big_endian: bool,
}

/// Read and check a `.npy` header for row streaming: a C-order 2-D float32/float64 array
/// whose values fit in the `total` bytes of the file.
fn npy_header<R: Read>(r: &mut R, total: u64, file: &str) -> Result<NpyHeader, LoadError> {
    let err = |m: String| LoadError::Npy {
        file: file.to_string(),
        message: m,
    };
    let mut head = [0u8; 10];
    r.read_exact(&mut head)
        .map_err(|_| err("file is truncated inside the header".into()))?;
    if &head[..6] != b"\x93NUMPY" {
        return Err(err(
            "missing the NumPy magic string; is this a NumPy .npy file?".into(),
        ));
    }
    let (hlen, start) = match head[6] {
        1 => (u64::from(u16::from_le_bytes([head[8], head[9]])), 10u64),
        2 | 3 => {
            let mut more = [0u8; 2];
            r.read_exact(&mut more)
                .map_err(|_| err("file is truncated inside the header".into()))?;
            (
                u64::from(u32::from_le_bytes([head[8], head[9], more[0], more[1]])),
                12,
            )
        }
        v => return Err(err(format!("unsupported .npy format version {v}"))),
    };
    if start + hlen > total || hlen > 1 << 20 {
        return Err(err("file is truncated inside the header".into()));
    }
    let mut text = vec![0u8; hlen as usize];
    r.read_exact(&mut text).map_err(io_err(file))?;
    let text = String::from_utf8_lossy(&text);
    let value_of = |key: &str| -> Option<&str> {
        let i = text.find(&format!("'{key}'"))? + key.len() + 2;
        Some(text[i..].trim_start().strip_prefix(':')?.trim_start())
    };
    let descr = value_of("descr")
        .and_then(|v| v.strip_prefix('\''))
        .and_then(|v| v.split('\'').next())
        .ok_or_else(|| err("the header has no element type ('descr')".into()))?;
    let (big_endian, item) = match descr {
        "<f8" => (false, 8),
        "<f4" => (false, 4),
        ">f8" => (true, 8),
        ">f4" => (true, 4),
        _ => {
            return Err(err(format!(
                "element type must be float32 or float64, not {descr}"
            )));
        }
    };
    if value_of("fortran_order").is_some_and(|v| v.starts_with("True")) {
        return Err(err(
            "a Fortran-order array cannot be read row by row (save np.ascontiguousarray(x))".into(),
        ));
    }
    let shape = value_of("shape")
        .and_then(|v| v.strip_prefix('('))
        .and_then(|v| v.split(')').next())
        .ok_or_else(|| err("the header has no shape".into()))?;
    let dims: Vec<&str> = shape
        .split(',')
        .map(str::trim)
        .filter(|t| !t.is_empty())
        .collect();
    let [rows, cols] = dims.as_slice() else {
        return Err(err(format!(
            "expected a 2-D array (one row per occurrence), found shape ({shape})"
        )));
    };
    let parse = |t: &str| {
        t.parse::<u64>()
            .map_err(|_| err(format!("bad shape entry \"{t}\" in the header")))
    };
    let (rows, cols) = (parse(rows)?, parse(cols)?);
    let need = u128::from(rows) * u128::from(cols) * item as u128;
    let have = u128::from(total - start - hlen);
    if need > have {
        return Err(err(format!(
            "file is truncated: the header declares {rows} × {cols} values ({need} bytes) but only {have} bytes follow"
        )));
    }
    if cols == 0 || cols as usize > Limits::default().max_dim {
        return Err(err(format!(
            "{cols} columns is not in 1..={}",
            Limits::default().max_dim
        )));
    }
    Ok(NpyHeader {
        rows: rows as usize,
        cols: cols as usize,
        item,
        big_endian,
    })
}

/// Stream an `.npy` matrix (one row per occurrence) with its ids (a JSON list of strings,
/// one per row) into a new accumulator.
pub fn fit_npy(npy: &Path, ids: &Path, opt: &FitOptions) -> Result<FitAccumulator, LoadError> {
    let file = npy.display().to_string();
    let f = std::fs::File::open(npy).map_err(io_err(&file))?;
    let total = f.metadata().map_err(io_err(&file))?.len();
    let mut r = BufReader::with_capacity(1 << 20, f);
    let h = npy_header(&mut r, total, &file)?;
    let mut acc = FitAccumulator::new(h.cols, opt).map_err(|e| fit_err(&file, "shape", e))?;
    let rows_of = read_ids(ids, h.rows, &file, &mut acc)?;
    let row_bytes = h.cols * h.item;
    let batch = BATCH_ROWS.min(h.rows.max(1));
    let mut buf = vec![0u8; batch * row_bytes];
    let mut x = vec![0.0f64; h.cols];
    let mut done = 0usize;
    while done < h.rows {
        let n = batch.min(h.rows - done);
        let chunk = &mut buf[..n * row_bytes];
        r.read_exact(chunk).map_err(io_err(&file))?;
        for (k, bytes) in chunk.chunks_exact(row_bytes).enumerate() {
            for (v, b) in x.iter_mut().zip(bytes.chunks_exact(h.item)) {
                *v = match (h.item, h.big_endian) {
                    (8, false) => f64::from_le_bytes(b.try_into().unwrap_or_default()),
                    (8, true) => f64::from_be_bytes(b.try_into().unwrap_or_default()),
                    (_, false) => f64::from(f32::from_le_bytes(b.try_into().unwrap_or_default())),
                    (_, true) => f64::from(f32::from_be_bytes(b.try_into().unwrap_or_default())),
                };
            }
            acc.push(rows_of[done + k] as usize, &x)
                .map_err(|e| fit_err(&file, "values", e))?;
        }
        done += n;
    }
    Ok(acc)
}

/// Stream the JSON list of ids at `path` through the accumulator's phrase index: one index
/// per row, refused as soon as there are more than `rows` of them.
fn read_ids(
    path: &Path,
    rows: usize,
    npy_file: &str,
    acc: &mut FitAccumulator,
) -> Result<Vec<u32>, LoadError> {
    use serde::de::{DeserializeSeed, Deserializer, Error as _, SeqAccess, Visitor};
    let file = path.display().to_string();
    struct Ids<'a> {
        acc: &'a mut FitAccumulator,
        out: &'a mut Vec<u32>,
        rows: usize,
    }
    impl<'de> Visitor<'de> for Ids<'_> {
        type Value = ();
        fn expecting(&self, f: &mut std::fmt::Formatter) -> std::fmt::Result {
            f.write_str("a list of phrase ids (strings), one per matrix row")
        }
        fn visit_seq<A: SeqAccess<'de>>(self, mut seq: A) -> Result<(), A::Error> {
            while let Some(s) = seq.next_element::<std::borrow::Cow<'de, str>>()? {
                if self.out.len() == self.rows {
                    return Err(A::Error::custom(format!(
                        "more ids than the {} matrix rows",
                        self.rows
                    )));
                }
                self.out.push(self.acc.phrase(&s) as u32);
            }
            Ok(())
        }
    }
    impl<'de> DeserializeSeed<'de> for Ids<'_> {
        type Value = ();
        fn deserialize<D: Deserializer<'de>>(self, d: D) -> Result<(), D::Error> {
            d.deserialize_seq(self)
        }
    }
    let f = std::fs::File::open(path).map_err(io_err(&file))?;
    let mut out = Vec::with_capacity(rows.min(1 << 24));
    let mut de = serde_json::Deserializer::from_reader(BufReader::with_capacity(1 << 20, f));
    let json = |e: serde_json::Error| LoadError::Json {
        file: file.clone(),
        line: e.line(),
        column: e.column(),
        message: e.to_string(),
    };
    Ids {
        acc,
        out: &mut out,
        rows,
    }
    .deserialize(&mut de)
    .map_err(json)?;
    de.end().map_err(json)?;
    if out.len() != rows {
        return Err(LoadError::invalid(
            &file,
            "ids",
            format!("{} ids for the {rows} rows of {npy_file}", out.len()),
        ));
    }
    Ok(out)
}
