//! `eccaudit table` (to be written).

#[derive(Debug, clap::Args)]
pub struct Args {}

pub fn run(_args: Args) -> anyhow::Result<()> {
    anyhow::bail!("'table' is not written yet")
}
