//! `baler extract` (to be written).

use std::process::ExitCode;

#[derive(clap::Args)]
pub struct Args {}

pub fn run(_args: Args) -> baler::Result<ExitCode> {
    Err(baler::Error::Unsupported(
        "`baler extract` is not built yet".into(),
    ))
}
