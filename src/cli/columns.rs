//! `pondus columns`: which columns each measure reads, by route, and the
//! sources of the formulas.

use super::fit::groups::MeasureArg;
use super::outputs::{self, Target};
use clap::Args;
use pondus::error::Result;

/// Options of `pondus columns`.
#[derive(Debug, Args)]
pub struct ColumnsArgs {
    /// The measure to list [default: every measure].
    #[arg(long, value_enum)]
    pub measure: Option<MeasureArg>,
}

/// Runs `columns`: the listing on standard output.
///
/// # Errors
/// The write error of standard output.
pub fn run_columns(args: &ColumnsArgs) -> Result<()> {
    let text = match args.measure {
        Some(m) => pondus::render::columns::text(m.into()),
        None => pondus::render::columns::all(),
    };
    outputs::emit(&Target::Stdout, text.as_bytes())
}
