//! NumPy `.npz` archives (`np.savez`, plain or compressed): the arrays the manifest names,
//! read with the same checks as a lone `.npy`.
//!
//! An archive member is read into memory only up to the project's file-size limit, whatever
//! size the zip entry claims, and its `.npy` header is then checked against the bytes actually
//! read, so a hostile header or entry size cannot make the loader allocate more than the
//! limit.

use std::io::Read;
use std::path::Path;

use super::LoadError;
use super::manifest::Limits;
use super::npy::{NpyValues, parse_npy2_raw, parse_npy3};
use super::read::open_limited;

/// An opened `.npz` archive.
pub(super) struct NpzArchive<R> {
    zip: zip::ZipArchive<R>,
    file: String,
    max_bytes: u64,
}

impl NpzArchive<std::io::BufReader<std::fs::File>> {
    /// Open `path`, refusing it when it is larger than the limit or not a zip archive.
    pub(super) fn open(path: &Path, limits: &Limits) -> Result<Self, LoadError> {
        let (f, _) = open_limited(path, limits)?;
        NpzArchive::from_reader(
            std::io::BufReader::new(f),
            &path.display().to_string(),
            limits,
        )
    }
}

impl<R: Read + std::io::Seek> NpzArchive<R> {
    /// Read the archive's directory from `r`; `file` names it in errors.
    fn from_reader(r: R, file: &str, limits: &Limits) -> Result<Self, LoadError> {
        let file = file.to_string();
        let zip = zip::ZipArchive::new(r).map_err(|e| LoadError::Npy {
            file: file.clone(),
            message: format!("not a usable .npz (zip) archive: {e}"),
        })?;
        Ok(NpzArchive {
            zip,
            file,
            max_bytes: limits.max_file_mb.saturating_mul(1 << 20),
        })
    }

    /// The name errors use for one member: `archive.npz[name]`.
    pub(super) fn member_name(&self, name: &str) -> String {
        format!("{}[{name}]", self.file)
    }

    /// The raw bytes of member `name` (or `name.npy`, as `np.savez` stores it).
    fn member(&mut self, name: &str) -> Result<Vec<u8>, LoadError> {
        let mut names: Vec<String> = self.zip.file_names().map(str::to_string).collect();
        names.sort();
        let wanted = [name.to_string(), format!("{name}.npy")];
        let Some(found) = wanted.iter().find(|w| names.contains(w)) else {
            let shown: Vec<&str> = names
                .iter()
                .map(|n| n.strip_suffix(".npy").unwrap_or(n))
                .collect();
            return Err(LoadError::invalid(
                &self.file,
                format!("array \"{name}\""),
                format!(
                    "no such array in the archive (it holds: {})",
                    shown.join(", ")
                ),
            ));
        };
        let member = self.member_name(name);
        let entry = self.zip.by_name(found).map_err(|e| LoadError::Npy {
            file: member.clone(),
            message: format!("cannot open the archive member: {e}"),
        })?;
        if entry.size() > self.max_bytes {
            return Err(LoadError::invalid(
                &member,
                "size",
                format!(
                    "the member unpacks to {} bytes, over the limit of {} MiB (raise limits.max_file_mb in project.json)",
                    entry.size(),
                    self.max_bytes >> 20
                ),
            ));
        }
        // capacity from the declared size, bounded by the limit checked above
        let mut bytes = Vec::with_capacity(entry.size().min(1 << 24) as usize);
        let got = entry
            .take(self.max_bytes.saturating_add(1))
            .read_to_end(&mut bytes)
            .map_err(|e| LoadError::Npy {
                file: member.clone(),
                message: format!("cannot unpack the archive member: {e}"),
            })?;
        if got as u64 > self.max_bytes {
            return Err(LoadError::invalid(
                &member,
                "size",
                format!(
                    "the member unpacks to more than the limit of {} MiB (raise limits.max_file_mb in project.json)",
                    self.max_bytes >> 20
                ),
            ));
        }
        Ok(bytes)
    }

    /// A 2-D float array, in the file's own precision: (rows, columns, values).
    pub(super) fn array2(&mut self, name: &str) -> Result<(usize, usize, NpyValues), LoadError> {
        let bytes = self.member(name)?;
        parse_npy2_raw(&bytes, &self.member_name(name))
    }

    /// A 3-D float array as f64: (n, a, b, values).
    pub(super) fn array3(
        &mut self,
        name: &str,
    ) -> Result<(usize, usize, usize, Vec<f64>), LoadError> {
        let bytes = self.member(name)?;
        parse_npy3(&bytes, &self.member_name(name))
    }
}

/// Parse a 2-D float array named `name` from the bytes of an `.npz` archive (for tests and
/// fuzzing; the loader reads from the file).
pub fn parse_npz2(
    bytes: &[u8],
    name: &str,
    file: &str,
    limits: &Limits,
) -> Result<(usize, usize, NpyValues), LoadError> {
    NpzArchive::from_reader(std::io::Cursor::new(bytes), file, limits)?.array2(name)
}
