//! Report rendering: turns one report context into HTML, Markdown and SVG
//! plots, and writes a run folder atomically.

pub mod format;
pub mod markdown;
