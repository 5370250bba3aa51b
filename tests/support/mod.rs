//! Shared helpers for the NIST StRD conformance tests and benchmark: locating the reference
//! data, writing each problem as a fitwright recipe, the problem tables with their required
//! accuracy, and the LRE table.
#![allow(dead_code)]

pub mod conformance_table;
pub mod linear_cases;
pub mod nonlinear_cases;
pub mod strd_data;
pub mod strd_recipe;
