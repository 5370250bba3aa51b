//! The `fitwright` binary: a thin shell over the library.

fn main() {
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
