//! The `fitwright` binary: a thin shell over the library.

fn main() {
    std::process::exit(fitwright::cli::main());
}
