//! `eccaudit curve` (to be written).

#[derive(Debug, clap::Args)]
pub struct Args {}

pub fn run(_args: Args) -> anyhow::Result<()> {
    anyhow::bail!("'curve' is not written yet")
}
