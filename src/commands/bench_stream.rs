//! `sieveline bench-stream`: placeholder until the bench lands.
use anyhow::Result;

use crate::cli::BenchStreamArgs;
use crate::settings::Settings;

pub fn run(_settings: Settings, _args: &BenchStreamArgs) -> Result<()> {
    anyhow::bail!("bench-stream is not built yet")
}
