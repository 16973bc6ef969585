//! Thin binary: parse the command line, run the library, map errors to exit codes.
mod cli;

fn main() {
    std::process::exit(cli::main());
}
