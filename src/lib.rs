//! fitwright: calibration fits from TOML recipes.

pub mod stats;
