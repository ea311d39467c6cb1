//! The `pondus` command: parse, run, report errors, exit.

mod cli;

use clap::Parser;
use std::process::ExitCode;

fn run() -> anyhow::Result<()> {
    let cli = cli::Cli::parse();
    cli::run(&cli)?;
    Ok(())
}

fn main() -> ExitCode {
    // Large freed columns go back to the system instead of staying with
    // the process (see the module).
    cli::memory::return_freed_blocks();
    match run() {
        Ok(()) => ExitCode::SUCCESS,
        Err(err) => {
            if let Some(pondus::Error::Io { source, .. }) = err.downcast_ref::<pondus::Error>() {
                if source.kind() == std::io::ErrorKind::BrokenPipe {
                    return ExitCode::SUCCESS;
                }
            }
            // Messages quote cells of the data file: no control characters
            // or bidirectional overrides reach the terminal.
            let message = format!("{err:#}");
            eprintln!(
                "pondus: error: {}",
                pondus::support::text::terminal(&message)
            );
            let code = err
                .downcast_ref::<pondus::Error>()
                .map(|e| e.exit_code())
                .unwrap_or(1);
            ExitCode::from(code)
        }
    }
}
