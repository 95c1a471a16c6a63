//! `baler dump` (being written).

use std::process::ExitCode;

#[derive(clap::Args)]
pub struct Args {}

pub fn run(_args: Args) -> baler::Result<ExitCode> {
    Err(baler::Error::Unsupported(
        "`baler dump` is not built yet".into(),
    ))
}
