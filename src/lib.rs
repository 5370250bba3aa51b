//! fitwright: calibration fits from TOML recipes.
