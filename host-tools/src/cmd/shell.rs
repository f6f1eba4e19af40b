//! `heatbound completions SHELL` and `heatbound man`: what a shell and `man`
//! need to know about the command line, generated from its own clap
//! definitions (so they cannot fall behind it).
//!
//! ```text
//! main's clap::Command --clap_complete--> completion script --> stdout
//!                      --clap_mangen----> roff man page(s) --> stdout, or --out DIR/heatbound*.1
//! ```
//!
//! Both are written in full to a buffer first: a closed pipe (`| head`)
//! ends the command quietly instead of leaving half a script.
use std::io::Write as _;
use std::path::{Path, PathBuf};

use anyhow::{Context, Result};
use clap_complete::Shell;

/// The name the scripts and pages complete and describe.
const BIN: &str = "heatbound";

/// Arguments of `heatbound completions`.
#[derive(clap::Args)]
#[command(after_help = "Install, e.g.:
  bash: heatbound completions bash > ~/.local/share/bash-completion/completions/heatbound
  zsh:  heatbound completions zsh > ~/.zfunc/_heatbound   (with fpath+=(~/.zfunc) before compinit)
  fish: heatbound completions fish > ~/.config/fish/completions/heatbound.fish")]
pub struct CompletionsArgs {
    /// The shell to complete in.
    #[arg(value_enum, value_name = "SHELL")]
    pub shell: Shell,
}

/// Arguments of `heatbound man`.
#[derive(clap::Args)]
#[command(
    after_help = "Install, e.g.: heatbound man --out ~/.cargo/share/man/man1 (man looks there \
when ~/.cargo/bin is on your PATH), then `man heatbound`, `man heatbound-watch`."
)]
pub struct ManArgs {
    /// Write one page per command (heatbound.1, heatbound-watch.1, …) into
    /// this folder, created if missing, instead of printing heatbound(1).
    #[arg(long, value_name = "DIR")]
    pub out: Option<PathBuf>,
}

/// Prints the completion script for `args.shell`; `cli` is the whole
/// command line's definition.
pub fn completions(args: &CompletionsArgs, mut cli: clap::Command) -> Result<()> {
    let mut script = Vec::new();
    clap_complete::generate(args.shell, &mut cli, BIN, &mut script);
    emit(&script)
}

/// Prints heatbound(1), or writes every page into `args.out`; `cli` is the
/// whole command line's definition.
pub fn man(args: &ManArgs, cli: clap::Command) -> Result<()> {
    // `heatbound help` is not a command of its own in the pages.
    let mut cli = cli.name(BIN).bin_name(BIN).disable_help_subcommand(true);
    cli.build();
    let Some(dir) = &args.out else {
        let mut page = Vec::new();
        clap_mangen::Man::new(cli)
            .render(&mut page)
            .context("rendering the man page")?;
        return emit(&page);
    };
    std::fs::create_dir_all(dir).with_context(|| format!("{}: cannot create", dir.display()))?;
    let mut written = Vec::new();
    write_pages(&cli, dir, &mut written)?;
    for path in written {
        println!("{}", path.display());
    }
    Ok(())
}

/// Writes the page of `cmd` and of each of its subcommands into `dir`.
fn write_pages(cmd: &clap::Command, dir: &Path, written: &mut Vec<PathBuf>) -> Result<()> {
    let path = clap_mangen::Man::new(cmd.clone())
        .generate_to(dir)
        .with_context(|| format!("{}: cannot write the man page", dir.display()))?;
    written.push(path);
    for sub in cmd.get_subcommands().filter(|s| !s.is_hide_set()) {
        write_pages(sub, dir, written)?;
    }
    Ok(())
}

/// `bytes` to stdout; a reader that went away (`| head`) is not an error.
fn emit(bytes: &[u8]) -> Result<()> {
    let mut stdout = std::io::stdout().lock();
    match stdout.write_all(bytes).and_then(|()| stdout.flush()) {
        Err(e) if e.kind() != std::io::ErrorKind::BrokenPipe => {
            Err(e).context("writing to standard output")
        }
        _ => Ok(()),
    }
}
