//! The `broodcast` command line: parses arguments, runs one command, maps the outcome to an
//! exit code (0 ok, 2 bad input, 1 internal error).
use std::process::ExitCode;

fn main() -> ExitCode {
    broodcast::cli::main()
}
