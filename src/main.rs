//! Thin binary: parse the command line, run the library, map errors to exit codes.
fn main() {
    std::process::exit(voxperm::cli::main());
}
