//! fitwright: calibration fits from reviewed TOML recipes.
//!
//! The pipeline, one module per stage: [`recipe`] (read and check the recipe) → [`data`] (load
//! the measurements) → expression engine, linearizability analysis, fit, acceptance and
//! reports. [`cli`] is the command line over it; `main.rs` only calls [`cli::main`].
#![cfg_attr(not(test), deny(clippy::unwrap_used))]

// First, so that its `print!`-family macros are in scope in every module below.
#[macro_use]
pub mod stdout;

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
pub use report::context::CAUTION;
