//! Shared helpers for the NIST StRD conformance tests: locating the reference data,
//! the hand-coded models, the problem tables with their required accuracy, and the LRE
//! computations.
#![allow(dead_code)]

pub mod conformance_table;
pub mod linear_cases;
pub mod nist_models;
pub mod nonlinear_cases;
pub mod strd_data;
