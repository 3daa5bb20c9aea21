//! The `icefold` binary: parse, run, exit with the documented status (see `icefold::error`).

fn main() {
    std::process::exit(icefold::cli::main());
}
