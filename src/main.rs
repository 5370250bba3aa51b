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
    std::process::exit(fitwright::cli::main());
}
