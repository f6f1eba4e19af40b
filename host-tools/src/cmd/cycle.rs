//! `heatbound cycle`: ideal-gas reference cycles.
use std::path::PathBuf;

/// Arguments of `heatbound cycle`.
#[derive(clap::Args)]
pub struct Args {
    /// The cycle file (TOML).
    pub file: PathBuf,
    /// Print JSON instead of a table.
    #[arg(long)]
    pub json: bool,
}

/// Runs the subcommand.
pub fn run(args: &Args) -> anyhow::Result<()> {
    anyhow::bail!("{}: cycle evaluation is not implemented yet", args.file.display())
}
