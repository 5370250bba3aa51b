//! Tests of the expression engine.

mod engine;
mod errors;
mod props;
