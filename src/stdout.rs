//! Printing that never panics. The standard `print!` family panics when the stream cannot be
//! written — standard output redirected to a file on a full disk, a device that refuses
//! writes — which turned a finished run into a crash. This module's macros, which shadow
//! `print!`, `println!`, `eprint!` and `eprintln!` in the whole library (`lib.rs` declares it
//! first), write the same text and remember the first failure instead; the binary reports it
//! and exits 3 (SPEC §10: an output could not be written). A closed pipe still ends the
//! program quietly through SIGPIPE (see `main.rs`).

use std::io::Write;
use std::sync::Mutex;

static FAILURE: Mutex<Option<String>> = Mutex::new(None);

fn remember(stream: &str, e: &std::io::Error) {
    if let Ok(mut f) = FAILURE.lock()
        && f.is_none()
    {
        *f = Some(format!("cannot write to standard {stream}: {e}"));
    }
}

/// Write to standard output; a failure is remembered, never a panic.
pub fn out(args: std::fmt::Arguments<'_>) {
    if let Err(e) = std::io::stdout().lock().write_fmt(args) {
        remember("output", &e);
    }
}

/// Write to standard error; a failure is remembered, never a panic.
pub fn err(args: std::fmt::Arguments<'_>) {
    if let Err(e) = std::io::stderr().lock().write_fmt(args) {
        remember("error", &e);
    }
}

/// Flush standard output and return the first write failure of the run, if any.
pub fn finish() -> Option<String> {
    if let Err(e) = std::io::stdout().lock().flush() {
        remember("output", &e);
    }
    FAILURE.lock().ok().and_then(|f| f.clone())
}

macro_rules! print {
    ($($arg:tt)*) => { $crate::stdout::out(format_args!($($arg)*)) };
}

macro_rules! println {
    () => { $crate::stdout::out(format_args!("\n")) };
    ($($arg:tt)*) => { $crate::stdout::out(format_args!("{}\n", format_args!($($arg)*))) };
}

macro_rules! eprint {
    ($($arg:tt)*) => { $crate::stdout::err(format_args!($($arg)*)) };
}

// Not used yet; defined so that a future `eprintln!` cannot panic either.
#[allow(unused_macros)]
macro_rules! eprintln {
    () => { $crate::stdout::err(format_args!("\n")) };
    ($($arg:tt)*) => { $crate::stdout::err(format_args!("{}\n", format_args!($($arg)*))) };
}
