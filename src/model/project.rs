//! The project folder: `project.json` and the files it names, loaded and validated.
//!
//! Loading is all-or-nothing: any malformed input returns a [`LoadError`] naming the file and
//! the phrase, row or field, and no partially loaded project is ever handed out.

use std::collections::BTreeMap;
use std::fs;
use std::path::{Component, Path, PathBuf};
use std::sync::Arc;

use ndarray::{Array2, Array3};
use ndarray_npy::{ReadNpyError, ReadNpyExt, WriteNpyExt};
use serde::{Deserialize, Serialize};

use super::fsutil;
use super::gaussian::{
    CovarianceKind, DEFAULT_VARIANCE_FLOOR, GaussError, Gaussians, OwnedGaussian, PhraseId,
};
use super::phrase::{PhraseRecord, PhraseTable};
use super::tree::{Tree, TreeFile};

/// The `format` value every manifest carries.
pub const FORMAT_NAME: &str = "treewright-project";
/// The manifest version this build reads and writes.
pub const FORMAT_VERSION: u32 = 1;
/// The manifest's file name inside a project folder.
pub const MANIFEST_NAME: &str = "project.json";

/// A load failure: always names the file, and the row / phrase / field where one applies.
#[derive(Debug, thiserror::Error)]
pub enum LoadError {
    /// The file could not be read.
    #[error("{file}: cannot read: {source}")]
    Io {
        /// The file.
        file: String,
        /// The OS error.
        source: std::io::Error,
    },
    /// JSON syntax or schema error, with position.
    #[error("{file}:{line}:{column}: {message}")]
    Json {
        /// The file.
        file: String,
        /// 1-based line.
        line: usize,
        /// 1-based column.
        column: usize,
        /// serde_json's message.
        message: String,
    },
    /// A `.npy` file is truncated, not NumPy, or of the wrong element type or shape.
    #[error("{file}: not a usable .npy array: {message}")]
    Npy {
        /// The file.
        file: String,
        /// What is wrong.
        message: String,
    },
    /// A value is invalid.
    #[error("{file}: {field}: {message}")]
    Invalid {
        /// The file.
        file: String,
        /// Field, row or phrase concerned.
        field: String,
        /// What is wrong.
        message: String,
    },
}

impl LoadError {
    fn invalid(file: &str, field: impl Into<String>, message: impl Into<String>) -> Self {
        LoadError::Invalid {
            file: file.to_string(),
            field: field.into(),
            message: message.into(),
        }
    }
}

/// What the second embedding array holds.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, Default)]
#[serde(rename_all = "snake_case")]
pub enum Scale {
    /// σ² (the default).
    #[default]
    Variance,
    /// σ: squared on load.
    Std,
    /// ln σ²: exponentiated on load.
    LogVariance,
}

/// Size guards applied while loading, so a huge or hostile input fails with a clear error
/// instead of exhausting memory. Set in the manifest's optional `limits` object.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(deny_unknown_fields, default)]
pub struct Limits {
    /// Largest file the loader reads, in MiB (default 8192).
    pub max_file_mb: u64,
    /// Most phrases (default 10 000 000).
    pub max_phrases: usize,
    /// Largest embedding dimension (default 4096).
    pub max_dim: usize,
}

impl Default for Limits {
    fn default() -> Self {
        Limits {
            max_file_mb: 8192,
            max_phrases: 10_000_000,
            max_dim: 4096,
        }
    }
}

/// Where the embeddings are.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
#[serde(untagged)]
pub enum EmbeddingsRef {
    /// One JSON file.
    Json(String),
    /// NumPy files: means plus exactly one of variances (diagonal) or covariances (full).
    Npy {
        /// `n × d` means.
        means: String,
        /// `n × d` variances (diagonal covariance).
        #[serde(default, skip_serializing_if = "Option::is_none")]
        variances: Option<String>,
        /// `n × d × d` covariances (full covariance).
        #[serde(default, skip_serializing_if = "Option::is_none")]
        covariances: Option<String>,
    },
}

/// `project.json`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Manifest {
    /// Always `treewright-project`.
    pub format: String,
    /// Format version (1).
    pub version: u32,
    /// Display name.
    pub name: String,
    /// Phrase table file.
    pub phrases: String,
    /// Embedding files.
    pub embeddings: EmbeddingsRef,
    /// What the second embedding array holds.
    #[serde(default, skip_serializing_if = "is_default_scale")]
    pub scale: Scale,
    /// Variances below this are raised to it (default 1e-6).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub variance_floor: Option<f64>,
    /// Shopper profiles file.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub users: Option<String>,
    /// Machine-built tree file (`.json` or `.csv`).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub tree: Option<String>,
    /// Override layer file.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub overrides: Option<String>,
    /// Audit thresholds (read by the audit).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub audit: Option<serde_json::Value>,
    /// Size guards for loading (defaults when absent).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub limits: Option<Limits>,
}

fn is_default_scale(s: &Scale) -> bool {
    *s == Scale::Variance
}

/// A shopper profile: a Gaussian in the phrase space.
#[derive(Debug, Clone, PartialEq)]
pub struct UserProfile {
    /// Stable id.
    pub id: String,
    /// Display label.
    pub label: String,
    /// The preference distribution (diagonal).
    pub gaussian: OwnedGaussian,
}

/// One record of `users.json`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct UserRecord {
    /// Stable id.
    pub id: String,
    /// Display label.
    pub label: String,
    /// Mean.
    pub mean: Vec<f64>,
    /// Diagonal variance.
    pub variance: Vec<f64>,
}

/// The JSON embeddings file.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct EmbeddingsJson {
    /// `diagonal` or `full`.
    pub covariance: CovarianceKind,
    /// n rows of d means.
    pub means: Vec<Vec<f64>>,
    /// n rows of d variances (diagonal).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub variances: Option<Vec<Vec<f64>>>,
    /// n matrices d × d (full).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub covariances: Option<Vec<Vec<Vec<f64>>>>,
}

/// A loaded, validated project.
#[derive(Debug, Clone)]
pub struct Project {
    /// The project folder.
    pub dir: PathBuf,
    /// The manifest as read.
    pub manifest: Manifest,
    /// Phrases in row order.
    pub phrases: PhraseTable,
    /// One Gaussian per phrase, shared by every view.
    pub gaussians: Arc<Gaussians>,
    /// Shopper profiles (may be empty).
    pub users: Vec<UserProfile>,
    /// The machine-built tree, when the project has one.
    pub tree: Option<Tree>,
}

/// Resolve `rel` inside `dir`, refusing absolute paths and paths that leave the folder.
pub fn resolve_inside(dir: &Path, rel: &str, field: &str) -> Result<PathBuf, LoadError> {
    let manifest = dir.join(MANIFEST_NAME).display().to_string();
    let p = Path::new(rel);
    if rel.is_empty() {
        return Err(LoadError::invalid(&manifest, field, "path is empty"));
    }
    let mut depth: i32 = 0;
    for c in p.components() {
        match c {
            Component::Prefix(_) | Component::RootDir => {
                return Err(LoadError::invalid(
                    &manifest,
                    field,
                    format!(
                        "\"{rel}\" is an absolute path; paths must be relative to the project folder"
                    ),
                ));
            }
            Component::ParentDir => {
                depth -= 1;
                if depth < 0 {
                    return Err(LoadError::invalid(
                        &manifest,
                        field,
                        format!("\"{rel}\" leaves the project folder"),
                    ));
                }
            }
            Component::Normal(_) => depth += 1,
            Component::CurDir => {}
        }
    }
    let full = dir.join(p);
    // a symbolic link may still point outside: compare canonical paths when the file exists
    if let (Ok(cd), Ok(cf)) = (dir.canonicalize(), full.canonicalize())
        && !cf.starts_with(&cd)
    {
        return Err(LoadError::invalid(
            &manifest,
            field,
            format!("\"{rel}\" resolves outside the project folder"),
        ));
    }
    Ok(full)
}

fn read_bytes(path: &Path) -> Result<Vec<u8>, LoadError> {
    read_bytes_limited(path, &Limits::default())
}

fn read_bytes_limited(path: &Path, limits: &Limits) -> Result<Vec<u8>, LoadError> {
    use std::io::Read;
    let (mut f, len) = open_limited(path, limits)?;
    let mut out = Vec::with_capacity(len as usize);
    f.read_to_end(&mut out).map_err(|source| LoadError::Io {
        file: path.display().to_string(),
        source,
    })?;
    Ok(out)
}

fn read_json_limited<T: serde::de::DeserializeOwned>(
    path: &Path,
    limits: &Limits,
) -> Result<T, LoadError> {
    let bytes = read_bytes_limited(path, limits)?;
    parse_json(&bytes, &path.display().to_string())
}

/// Parse JSON from a file, with line and column on error.
pub fn read_json<T: serde::de::DeserializeOwned>(path: &Path) -> Result<T, LoadError> {
    let bytes = read_bytes(path)?;
    parse_json(&bytes, &path.display().to_string())
}

/// Parse JSON bytes, naming `file` on error.
pub fn parse_json<T: serde::de::DeserializeOwned>(
    bytes: &[u8],
    file: &str,
) -> Result<T, LoadError> {
    serde_json::from_slice(bytes).map_err(|e| {
        let full = e.to_string();
        let suffix = format!(" at line {} column {}", e.line(), e.column());
        LoadError::Json {
            file: file.to_string(),
            line: e.line(),
            column: e.column(),
            message: full.strip_suffix(&suffix).unwrap_or(&full).to_string(),
        }
    })
}

/// The values of a float `.npy` array in the file's own precision.
#[derive(Debug, Clone, PartialEq)]
pub enum NpyValues {
    /// float32 values, row-major.
    F32(Vec<f32>),
    /// float64 values, row-major.
    F64(Vec<f64>),
}

impl NpyValues {
    /// The values widened to f64.
    pub fn into_f64(self) -> Vec<f64> {
        match self {
            NpyValues::F32(v) => v.into_iter().map(f64::from).collect(),
            NpyValues::F64(v) => v,
        }
    }
}

/// Open a file for streaming after the size limit check.
fn open_limited(path: &Path, limits: &Limits) -> Result<(fs::File, u64), LoadError> {
    let file = path.display().to_string();
    let io = |source| LoadError::Io {
        file: file.clone(),
        source,
    };
    let f = fs::File::open(path).map_err(io)?;
    let len = f.metadata().map_err(io)?.len();
    let max = limits.max_file_mb.saturating_mul(1 << 20);
    if len > max {
        return Err(LoadError::invalid(
            &file,
            "size",
            format!(
                "{:.1} MiB exceeds the limit of {} MiB (raise limits.max_file_mb in project.json)",
                len as f64 / (1 << 20) as f64,
                limits.max_file_mb
            ),
        ));
    }
    Ok((f, len))
}

/// A 2-D array read from `.npy` (float32 or float64) in its own precision, with its shape.
/// The values are read straight from the file into their final buffer: the file's bytes are
/// never held in memory as a second copy.
fn read_npy2(path: &Path, limits: &Limits) -> Result<(usize, usize, NpyValues), LoadError> {
    let (f, len) = open_limited(path, limits)?;
    let mut r = std::io::BufReader::with_capacity(1 << 16, f);
    npy2_from(&mut r, len, &path.display().to_string())
}

fn read_npy3(path: &Path, limits: &Limits) -> Result<(usize, usize, usize, Vec<f64>), LoadError> {
    let (f, len) = open_limited(path, limits)?;
    let mut r = std::io::BufReader::with_capacity(1 << 16, f);
    npy3_from(&mut r, len, &path.display().to_string())
}

/// Element type a `.npy` header names, when it is a float type we read.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum NpyFloat {
    F32,
    F64,
}

/// Check a `.npy` header before any allocation: the element count it claims must fit in
/// the `total` bytes of the stream, so a header claiming 10¹² values is refused at once.
/// Reads only the header and leaves the stream rewound. Returns the float type the header
/// names (None when it names another type; the array reader then reports it precisely).
fn precheck_npy<R: std::io::Read + std::io::Seek>(
    r: &mut R,
    total: u64,
    file: &str,
) -> Result<Option<NpyFloat>, LoadError> {
    use std::io::{Read, SeekFrom};
    let err = |m: String| LoadError::Npy {
        file: file.to_string(),
        message: m,
    };
    let io = |source| LoadError::Io {
        file: file.to_string(),
        source,
    };
    let mut head = Vec::with_capacity(12);
    r.by_ref().take(12).read_to_end(&mut head).map_err(io)?;
    if head.len() < 10 || &head[..6] != b"\x93NUMPY" {
        return Err(err(
            "missing the NumPy magic string; is this a NumPy .npy file?".into(),
        ));
    }
    let (hlen, start) = match head[6] {
        1 => (u16::from_le_bytes([head[8], head[9]]) as u64, 10u64),
        2 | 3 if head.len() >= 12 => (
            u32::from_le_bytes([head[8], head[9], head[10], head[11]]) as u64,
            12,
        ),
        v => return Err(err(format!("unsupported .npy format version {v}"))),
    };
    let end = start + hlen;
    if end > total {
        return Err(err("file is truncated inside the header".into()));
    }
    // `end ≤ total`, and `total` is a file or buffer that exists, so this is bounded
    let mut header = vec![0u8; hlen as usize];
    r.seek(SeekFrom::Start(start)).map_err(io)?;
    r.read_exact(&mut header).map_err(io)?;
    r.seek(SeekFrom::Start(0)).map_err(io)?;
    let header = String::from_utf8_lossy(&header);
    let (kind, item) = if header.contains("f8") {
        (NpyFloat::F64, 8)
    } else if header.contains("f4") {
        (NpyFloat::F32, 4)
    } else {
        // let ndarray-npy report the element type precisely
        return Ok(None);
    };
    let Some(open) = header
        .find("'shape'")
        .and_then(|i| header[i..].find('(').map(|j| i + j))
    else {
        return Ok(Some(kind));
    };
    let Some(close) = header[open..].find(')').map(|j| open + j) else {
        return Ok(Some(kind));
    };
    let mut count: u128 = 1;
    for part in header[open + 1..close].split(',') {
        let t = part.trim();
        if t.is_empty() {
            continue;
        }
        let v: u128 = t
            .parse()
            .map_err(|_| err(format!("bad shape entry \"{t}\" in the header")))?;
        count = count.saturating_mul(v);
    }
    let have = (total - end) as u128;
    if count.saturating_mul(item) > have {
        return Err(err(format!(
            "file is truncated: the header declares {count} values ({} bytes) but only {have} bytes follow",
            count.saturating_mul(item)
        )));
    }
    Ok(Some(kind))
}

/// Parse a 2-D float32/float64 `.npy` from bytes (naming `file` in errors), as f64.
pub fn parse_npy2(bytes: &[u8], file: &str) -> Result<(usize, usize, Vec<f64>), LoadError> {
    let (n, d, v) = parse_npy2_raw(bytes, file)?;
    Ok((n, d, v.into_f64()))
}

fn row_major<T: Clone, D: ndarray::Dimension>(arr: ndarray::Array<T, D>) -> Vec<T> {
    if arr.is_standard_layout() {
        let (v, _) = arr.into_raw_vec_and_offset();
        v
    } else {
        arr.as_standard_layout().iter().cloned().collect()
    }
}

/// Parse a 2-D float32/float64 `.npy` from bytes, keeping the file's precision (float32
/// files are not widened, which halves the memory a large project needs while loading).
pub fn parse_npy2_raw(bytes: &[u8], file: &str) -> Result<(usize, usize, NpyValues), LoadError> {
    npy2_from(&mut std::io::Cursor::new(bytes), bytes.len() as u64, file)
}

/// An array read as float64 or as float32.
enum Read2<A, B> {
    F64(A),
    F32(B),
}

/// Read one array, trying the element type the header names first so that the other
/// attempt (which would allocate before it looks at the type) is made only on a mismatch.
fn read_either<R, A, B>(
    r: &mut R,
    hint: Option<NpyFloat>,
    file: &str,
    ndim: usize,
    as_f64: impl FnOnce(&mut R) -> Result<A, ReadNpyError>,
    as_f32: impl FnOnce(&mut R) -> Result<B, ReadNpyError>,
) -> Result<Read2<A, B>, LoadError>
where
    R: std::io::Read + std::io::Seek,
{
    let rewind = |r: &mut R| {
        r.seek(std::io::SeekFrom::Start(0))
            .map_err(|source| LoadError::Io {
                file: file.to_string(),
                source,
            })
    };
    if hint == Some(NpyFloat::F32) {
        return match as_f32(r) {
            Ok(b) => Ok(Read2::F32(b)),
            Err(ReadNpyError::WrongDescriptor(_)) => {
                rewind(r)?;
                as_f64(r)
                    .map(Read2::F64)
                    .map_err(|e| npy_err(file, e, ndim))
            }
            Err(e) => Err(npy_err(file, e, ndim)),
        };
    }
    match as_f64(r) {
        Ok(a) => Ok(Read2::F64(a)),
        Err(ReadNpyError::WrongDescriptor(_)) => {
            rewind(r)?;
            as_f32(r)
                .map(Read2::F32)
                .map_err(|e| npy_err(file, e, ndim))
        }
        Err(e) => Err(npy_err(file, e, ndim)),
    }
}

/// Parse a 2-D float32/float64 `.npy` from a stream of `total` bytes.
fn npy2_from<R: std::io::Read + std::io::Seek>(
    r: &mut R,
    total: u64,
    file: &str,
) -> Result<(usize, usize, NpyValues), LoadError> {
    let hint = precheck_npy(r, total, file)?;
    let got = read_either(
        r,
        hint,
        file,
        2,
        |r| Array2::<f64>::read_npy(r),
        |r| Array2::<f32>::read_npy(r),
    )?;
    Ok(match got {
        Read2::F64(a) => {
            let (n, d) = a.dim();
            (n, d, NpyValues::F64(row_major(a)))
        }
        Read2::F32(a) => {
            let (n, d) = a.dim();
            (n, d, NpyValues::F32(row_major(a)))
        }
    })
}

/// Parse a 3-D float32/float64 `.npy` from bytes (naming `file` in errors).
pub fn parse_npy3(bytes: &[u8], file: &str) -> Result<(usize, usize, usize, Vec<f64>), LoadError> {
    npy3_from(&mut std::io::Cursor::new(bytes), bytes.len() as u64, file)
}

/// Parse a 3-D float32/float64 `.npy` from a stream of `total` bytes, as f64.
fn npy3_from<R: std::io::Read + std::io::Seek>(
    r: &mut R,
    total: u64,
    file: &str,
) -> Result<(usize, usize, usize, Vec<f64>), LoadError> {
    let hint = precheck_npy(r, total, file)?;
    let got = read_either(
        r,
        hint,
        file,
        3,
        |r| Array3::<f64>::read_npy(r),
        |r| Array3::<f32>::read_npy(r),
    )?;
    Ok(match got {
        Read2::F64(a) => {
            let (n, x, y) = a.dim();
            (n, x, y, row_major(a))
        }
        Read2::F32(a) => {
            let (n, x, y) = a.dim();
            (n, x, y, row_major(a).into_iter().map(f64::from).collect())
        }
    })
}

fn npy_err(file: &str, e: ReadNpyError, ndim: usize) -> LoadError {
    let message = match &e {
        ReadNpyError::WrongNdim(want, got) => {
            format!("expected a {ndim}-D array, found {got} dimensions (want {want:?})")
        }
        ReadNpyError::WrongDescriptor(_) => {
            "element type must be float32 or float64 (little or big endian)".to_string()
        }
        ReadNpyError::MissingData => "file is truncated: fewer values than the header says".into(),
        ReadNpyError::ParseHeader(h) => format!("bad header ({h}); is this a NumPy .npy file?"),
        _ => e.to_string(),
    };
    LoadError::Npy {
        file: file.to_string(),
        message,
    }
}

fn apply_scale_f32(values: &mut [f32], scale: Scale) {
    match scale {
        Scale::Variance => {}
        Scale::Std => values.iter_mut().for_each(|v| *v *= *v),
        Scale::LogVariance => values.iter_mut().for_each(|v| *v = v.exp()),
    }
}

fn apply_scale(values: &mut [f64], scale: Scale) {
    match scale {
        Scale::Variance => {}
        Scale::Std => values.iter_mut().for_each(|v| *v *= *v),
        Scale::LogVariance => values.iter_mut().for_each(|v| *v = v.exp()),
    }
}

/// Turn a [`GaussError`] into a load error naming the file and the phrase.
fn gauss_err(file: &str, phrases: &PhraseTable, e: GaussError) -> LoadError {
    let (row, msg) = match &e {
        GaussError::NonFinite { row, .. }
        | GaussError::NonPositiveVariance { row, .. }
        | GaussError::NotPositiveDefinite { row, .. } => {
            let full = e.to_string();
            let prefix = format!("row {row}: ");
            (
                Some(*row),
                full.strip_prefix(&prefix).unwrap_or(&full).to_string(),
            )
        }
        GaussError::Shape(_) => (None, e.to_string()),
    };
    match row {
        Some(r) if r < phrases.len() => LoadError::invalid(
            file,
            format!("phrase \"{}\" (row {r})", phrases.id(r as PhraseId)),
            msg,
        ),
        _ => LoadError::invalid(file, "shape", msg),
    }
}

impl Project {
    /// Load a project from its folder (or from the path of its `project.json`).
    pub fn load(path: &Path) -> Result<Self, LoadError> {
        let (dir, manifest_path) = if path.is_dir() {
            (path.to_path_buf(), path.join(MANIFEST_NAME))
        } else {
            let dir = path
                .parent()
                .map(Path::to_path_buf)
                .filter(|p| !p.as_os_str().is_empty())
                .unwrap_or_else(|| PathBuf::from("."));
            (dir, path.to_path_buf())
        };
        let mfile = manifest_path.display().to_string();
        let manifest: Manifest = read_json(&manifest_path)?;
        if manifest.format != FORMAT_NAME {
            return Err(LoadError::invalid(
                &mfile,
                "format",
                format!("is \"{}\", expected \"{FORMAT_NAME}\"", manifest.format),
            ));
        }
        if manifest.version != FORMAT_VERSION {
            return Err(LoadError::invalid(
                &mfile,
                "version",
                format!(
                    "is {}, this build reads version {FORMAT_VERSION}",
                    manifest.version
                ),
            ));
        }
        let floor = manifest.variance_floor.unwrap_or(DEFAULT_VARIANCE_FLOOR);
        if !(floor.is_finite() && floor >= 0.0) {
            return Err(LoadError::invalid(
                &mfile,
                "variance_floor",
                format!("is {floor}; must be a finite number ≥ 0"),
            ));
        }

        let limits = manifest.limits.unwrap_or_default();

        // phrases
        let ppath = resolve_inside(&dir, &manifest.phrases, "phrases")?;
        let pfile = ppath.display().to_string();
        let records: Vec<PhraseRecord> = read_json_limited(&ppath, &limits)?;
        if records.len() > limits.max_phrases {
            return Err(LoadError::invalid(
                &pfile,
                "phrases",
                format!(
                    "{} phrases exceed the limit of {} (raise limits.max_phrases in project.json)",
                    records.len(),
                    limits.max_phrases
                ),
            ));
        }
        let phrases = PhraseTable::from_record_vec(records).map_err(|e| match &e {
            super::phrase::PhraseError::DuplicateId { id, second, .. } => {
                LoadError::invalid(&pfile, format!("row {second} id \"{id}\""), e.to_string())
            }
            super::phrase::PhraseError::Empty { row, field } => {
                LoadError::invalid(&pfile, format!("row {row} {field}"), e.to_string())
            }
        })?;
        if phrases.is_empty() {
            return Err(LoadError::invalid(&pfile, "phrases", "the list is empty"));
        }

        let gaussians = load_embeddings(&dir, &manifest, &phrases, floor, &limits)?;
        let users = match &manifest.users {
            Some(u) => load_users(&resolve_inside(&dir, u, "users")?, gaussians.dim(), &limits)?,
            None => Vec::new(),
        };
        let tree = match &manifest.tree {
            Some(t) => {
                let tpath = resolve_inside(&dir, t, "tree")?;
                if tpath.exists() {
                    Some(load_tree_limited(&tpath, &phrases, &limits)?)
                } else {
                    None
                }
            }
            None => None,
        };
        if let Some(o) = &manifest.overrides {
            resolve_inside(&dir, o, "overrides")?;
        }
        Ok(Project {
            dir,
            manifest,
            phrases,
            gaussians: Arc::new(gaussians),
            users,
            tree,
        })
    }

    /// The file the tree is (or would be) stored in.
    pub fn tree_path(&self) -> PathBuf {
        self.dir
            .join(self.manifest.tree.as_deref().unwrap_or("tree.json"))
    }

    /// Make sure the manifest names a tree file: a project without one gets
    /// `"tree": "tree.json"` written into `project.json` (atomically, the previous manifest
    /// kept as `project.json.bak`), so a tree written to [`Project::tree_path`] loads next time.
    /// Returns whether the manifest was changed.
    pub fn record_tree_in_manifest(&mut self) -> std::io::Result<bool> {
        if self.manifest.tree.is_some() {
            return Ok(false);
        }
        let mut manifest = self.manifest.clone();
        manifest.tree = Some("tree.json".to_string());
        fsutil::atomic_write(
            &self.dir.join(MANIFEST_NAME),
            &fsutil::to_json_pretty(&manifest),
            true,
        )?;
        self.manifest = manifest;
        Ok(true)
    }

    /// The override layer file.
    pub fn overrides_path(&self) -> PathBuf {
        self.dir.join(
            self.manifest
                .overrides
                .as_deref()
                .unwrap_or("overrides.json"),
        )
    }
}

fn load_embeddings(
    dir: &Path,
    manifest: &Manifest,
    phrases: &PhraseTable,
    floor: f64,
    limits: &Limits,
) -> Result<Gaussians, LoadError> {
    let mfile = dir.join(MANIFEST_NAME).display().to_string();
    let n = phrases.len();
    let check_rows = |file: &str, rows: usize| {
        if rows != n {
            Err(LoadError::invalid(
                file,
                "rows",
                format!("has {rows} rows but phrases.json lists {n} phrases"),
            ))
        } else {
            Ok(())
        }
    };
    let full_scale_check = |file: &str| {
        if manifest.scale != Scale::Variance {
            Err(LoadError::invalid(
                file,
                "scale",
                "full covariance matrices must be given as variances (scale \"variance\")",
            ))
        } else {
            Ok(())
        }
    };
    match &manifest.embeddings {
        EmbeddingsRef::Npy {
            means,
            variances,
            covariances,
        } => {
            let mpath = resolve_inside(dir, means, "embeddings.means")?;
            let mf = mpath.display().to_string();
            let (rows, d, mraw) = read_npy2(&mpath, limits)?;
            check_rows(&mf, rows)?;
            if d == 0 {
                return Err(LoadError::invalid(&mf, "shape", "dimension is 0"));
            }
            check_dim(&mf, d, limits)?;
            match (variances, covariances) {
                (Some(v), None) => {
                    let vpath = resolve_inside(dir, v, "embeddings.variances")?;
                    let vf = vpath.display().to_string();
                    let (vr, vd, vraw) = read_npy2(&vpath, limits)?;
                    check_rows(&vf, vr)?;
                    if vd != d {
                        return Err(LoadError::invalid(
                            &vf,
                            "shape",
                            format!("has dimension {vd} but {} has dimension {d}", mf),
                        ));
                    }
                    match (mraw, vraw) {
                        (NpyValues::F32(mvals), NpyValues::F32(mut vvals)) => {
                            check_finite_named(&mf, phrases, &mvals, d, "mean")?;
                            check_finite_named(&vf, phrases, &vvals, d, "variance")?;
                            apply_scale_f32(&mut vvals, manifest.scale);
                            Gaussians::from_diagonal_f32(n, d, mvals, vvals, floor)
                                .map_err(|e| gauss_err(&vf, phrases, e))
                        }
                        (mraw, vraw) => {
                            let (mvals, mut vvals) = (mraw.into_f64(), vraw.into_f64());
                            check_finite_named(&mf, phrases, &mvals, d, "mean")?;
                            check_finite_named(&vf, phrases, &vvals, d, "variance")?;
                            apply_scale(&mut vvals, manifest.scale);
                            Gaussians::from_diagonal(n, d, mvals, vvals, floor)
                                .map_err(|e| gauss_err(&vf, phrases, e))
                        }
                    }
                }
                (None, Some(c)) => {
                    full_scale_check(&mfile)?;
                    let cpath = resolve_inside(dir, c, "embeddings.covariances")?;
                    let cf = cpath.display().to_string();
                    let (cr, a, b, cvals) = read_npy3(&cpath, limits)?;
                    check_rows(&cf, cr)?;
                    if a != d || b != d {
                        return Err(LoadError::invalid(
                            &cf,
                            "shape",
                            format!("matrices are {a}×{b} but {mf} has dimension {d}"),
                        ));
                    }
                    let mvals = mraw.into_f64();
                    check_finite_named(&mf, phrases, &mvals, d, "mean")?;
                    Gaussians::from_full(n, d, mvals, cvals, floor)
                        .map_err(|e| gauss_err(&cf, phrases, e))
                }
                _ => Err(LoadError::invalid(
                    &mfile,
                    "embeddings",
                    "give exactly one of \"variances\" (diagonal) or \"covariances\" (full)",
                )),
            }
        }
        EmbeddingsRef::Json(f) => {
            let path = resolve_inside(dir, f, "embeddings")?;
            let file = path.display().to_string();
            let e: EmbeddingsJson = read_json_limited(&path, limits)?;
            check_rows(&file, e.means.len())?;
            let d = e.means.first().map_or(0, Vec::len);
            if d == 0 {
                return Err(LoadError::invalid(&file, "means", "dimension is 0"));
            }
            check_dim(&file, d, limits)?;
            let flat = |rows: &[Vec<f64>], field: &str| -> Result<Vec<f64>, LoadError> {
                let mut out = Vec::with_capacity(rows.len() * d);
                for (i, r) in rows.iter().enumerate() {
                    if r.len() != d {
                        return Err(LoadError::invalid(
                            &file,
                            format!("{field}[{i}] (phrase \"{}\")", phrases.id(i as PhraseId)),
                            format!("has {} values, expected {d}", r.len()),
                        ));
                    }
                    out.extend_from_slice(r);
                }
                Ok(out)
            };
            let means = flat(&e.means, "means")?;
            match (e.covariance, &e.variances, &e.covariances) {
                (CovarianceKind::Diagonal, Some(v), None) => {
                    check_rows(&file, v.len())?;
                    let mut vals = flat(v, "variances")?;
                    apply_scale(&mut vals, manifest.scale);
                    Gaussians::from_diagonal(n, d, means, vals, floor)
                        .map_err(|e| gauss_err(&file, phrases, e))
                }
                (CovarianceKind::Full, None, Some(c)) => {
                    full_scale_check(&file)?;
                    check_rows(&file, c.len())?;
                    let mut vals = Vec::with_capacity(n * d * d);
                    for (i, m) in c.iter().enumerate() {
                        if m.len() != d || m.iter().any(|r| r.len() != d) {
                            return Err(LoadError::invalid(
                                &file,
                                format!(
                                    "covariances[{i}] (phrase \"{}\")",
                                    phrases.id(i as PhraseId)
                                ),
                                format!("is not a {d}×{d} matrix"),
                            ));
                        }
                        for r in m {
                            vals.extend_from_slice(r);
                        }
                    }
                    Gaussians::from_full(n, d, means, vals, floor)
                        .map_err(|e| gauss_err(&file, phrases, e))
                }
                (CovarianceKind::Diagonal, _, _) => Err(LoadError::invalid(
                    &file,
                    "variances",
                    "covariance \"diagonal\" needs \"variances\" and no \"covariances\"",
                )),
                (CovarianceKind::Full, _, _) => Err(LoadError::invalid(
                    &file,
                    "covariances",
                    "covariance \"full\" needs \"covariances\" and no \"variances\"",
                )),
            }
        }
    }
}

fn check_dim(file: &str, d: usize, limits: &Limits) -> Result<(), LoadError> {
    if d > limits.max_dim {
        return Err(LoadError::invalid(
            file,
            "shape",
            format!(
                "dimension {d} exceeds the limit of {} (raise limits.max_dim in project.json)",
                limits.max_dim
            ),
        ));
    }
    Ok(())
}

fn check_finite_named<T: Copy + Into<f64>>(
    file: &str,
    phrases: &PhraseTable,
    vals: &[T],
    d: usize,
    what: &str,
) -> Result<(), LoadError> {
    if let Some((i, v)) = vals
        .iter()
        .map(|&x| x.into())
        .enumerate()
        .find(|(_, v): &(usize, f64)| !v.is_finite())
    {
        let row = i / d;
        return Err(LoadError::invalid(
            file,
            format!("phrase \"{}\" (row {row})", phrases.id(row as PhraseId)),
            format!("{what}[{}] is {v}, not a finite number", i % d),
        ));
    }
    Ok(())
}

fn load_users(path: &Path, d: usize, limits: &Limits) -> Result<Vec<UserProfile>, LoadError> {
    let file = path.display().to_string();
    let recs: Vec<UserRecord> = read_json_limited(path, limits)?;
    let mut seen = BTreeMap::new();
    let mut out = Vec::with_capacity(recs.len());
    for (i, r) in recs.into_iter().enumerate() {
        let field = format!("user \"{}\" (row {i})", r.id);
        if let Some(first) = seen.insert(r.id.clone(), i) {
            return Err(LoadError::invalid(
                &file,
                field,
                format!("duplicate id (first at row {first})"),
            ));
        }
        if r.mean.len() != d || r.variance.len() != d {
            return Err(LoadError::invalid(
                &file,
                field,
                format!(
                    "mean has {} and variance {} values; the embeddings have dimension {d}",
                    r.mean.len(),
                    r.variance.len()
                ),
            ));
        }
        let g = OwnedGaussian::diagonal(&r.mean, &r.variance).map_err(|e| {
            LoadError::invalid(
                &file,
                field.clone(),
                e.to_string().replacen("row 0: ", "", 1),
            )
        })?;
        out.push(UserProfile {
            id: r.id,
            label: r.label,
            gaussian: g,
        });
    }
    Ok(out)
}

/// Load a tree file: JSON (`{"root", "parent"}`) or a CSV edge list `child,parent` with a
/// header (the root is the row with an empty parent, or else the one parent that is never a
/// child).
pub fn load_tree(path: &Path, phrases: &PhraseTable) -> Result<Tree, LoadError> {
    load_tree_limited(path, phrases, &Limits::default())
}

fn load_tree_limited(
    path: &Path,
    phrases: &PhraseTable,
    limits: &Limits,
) -> Result<Tree, LoadError> {
    let file = path.display().to_string();
    let is_csv = path
        .extension()
        .is_some_and(|e| e.eq_ignore_ascii_case("csv"));
    let tf: TreeFile = if is_csv {
        parse_tree_csv(&read_bytes_limited(path, limits)?, &file)?
    } else {
        read_json_limited(path, limits)?
    };
    Tree::from_id_map(phrases, &tf.root, &tf.parent)
        .map_err(|e| LoadError::invalid(&file, "tree", e.to_string()))
}

/// Parse a CSV edge list (`child,parent` header) into the tree file form.
pub fn parse_tree_csv(bytes: &[u8], file: &str) -> Result<TreeFile, LoadError> {
    let mut rdr = csv::ReaderBuilder::new()
        .has_headers(true)
        .from_reader(bytes);
    let headers = rdr
        .headers()
        .map_err(|e| LoadError::invalid(file, "header", e.to_string()))?
        .clone();
    let col = |name: &str| headers.iter().position(|h| h.trim() == name);
    let (ci, pi) = match (col("child"), col("parent")) {
        (Some(c), Some(p)) => (c, p),
        _ => {
            return Err(LoadError::invalid(
                file,
                "header",
                "expected a header with columns \"child\" and \"parent\"",
            ));
        }
    };
    let mut parent = BTreeMap::new();
    let mut roots = Vec::new();
    for (i, rec) in rdr.records().enumerate() {
        let line = i + 2;
        let rec =
            rec.map_err(|e| LoadError::invalid(file, format!("line {line}"), e.to_string()))?;
        let c = rec.get(ci).unwrap_or("").trim().to_string();
        let p = rec.get(pi).unwrap_or("").trim().to_string();
        if c.is_empty() {
            return Err(LoadError::invalid(
                file,
                format!("line {line}"),
                "child is empty",
            ));
        }
        if p.is_empty() {
            roots.push(c);
        } else if let Some(prev) = parent.insert(c.clone(), p.clone())
            && prev != p
        {
            return Err(LoadError::invalid(
                file,
                format!("line {line}"),
                format!("\"{c}\" is given two parents: \"{prev}\" and \"{p}\""),
            ));
        }
    }
    if roots.is_empty() {
        let mut cand: Vec<&String> = parent
            .values()
            .filter(|p| !parent.contains_key(*p))
            .collect();
        cand.sort();
        cand.dedup();
        roots = cand.into_iter().cloned().collect();
    }
    match roots.len() {
        0 => Err(LoadError::invalid(
            file,
            "root",
            "no root: every node has a parent (a cycle?)",
        )),
        1 => Ok(TreeFile {
            root: roots.remove(0),
            parent,
        }),
        _ => Err(LoadError::invalid(
            file,
            "root",
            format!("several roots: {}", roots.join(", ")),
        )),
    }
}

/// Write a diagonal project (manifest, phrases, `.npy` embeddings, users, tree) to `dir`.
/// Used by the demo generator and by test helpers.
pub struct ProjectWriter<'a> {
    /// Project name.
    pub name: &'a str,
    /// Phrase table.
    pub phrases: &'a PhraseTable,
    /// Dimension.
    pub dim: usize,
    /// Row-major means.
    pub means: &'a [f32],
    /// Row-major variances.
    pub variances: &'a [f32],
    /// Shopper profiles.
    pub users: &'a [UserRecord],
    /// Tree, if any.
    pub tree: Option<&'a TreeFile>,
}

impl ProjectWriter<'_> {
    /// Write every file; existing files are replaced atomically.
    pub fn write(&self, dir: &Path) -> std::io::Result<()> {
        fs::create_dir_all(dir)?;
        let n = self.phrases.len();
        let manifest = Manifest {
            format: FORMAT_NAME.into(),
            version: FORMAT_VERSION,
            name: self.name.into(),
            phrases: "phrases.json".into(),
            embeddings: EmbeddingsRef::Npy {
                means: "means.npy".into(),
                variances: Some("variances.npy".into()),
                covariances: None,
            },
            scale: Scale::Variance,
            variance_floor: None,
            users: (!self.users.is_empty()).then(|| "users.json".into()),
            tree: self.tree.map(|_| "tree.json".into()),
            overrides: Some("overrides.json".into()),
            audit: None,
            limits: None,
        };
        fsutil::atomic_write(
            &dir.join(MANIFEST_NAME),
            &fsutil::to_json_pretty(&manifest),
            false,
        )?;
        fsutil::atomic_write(
            &dir.join("phrases.json"),
            &fsutil::to_json_pretty(&self.phrases.records()),
            false,
        )?;
        for (name, data) in [("means.npy", self.means), ("variances.npy", self.variances)] {
            let arr = Array2::from_shape_vec((n, self.dim), data.to_vec())
                .map_err(std::io::Error::other)?;
            let mut buf = Vec::new();
            arr.write_npy(&mut buf).map_err(std::io::Error::other)?;
            fsutil::atomic_write(&dir.join(name), &buf, false)?;
        }
        if !self.users.is_empty() {
            fsutil::atomic_write(
                &dir.join("users.json"),
                &fsutil::to_json_pretty(&self.users),
                false,
            )?;
        }
        if let Some(t) = self.tree {
            fsutil::atomic_write(&dir.join("tree.json"), &fsutil::to_json_pretty(t), false)?;
        }
        Ok(())
    }
}
