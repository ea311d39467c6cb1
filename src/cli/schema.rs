//! `pondus schema COMMAND`: the JSON Schema of a subcommand's `--json`
//! output, generated from the result types
//! ([`pondus::result::schema`]); the same text as the published
//! `docs/schema/COMMAND.schema.json`.

use super::outputs::{self, Target};
use clap::{Args, ValueEnum};
use pondus::error::Result;
use pondus::result::schema::JsonOutput;

/// The subcommands that write JSON.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum SchemaArg {
    /// The output of `pondus fit --json`.
    Fit,
    /// The output of `pondus sites --json`.
    Sites,
    /// The output of `pondus plan --json`.
    Plan,
}

impl From<SchemaArg> for JsonOutput {
    fn from(a: SchemaArg) -> Self {
        match a {
            SchemaArg::Fit => JsonOutput::Fit,
            SchemaArg::Sites => JsonOutput::Sites,
            SchemaArg::Plan => JsonOutput::Plan,
        }
    }
}

/// Options of `pondus schema`.
#[derive(Debug, Args)]
pub struct SchemaArgs {
    /// The subcommand whose JSON output the schema describes.
    #[arg(value_enum, value_name = "COMMAND")]
    pub command: SchemaArg,
}

/// Prints the schema on standard output.
///
/// # Errors
/// The write error of standard output.
pub fn run_schema(args: &SchemaArgs) -> Result<()> {
    let which = JsonOutput::from(args.command);
    outputs::emit(&Target::Stdout, which.text().as_bytes())
}
