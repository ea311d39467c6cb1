//! `pondus completions SHELL`: a shell completion script for every
//! subcommand and flag, generated from the clap definition of [`super::Cli`].

use super::outputs::{emit, Target};
use super::Cli;
use clap::{Args, CommandFactory};
use clap_complete::Shell;
use pondus::error::Result;

/// Options of `pondus completions`.
#[derive(Debug, Args)]
pub struct CompletionsArgs {
    /// The shell the script is for.
    #[arg(value_enum)]
    pub shell: Shell,
}

/// The completion script for `shell` (written into memory, which cannot fail).
pub fn script(shell: Shell) -> Vec<u8> {
    let mut cmd = Cli::command();
    let mut bytes = Vec::new();
    clap_complete::generate(shell, &mut cmd, "pondus", &mut bytes);
    bytes
}

/// Prints the completion script of the chosen shell.
///
/// # Errors
/// The write error of standard output.
pub fn run_completions(args: &CompletionsArgs) -> Result<()> {
    emit(&Target::Stdout, &script(args.shell))
}
