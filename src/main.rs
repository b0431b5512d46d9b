//! The `emend` binary: parse arguments, run, exit with the command's code.

mod cli;

fn main() {
    std::process::exit(cli::main());
}
