//! fitwright: calibration fits from reviewed TOML recipes.
//!
//! The pipeline, one module per stage: [`recipe`] (read and check the recipe) → [`data`] (load
//! the measurements) → expression engine, linearizability analysis, fit, acceptance and
//! reports. [`cli`] is the command line over it; `main.rs` only calls [`cli::main`].
#![cfg_attr(not(test), deny(clippy::unwrap_used))]

pub mod acceptance;
pub mod analysis;
pub mod batch;
pub mod cli;
pub mod data;
pub mod error;
pub mod estimate;
pub mod expr;
pub mod fit;
pub mod fsutil;
pub mod hash;
pub mod history;
pub mod index;
pub mod init;
pub mod metrology;
pub mod model;
pub mod pipeline;
pub mod predict;
pub mod recipe;
pub mod recipes;
pub mod report;
pub mod result;
pub mod source;
pub mod stats;
pub mod validate;
pub mod verify;

pub use error::{Error, ErrorKind, Result};

/// The caution of SPEC §12, shown in the README and every report.
pub const CAUTION: &str = "Calibration results can feed decisions about safety, health and legal metrology. \
This report is an aid to a qualified person's review; acceptance by this tool does not replace the \
laboratory's documented procedure, its accreditation requirements (for example ISO/IEC 17025) or local \
regulations, which prevail.";
