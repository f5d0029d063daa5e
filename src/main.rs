//! The `halfwire` command: parse arguments, call the library, map errors to
//! exit codes (0 ok, 1 a check failed, 2 bad input).

mod cli;

use std::process::ExitCode;

fn main() -> ExitCode {
    cli::main()
}
