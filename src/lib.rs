//! fitwright: calibration fits from TOML recipes.
pub mod analysis;
pub mod expr;
