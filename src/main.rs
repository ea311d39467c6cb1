//! The `pondus` command: parse, run, report errors, exit.

mod cli;

use clap::Parser;
use cli::{Cli, Command};
use std::process::ExitCode;

fn run() -> anyhow::Result<()> {
    let cli = Cli::parse();
    match cli.command {
        Command::Fit(args) => {
            let run = args.check()?;
            cli::run_fit(&run)?;
        }
        Command::Plan(args) => {
            let run = args.check()?;
            cli::run_plan(&run)?;
        }
        Command::Sites(args) => {
            let run = args.check()?;
            cli::run_sites(&run)?;
        }
        Command::Sql(args) => {
            let q = args.query()?;
            cli::outputs::emit(&cli::outputs::Target::Stdout, q.as_bytes())?;
        }
    }
    Ok(())
}

fn main() -> ExitCode {
    match run() {
        Ok(()) => ExitCode::SUCCESS,
        Err(err) => {
            if let Some(pondus::Error::Io { source, .. }) = err.downcast_ref::<pondus::Error>() {
                if source.kind() == std::io::ErrorKind::BrokenPipe {
                    return ExitCode::SUCCESS;
                }
            }
            eprintln!("pondus: error: {err:#}");
            let code = err
                .downcast_ref::<pondus::Error>()
                .map(|e| e.exit_code())
                .unwrap_or(1);
            ExitCode::from(code)
        }
    }
}
