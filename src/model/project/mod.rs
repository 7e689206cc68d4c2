//! The project folder: `project.json` and the files it names, loaded and validated.
//!
//! Loading is all-or-nothing: any malformed input returns a [`LoadError`] naming the file and
//! the phrase, row or field, and no partially loaded project is ever handed out.
//!
//! Files: `manifest` (the `project.json` schema), `read` (paths inside the folder, size
//! guards, JSON), `npy` (NumPy arrays), `embeddings` (the Gaussians), `tree_file` (JSON
//! and CSV trees), `load` ([`Project`] and its loading), `writer` ([`ProjectWriter`], the
//! one writer of whole projects, also used by the demo and synthetic generators).

mod embeddings;
mod embeddings_npz;
mod load;
mod manifest;
mod npy;
mod occurrences;
mod parquet;
pub mod phrase_langs;
mod quiet_panic;
mod read;
mod skos_tree;
mod taxonomy_import;
mod tree_file;
mod writer;

pub use embeddings::EmbeddingsJson;
pub use embeddings_npz::parse_npz2;
pub use load::{Project, UserProfile, UserRecord};
pub use manifest::{
    EmbeddingsRef, FORMAT_NAME, FORMAT_VERSION, Limits, MANIFEST_NAME, Manifest, Scale,
};
pub use npy::{NpyValues, parse_npy2, parse_npy2_raw, parse_npy3};
pub use occurrences::{BATCH_ROWS, fit_npy, fit_parquet, fit_parquet_bytes};
pub use parquet::{
    DEFAULT_ID_COLUMN, DEFAULT_LABEL_COLUMN, ParquetColumns, is_parquet_path,
    parse_parquet_columns, read_parquet_columns,
};
pub use read::{parse_json, read_json, resolve_inside};
pub use skos_tree::{SkosReport, SkosTree, is_skos_path, load_skos_tree, parse_skos_tree};
pub use taxonomy_import::TAXONOMY_FILE;
pub use tree_file::{load_tree, parse_tree_csv, report_path_of, tree_bytes, tree_csv};
pub use writer::ProjectWriter;

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
