//! `regionkey inspect` (being written).

use super::Global;
use crate::error::Result;

/// Arguments.
#[derive(Debug, clap::Args)]
pub struct Args {}

/// Runs the command.
pub fn run(_args: Args, _global: Global) -> Result<()> {
    Err(super::not_built("inspect"))
}
