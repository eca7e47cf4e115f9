//! Interchange: decode results in open formats other tools read.
//!
//! - [`csv`]: one row per decoded frame, for spreadsheets and scripts.
//! - [`sigmf`]: SigMF annotations, one per frame, in a metadata file beside the capture that
//!   references the samples without copying or rewriting them.
//!
//! Every file goes through [`crate::output`]: written whole or not at all, and an existing
//! file is kept unless `force` is set.

pub mod csv;
pub mod sigmf;

use crate::output::OutputError;

/// Errors of the interchange layer.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum InterchangeError {
    /// The output could not be created or committed.
    #[error(transparent)]
    Output(#[from] OutputError),
    /// Reading an input or writing a row failed.
    #[error("{0}")]
    Io(#[from] std::io::Error),
    /// The capture cannot be described this way.
    #[error("{0}")]
    Unsupported(String),
    /// The capture's own SigMF metadata could not be used.
    #[error("bad SigMF metadata: {0}")]
    Metadata(String),
}
