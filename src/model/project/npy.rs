//! NumPy `.npy` arrays: float32 or float64, 2-D or 3-D, checked before any allocation.

use std::path::Path;

use ndarray::{Array2, Array3};
use ndarray_npy::{ReadNpyError, ReadNpyExt};

use super::LoadError;
use super::manifest::Limits;
use super::read::open_limited;

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

/// A 2-D array read from `.npy` (float32 or float64) in its own precision, with its shape.
/// The values are read straight from the file into their final buffer: the file's bytes are
/// never held in memory as a second copy.
pub(super) fn read_npy2(
    path: &Path,
    limits: &Limits,
) -> Result<(usize, usize, NpyValues), LoadError> {
    let (f, len) = open_limited(path, limits)?;
    let mut r = std::io::BufReader::with_capacity(1 << 16, f);
    npy2_from(&mut r, len, &path.display().to_string())
}

pub(super) fn read_npy3(
    path: &Path,
    limits: &Limits,
) -> Result<(usize, usize, usize, Vec<f64>), LoadError> {
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
