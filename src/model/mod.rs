//! Pure data and maths: phrases, Gaussians, trees, projects and everything computed from
//! them. Nothing in here knows about egui.

pub mod arborescence;
pub mod audit;
pub mod builder;
pub mod diff;
pub mod edit;
pub mod effective;
pub mod export;
pub mod fit;
pub mod fsutil;
pub mod gaussian;
pub mod history;
pub mod impact;
pub mod inclusion;
pub mod info;
mod kernels;
pub mod kmeans;
pub mod kneedle;
pub mod label;
pub mod label_clash;
pub mod lang;
pub mod lock;
pub mod memtrim;
pub mod merge;
pub mod overrides;
pub mod phrase;
pub mod project;
pub mod projection;
pub mod queue;
pub mod refusal;
pub mod sample;
pub mod signed;
pub mod signoff;
pub mod sshsig;
pub mod stats;
pub mod suggest;
pub mod time;
pub mod tree;
pub mod two_parents;
pub mod workspace;

pub use gaussian::{CovarianceKind, GaussianView, Gaussians, PhraseId, Similarity};
pub use phrase::PhraseTable;
pub use project::{LoadError, Project};
pub use tree::Tree;
pub use workspace::{AuditMode, Workspace, WorkspaceError};
