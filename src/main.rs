//! The `baler` command: a thin layer of flags over the library.

mod cli;

use std::process::ExitCode;

fn main() -> ExitCode {
    cli::main()
}
