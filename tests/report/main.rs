//! Report rendering tests: one binary, a module per concern. The context is
//! hand-built with invented demo values (`demo.rs`); no fit runs here.

mod demo;
mod golden;
mod html;
mod record;
mod run_folder;
