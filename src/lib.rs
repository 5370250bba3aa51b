//! fitwright: calibration fits from reviewed TOML recipes.
//!
//! The pipeline, one module per stage: [`recipe`] (read and check the recipe) → [`data`] (load
//! the measurements) → expression engine, linearizability analysis, fit, acceptance and
//! reports. [`cli`] is the command line over it; `main.rs` only calls [`cli::main`].
//!
//! Bad input never panics (SPEC §10). Outside tests the library denies `unwrap`, `expect`,
//! `panic!`, `unreachable!` and unfinished code; the few `expect`s left name the invariant
//! that makes them safe and carry an `allow` saying so. Indexing is denied in the modules
//! that take user text and files apart (recipe, data, source, errors, history, reports,
//! batch and helpers); the numerical cores index vectors whose lengths they check first.
#![cfg_attr(
    not(test),
    deny(
        clippy::unwrap_used,
        clippy::expect_used,
        clippy::panic,
        clippy::unreachable,
        clippy::todo,
        clippy::unimplemented
    )
)]

// First, so that its `print!`-family macros are in scope in every module below.
#[macro_use]
pub mod stdout;

#[cfg_attr(not(test), deny(clippy::indexing_slicing))]
pub mod acceptance;
pub mod analysis;
#[cfg_attr(not(test), deny(clippy::indexing_slicing))]
pub mod batch;
pub mod cli;
#[cfg_attr(not(test), deny(clippy::indexing_slicing))]
pub mod data;
#[cfg_attr(not(test), deny(clippy::indexing_slicing))]
pub mod error;
pub mod estimate;
pub mod expr;
pub mod fit;
#[cfg_attr(not(test), deny(clippy::indexing_slicing))]
pub mod fsutil;
#[cfg_attr(not(test), deny(clippy::indexing_slicing))]
pub mod hash;
#[cfg_attr(not(test), deny(clippy::indexing_slicing))]
pub mod history;
#[cfg_attr(not(test), deny(clippy::indexing_slicing))]
pub mod index;
#[cfg_attr(not(test), deny(clippy::indexing_slicing))]
pub mod init;
mod memory;
pub mod metrology;
pub mod model;
pub mod pipeline;
#[cfg_attr(not(test), deny(clippy::indexing_slicing))]
pub mod predict;
#[cfg_attr(not(test), deny(clippy::indexing_slicing))]
pub mod recipe;
#[cfg_attr(not(test), deny(clippy::indexing_slicing))]
pub mod recipes;
#[cfg_attr(not(test), deny(clippy::indexing_slicing))]
pub mod report;
#[cfg_attr(not(test), deny(clippy::indexing_slicing))]
pub mod result;
#[cfg_attr(not(test), deny(clippy::indexing_slicing))]
pub mod source;
pub mod stats;
#[cfg_attr(not(test), deny(clippy::indexing_slicing))]
pub mod validate;
mod vector;
#[cfg_attr(not(test), deny(clippy::indexing_slicing))]
pub mod verify;

pub use error::{Error, ErrorKind, Result};

/// The caution of SPEC §12, shown in the README and every report.
pub use report::context::CAUTION;
