//! `heatbound convert`: check a sensor against a calibrator.

/// Arguments of `heatbound convert`.
#[derive(clap::Args)]
pub struct Args {
    /// Print JSON instead of text.
    #[arg(long)]
    pub json: bool,
}

/// Runs the subcommand.
pub fn run(_args: &Args) -> anyhow::Result<()> {
    anyhow::bail!("sensor conversion is not implemented yet")
}
