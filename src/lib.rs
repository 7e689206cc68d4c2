//! treewright: curate and audit concept hierarchies built from Gaussian phrase embeddings.
//!
//! The library holds the model (`model`, no GUI), the headless command line (`cli`) and
//! the desktop workbench (`gui`). The `treewright` binary is a thin wrapper over them.

pub mod cli;
pub mod gui;
pub mod model;
