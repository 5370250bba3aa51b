//! Fit stage: weighted linear least squares, Levenberg–Marquardt and the statistics of a fit.
//!
//! Pure computation: values in, values out, no I/O. The model enters the nonlinear fit through
//! the [`lm::Model`] trait, so this module does not depend on the expression engine.
//!
//! - [`linear`]: Householder QR on column-scaled data, never the normal equations.
//! - [`lm`]: Levenberg–Marquardt with exact Jacobian, scaling, bounds and reported stop reasons.
//! - [`covariance`]: parameter covariance, standard errors, intervals, bands and summary statistics.
//! - [`strd`]: a parser for the NIST StRD reference files (text in, values out), for
//!   conformance tests and a later `validate` command.

// Index loops mirror the subscripts of the formulas they implement.
#![allow(clippy::needless_range_loop)]

pub mod covariance;
pub(crate) mod dense;
pub mod linear;
pub mod lm;
pub(crate) mod rows;
pub mod strd;
