//! The `fitwright` binary: a thin shell over the library.

fn main() {
    tune_allocator();
    // A closed pipe (`fitwright models | head`) should end the program quietly, as it does
    // for other Unix tools, not panic inside `println!`: restore the default SIGPIPE action
    // that the Rust runtime replaces with "ignore".
    #[cfg(unix)]
    // SAFETY: called once at start-up, before any other thread exists; SIG_DFL is a valid
    // disposition for SIGPIPE.
    unsafe {
        libc::signal(libc::SIGPIPE, libc::SIG_DFL);
    }
    let mut code = fitwright::cli::main();
    // Output that could not be written (a full disk behind `> log.txt`) is an output failure.
    if let Some(failure) = fitwright::stdout::finish() {
        use std::io::Write;
        let _ = writeln!(std::io::stderr(), "error: {failure}");
        code = code.max(3);
    }
    std::process::exit(code);
}

/// Large runs allocate and free many column-sized buffers (8 MB per million rows). With
/// glibc's defaults each comes from a fresh mmap or is trimmed back to the system, and
/// touching it again costs a page fault per 4 KB (about 100,000 on a million-row run).
/// Keeping freed memory in the heap lets the next buffer reuse those pages.
fn tune_allocator() {
    #[cfg(all(target_os = "linux", target_env = "gnu"))]
    // SAFETY: mallopt only changes allocator tuning; called first in main, before any other
    // thread exists.
    unsafe {
        libc::mallopt(libc::M_MMAP_THRESHOLD, 256 << 20);
        libc::mallopt(libc::M_TRIM_THRESHOLD, 64 << 20);
    }
}
